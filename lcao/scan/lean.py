"""PySCF's SCF classes with the fixed cost of each library call taken out of the SCF cycle.

A warm-started point of a diatomic converges in a handful of cycles on matrices of 10 to 30
functions, where the fixed cost of a library call outweighs its arithmetic. Measured per call
(N2, 6-31G, 18 functions; PySCF 2.14, SciPy 1.17, NumPy 2.4, one thread; microseconds):

* ``scipy.linalg.eigh`` of an 18 x 18 matrix 124, of which the LAPACK routine it calls (dsyevr)
  is 55: the rest is the wrapper's argument checks and batching. PySCF's ``_eigh`` calls it for
  each spin in every cycle, and its DIIS once more on the small DIIS matrix;
* ``pyscf.lib.dot`` of two 18 x 18 matrices 30 through ctypes, against 4 for numpy's ``@``.
  PySCF's commutator DIIS makes four such products per spin and cycle;
* J and K: see :mod:`lcao.scan.jk`.

A warm UHF point (7 cycles, integrals in memory) went from 10.9-12.2 ms to 9.0-9.2 ms with these
changes (best of seven runs of 60 calls each, before and after).

:func:`attach` swaps an SCF object's class for a same-named subclass of its own class (so
PySCF's second-order copy, which subclasses the object's class, keeps it) with:

* ``_eigh``: LAPACK's dsyevr called directly, with the workspace ``scipy.linalg.eigh`` asks for
  and on the matrix PySCF forms, so the orbitals are PySCF's to the last bit;
* ``DIIS``: :class:`LeanDIIS`, PySCF's commutator DIIS (``pyscf.scf.diis.CDIIS``) with the
  error vector from numpy products and the small DIIS matrix tested and solved with numpy. The
  error vector differs from PySCF's in the last bits (another BLAS); converged energies agree to
  about 1e-11 Eh (tests/test_caches.py compares whole SCFs and a curve with PySCF's own classes);
* ``get_jk``: the matrix products of :mod:`lcao.scan.jk` where the basis has at most
  :data:`lcao.scan.jk.MAX_NAO` functions and the integrals are in memory (``mf._eri``);
* ``_finalize``: nothing below PySCF's NOTE verbosity (its UHF computes <S^2> there only to log it).

Complex matrices and every case not listed go to PySCF's own methods unchanged.
"""

from __future__ import annotations

import numpy as np

from . import jk

_CLASSES: dict = {}
_LWORK: dict = {}


def _dsyevr_work(n: int):
    """(lwork, liwork) of dsyevr for an n x n matrix, as ``scipy.linalg.eigh`` computes them."""
    got = _LWORK.get(n)
    if got is None:
        from scipy.linalg import lapack

        work, iwork, info = lapack.dsyevr_lwork(n, lower=1)
        if info != 0:  # pragma: no cover - a workspace query does not fail for n >= 1
            raise ValueError(f"dsyevr workspace query failed: {info}")
        got = _LWORK[n] = (int(work.real), int(iwork))
    return got


def orthogonal_eigh(h, x):
    """Eigenvalues and orbitals of the Fock matrix ``h`` in the orthogonal basis ``x``, as PySCF's
    ``SCF._eigh(h, s, x=x)`` computes them (``x^T h x``, dsyevr, phases fixed), or None where
    LAPACK reports a failure (the caller then asks PySCF)."""
    from pyscf.scf import hf
    from scipy.linalg import lapack

    a = x.T.dot(h).dot(x)
    if a.shape[0] == 0:
        return None
    lwork, liwork = _dsyevr_work(a.shape[0])
    w, v, _m, _isuppz, info = lapack.dsyevr(a, compute_v=1, lower=1, overwrite_a=1, lwork=lwork, liwork=liwork)
    if info != 0:
        return None
    return w, hf._adjust_phase_(x.dot(v))


def commutator_error(s, d, f, x):
    """PySCF's DIIS error vector x^T (F D S - S D F) x, spin sets stacked, for a restricted
    (``d``, ``f`` (n, n)) or unrestricted (``d``, ``f`` (2, n, n)) density and Fock matrix; None
    for other shapes (ROHF's effective Fock matrix, symmetry-blocked orthogonalisers)."""
    if x is None or hasattr(x, "orbsym") or np.ndim(s) != 2 or np.iscomplexobj(f) or np.iscomplexobj(x):
        return None
    f = np.asarray(f)
    d = np.asarray(d)
    if f.ndim == 2 and d.ndim == 2:
        pairs = ((d, f),)
    elif f.ndim == 3 and d.ndim == 3 and f.shape[0] == 2 and d.shape[0] == 2:
        pairs = ((d[0], f[0]), (d[1], f[1]))
    else:
        return None
    xs = x.T @ s
    parts = []
    for dk, fk in pairs:
        sdf = xs @ dk @ fk @ x
        parts.append((sdf.T - sdf).ravel())
    return parts[0] if len(parts) == 1 else np.hstack(parts)


