"""PySCF's SCF classes with the fixed cost of each library call taken out of the SCF cycle.

A warm-started point of a diatomic converges in a handful of cycles on matrices of 10 to 30
functions, where the fixed cost of a library call outweighs its arithmetic. Measured per call
(N2, 6-31G, 18 functions; PySCF 2.14, SciPy 1.17, NumPy 2.4, one thread; microseconds):
``scipy.linalg.eigh`` of an 18 x 18 matrix 124, of which the LAPACK routine it calls (dsyevr) is
55: the rest is the wrapper's argument checks and batching. PySCF's ``_eigh`` calls it for each
spin in every cycle, and its DIIS once more on the small DIIS matrix. J and K: see
:mod:`lcao.scan.jk`.

:func:`attach` swaps an SCF object's class for a same-named subclass of its own class (so
PySCF's second-order copy, which subclasses the object's class, keeps it) with:

* ``_eigh``: LAPACK's dsyevr called directly, with the workspace ``scipy.linalg.eigh`` asks for
  and on the matrix PySCF forms, so the orbitals are PySCF's to the last bit;
* ``DIIS``: :class:`LeanDIIS`, PySCF's commutator DIIS (``pyscf.scf.diis.CDIIS``) whose small
  linear system is tested for linear dependence with numpy's eigenvalues instead of
  ``scipy.linalg.eigh`` and then solved with ``numpy.linalg.solve`` as PySCF does. Where an
  eigenvalue comes near PySCF's dependence threshold (:data:`DEPENDENCE_MARGIN`) the step is
  PySCF's own: its pseudo-inverse is built on scipy's eigenvectors, and numpy's (another LAPACK
  routine) differ in the last bits. The error vector stays PySCF's (``pyscf.lib.dot``, its BLAS)
  for the same reason. Last-bit differences of either kind were enough to move points: numpy's
  error vector sent sweeps of O2 and NO onto other, sometimes higher, UHF solutions at long range
  (O2 6-31G beyond 2.7 A by up to 2.8e-4 Eh), and numpy's pseudo-inverse the last point of O2
  STO-3G at 3.0 A by 7e-6 Eh;
* ``get_jk``: the matrix products of :mod:`lcao.scan.jk` where the basis has at most
  :data:`lcao.scan.jk.MAX_NAO` functions and the integrals are in memory (``mf._eri``);
* ``_finalize``: nothing below PySCF's NOTE verbosity (its UHF computes <S^2> there only to log it).

Complex matrices and every case not listed go to PySCF's own methods unchanged. Besides J and K
(whose products differ from PySCF's build in the last bits, about 1e-13 Eh in the energy), the
class changes no number: with PySCF's eigensolver and DIIS put back, an SCF gives the same
energy and orbitals to the last bit (tests/test_caches.py), and twelve 40-point curves of N2, NO,
O2, CO, CN- and BF in STO-3G and 6-31G gave every point of every sweep to the last bit of the code
before these two methods were added (``python -m benchmarks.numbers``).
"""

from __future__ import annotations

import numpy as np

from . import jk

#: Below this, a DIIS eigenvalue from numpy may fall on either side of PySCF's 1e-14 dependence
#: test with scipy's eigenvalues (other LAPACK routines, differing by about 1e-16 times the matrix
#: norm), so :class:`LeanDIIS` hands the step to PySCF.
DEPENDENCE_MARGIN = 1e-12

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


def _lean_diis():
    from pyscf.scf import diis

    class LeanDIIS(diis.CDIIS):
        """PySCF's commutator DIIS, its small linear system tested and solved with numpy where that
        gives PySCF's numbers (see the module docstring)."""

        def extrapolate(self, nd=None):
            # pyscf.lib.diis.DIIS.extrapolate, its eigenvalue test by numpy (with a margin)
            if nd is None:
                nd = self.get_num_vec()
            if nd == 0:
                raise RuntimeError("No vector found in DIIS object.")
            h = self._H[: nd + 1, : nd + 1]
            if np.iscomplexobj(h) or np.any(abs(np.linalg.eigvalsh(h)) < DEPENDENCE_MARGIN):
                # (near) linear dependence: PySCF's own test and pseudo-inverse, on its eigenvectors
                return super().extrapolate(nd)
            g = np.zeros(nd + 1)
            g[0] = 1.0
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
