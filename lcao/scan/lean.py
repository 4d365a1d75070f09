"""PySCF's SCF classes with the fixed cost of each library call taken out of the SCF cycle.

A warm-started point of a diatomic converges in a handful of cycles on matrices of 10 to 30
functions, where the fixed cost of a library call outweighs its arithmetic. Measured per call
(N2, 6-31G, 18 functions; PySCF 2.14, SciPy 1.17, NumPy 2.4, one thread; microseconds):
``scipy.linalg.eigh`` of an 18 x 18 matrix 124, of which the LAPACK routine it calls (dsyevr) is
55: the rest is the wrapper's argument checks and batching. PySCF's ``_eigh`` calls it for each
spin in every cycle, and its DIIS once more on the small DIIS matrix. ``pyscf.lib.dot`` of two
18 x 18 matrices 21, of which the call of its BLAS routine is 5: the rest is argument conversion
(numpy's ``@`` takes 2, but on another BLAS build, whose last bits differ). PySCF's commutator
DIIS error vector makes four such products per spin set and cycle: 160 for UHF. J and K: see
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
  for the same reason; :func:`commutator_error` computes it by PySCF's routine called directly,
  with the same arguments, and forms x^T S once for both spin sets (100 us for UHF). Last-bit
  differences were enough to move points: numpy's error vector sent sweeps of O2 and NO onto
  other, sometimes higher, UHF solutions at long range (O2 6-31G beyond 2.7 A by up to 2.8e-4
  Eh), and numpy's pseudo-inverse the last point of O2 STO-3G at 3.0 A by 7e-6 Eh;
* ``get_jk``: the matrix products of :mod:`lcao.scan.jk` where the basis has at most
  :data:`lcao.scan.jk.MAX_NAO` functions and the integrals are in memory (``mf._eri``);
* ``_finalize``: nothing below PySCF's NOTE verbosity (its UHF computes <S^2> there only to log it).

Complex matrices and every case not listed go to PySCF's own methods unchanged. Besides J and K
(whose products differ from PySCF's build in the last bits, about 1e-13 Eh in the energy), the
class changes no number: with PySCF's eigensolver and DIIS put back, an SCF gives the same
energy and orbitals to the last bit (tests/test_caches.py), and twelve 40-point curves of N2, NO,
O2, CO, CN- and BF in STO-3G and 6-31G gave every point of every sweep to the last bit of the code
before this class (``python -m benchmarks.numbers``).
"""

from __future__ import annotations

import ctypes

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


_GEMM: list = []


def _pyscf_gemm():
    """PySCF's own matrix product routine (``NPdgemm`` of its ``libnp_helper``, on the BLAS PySCF
    ships), with its argument types declared once; None where this PySCF has no such routine."""
    if not _GEMM:
        fn = None
        try:
            from pyscf.lib import numpy_helper

            fn = ctypes.CDLL(numpy_helper._np_helper._name).NPdgemm
            fn.argtypes = ([ctypes.c_char, ctypes.c_char] + [ctypes.c_int] * 9 + [ctypes.c_void_p] * 3
                           + [ctypes.c_double] * 2)
            fn.restype = None
        except (ImportError, AttributeError, OSError):  # pragma: no cover - PySCF's layout changed
            fn = None
        _GEMM.append(fn)
    return _GEMM[0]


def pyscf_dot(gemm, a, b):
    """``pyscf.lib.dot(a, b)`` for two non-empty 2-D float64 arrays: the same routine called with the
    same arguments (so the same bits), without the wrapper's per-call argument conversion."""
    m, k = a.shape
    n = b.shape[1]
    ta, a = _row_major(a)
    tb, b = _row_major(b)
    c = np.empty((m, n))
    gemm(tb, ta, n, m, k, b.shape[1], a.shape[1], n, 0, 0, 0, _address(b), _address(a), _address(c), 1.0, 0.0)
    return c


def _row_major(a):
    """(BLAS transpose flag, C-ordered array) as ``pyscf.lib.numpy_helper.ddot`` chooses them."""
    if a.flags.c_contiguous:
        return b"N", a
    if a.flags.f_contiguous:
        return b"T", a.T
    return b"N", np.asarray(a, order="C")


def _address(a) -> int:
    return a.__array_interface__["data"][0]  # (``a.ctypes.data`` takes longer than the product)


def commutator_error(s, d, f, x):
    """PySCF's DIIS error vector (``pyscf.scf.diis.get_err_vec_orth``: x^T (F D S - S D F) x, spin sets
    stacked) to the last bit, for a restricted (``d``, ``f`` (n, n)) or unrestricted (``d``, ``f``
    (2, n, n)) real density and Fock matrix; None for every other case (PySCF then computes it)."""
    gemm = _pyscf_gemm()
    if (gemm is None or x is None or hasattr(x, "orbsym") or not isinstance(f, np.ndarray)
            or not isinstance(d, np.ndarray) or not isinstance(s, np.ndarray) or s.ndim != 2 or x.ndim != 2
            or 0 in x.shape or any(a.dtype != np.float64 for a in (s, d, f, x))):
        return None
    if f.ndim == 2 and d.ndim == 2:
        pairs = ((d, f),)
    elif f.ndim == 3 and d.ndim == 3 and f.shape[0] == 2 and d.shape[0] == 2:
        pairs = ((d[0], f[0]), (d[1], f[1]))
    else:
        return None
    parts = []
    xs = pyscf_dot(gemm, x.T, s)  # the same first product for both spin sets: formed once
    for dk, fk in pairs:
        # reduce(lib.dot, (x^T, s, d, f, x)), left to right, as PySCF multiplies
        sdf = pyscf_dot(gemm, pyscf_dot(gemm, pyscf_dot(gemm, xs, dk), fk), x)
        parts.append((sdf.T - sdf).ravel())
    return parts[0] if len(parts) == 1 else np.hstack(parts)


def _lean_diis():
    from pyscf import lib
    from pyscf.lib import logger
    from pyscf.scf import diis

    class LeanDIIS(diis.CDIIS):
        """PySCF's commutator DIIS, its error vector from PySCF's routine called directly and its small
        linear system tested and solved with numpy where that gives PySCF's numbers (see the module
        docstring)."""

        def update(self, s, d, f, *args, **kwargs):
            err = commutator_error(s, d, f, self.Corth)
            if err is None or self.verbose >= logger.DEBUG1:
                return super().update(s, d, f, *args, **kwargs)
            # the rest as pyscf.scf.diis.CDIIS.update, on the same error vector
            f_prev = kwargs.get("f_prev", None)
            if abs(self.damp) < 1e-6 or f_prev is None:
                xnew = lib.diis.DIIS.update(self, f, xerr=err)
            else:
                xnew = lib.diis.DIIS.update(self, f * (1 - self.damp) + f_prev * self.damp, xerr=err)
            if self.rollback > 0 and len(self._bookkeep) == self.space:
                self._bookkeep = self._bookkeep[-self.rollback:]
            return xnew

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