def _lean_diis():
    from pyscf import lib
    from pyscf.scf import diis

    class LeanDIIS(diis.CDIIS):
        """PySCF's commutator DIIS with numpy products (see the module docstring)."""

        def update(self, s, d, f, *args, **kwargs):
            err = commutator_error(s, d, f, self.Corth)
            if err is None:
                return super().update(s, d, f, *args, **kwargs)
            # the rest as pyscf.scf.diis.CDIIS.update, on this error vector
            f_prev = kwargs.get("f_prev", None)
            if abs(self.damp) < 1e-6 or f_prev is None:
                xnew = lib.diis.DIIS.update(self, f, xerr=err)
            else:
                xnew = lib.diis.DIIS.update(self, f * (1 - self.damp) + f_prev * self.damp, xerr=err)
            if self.rollback > 0 and len(self._bookkeep) == self.space:
                self._bookkeep = self._bookkeep[-self.rollback:]
            return xnew

        def extrapolate(self, nd=None):
            # pyscf.lib.diis.DIIS.extrapolate with numpy's eigenvalues for the dependence test
            if nd is None:
                nd = self.get_num_vec()
            if nd == 0:
                raise RuntimeError("No vector found in DIIS object.")
            h = self._H[: nd + 1, : nd + 1]
            if np.iscomplexobj(h):
                return super().extrapolate(nd)
            g = np.zeros(nd + 1)
            g[0] = 1.0
            w = np.linalg.eigvalsh(h)
            if np.any(abs(w) < 1e-14):  # linear dependence: PySCF's pseudo-inverse
                w, v = np.linalg.eigh(h)
                keep = abs(w) > 1e-14
                c = np.dot(v[:, keep] * (1.0 / w[keep]), np.dot(v[:, keep].T, g))
            else:
                c = np.linalg.solve(h, g)
            xnew = None
            for i, ci in enumerate(c[1:]):
                xi = np.asarray(self.get_vec(i))
                if xnew is None:
                    xnew = np.zeros(xi.size, c.dtype)
                xnew += xi.ravel() * ci
            return xnew

    return LeanDIIS


_DIIS: list = []


def lean_diis_class():
    """:class:`LeanDIIS` (built on first use: PySCF is imported only where it is needed)."""
    if not _DIIS:
        _DIIS.append(_lean_diis())
    return _DIIS[0]


def lean_class(cls):
    """``cls`` with the methods of the module docstring (a subclass of the same name, kept)."""
    got = _CLASSES.get(cls)
    if got is None:

        def _eigh(self, h, s, overwrite=False, x=None):
            if x is not None and not np.iscomplexobj(h) and not np.iscomplexobj(x):
                got = orthogonal_eigh(h, x)
                if got is not None:
                    return got
            return cls._eigh(self, h, s, overwrite, x)

        def get_jk(self, mol=None, dm=None, hermi=1, with_j=True, with_k=True, omega=None):
            eri = self.__dict__.get("_eri")
            if dm is None:
                dm = self.make_rdm1()
            if (eri is None or omega or np.iscomplexobj(dm) or (mol is not None and mol is not self.mol)
                    or np.shape(dm)[-1] > jk.MAX_NAO):  # not mol.nao: PySCF counts it from the shells
                return cls.get_jk(self, mol, dm, hermi, with_j, with_k, omega)
            mats = self.__dict__.get("_lcao_jk")
            if mats is None or mats[0] is not eri:
                mats = self.__dict__["_lcao_jk"] = (eri, jk.jk_matrices(jk.unpacked_of(self)))
            return jk.contract(*mats[1], dm, with_j, with_k)

        def _finalize(self):
            from pyscf.lib import logger

            if self.verbose < logger.NOTE:  # PySCF's UHF computes <S^2> here only for its log line
                return self
            return cls._finalize(self)

        got = _CLASSES[cls] = type(cls.__name__, (cls,), {
            "_eigh": _eigh, "get_jk": get_jk, "_finalize": _finalize, "DIIS": lean_diis_class(),
            "__module__": cls.__module__,
        })
    return got


def attach(mf):
    """Give ``mf`` the lean class of its own (see the module docstring); returns ``mf``."""
    if type(mf) not in _CLASSES.values():
        mf.__class__ = lean_class(type(mf))
    return mf


def uses_products(mf) -> bool:
    """Whether ``mf``'s J and K come from the matrix products (its basis is small and its
    integrals in memory)."""
    return (type(mf) in _CLASSES.values() and mf.__dict__.get("_eri") is not None
            and mf.mol.nao <= jk.MAX_NAO)
