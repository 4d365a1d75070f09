"""Coulomb and exchange matrices as two matrix products, for small basis sets.

PySCF's in-core J/K build (``pyscf.scf.hf.dot_eri_dm``) reads the 8-fold packed integrals in C
behind ctypes; for the basis sets of a diatomic in STO-3G or 6-31G most of its time is the fixed
cost of the call. With the integrals unpacked once per SCF into two (n^2, n^2) matrices,

    J_kl = sum_ij (kl|ij) D_ij,        K_il = sum_jk (ij|kl) D_jk,

both are one matrix product for any number of densities (PySCF's convention; real integrals, so
neither needs D to be symmetric). Measured (N2 UHF, two densities, PySCF 2.14, one thread, ms):
STO-3G (10 functions) 0.13 against 0.006 plus 0.03 to unpack; 6-31G (18) 0.28 against 0.04 plus
0.17; cc-pVDZ (28) 0.83 against 0.57 plus 3.8, so the products are used up to
:data:`MAX_NAO` functions only. tests/test_caches.py compares them with PySCF's build.
"""

from __future__ import annotations

import numpy as np

#: largest basis for which the unpacked products beat PySCF's packed build, counting the unpacking
MAX_NAO = 20


def unpacked(eri, nao: int) -> np.ndarray:
    """The (nao, nao, nao, nao) integrals (ij|kl) from PySCF's 8-fold packed ones."""
    from pyscf import ao2mo

    return ao2mo.restore(1, eri, nao)


def unpacked_of(mf) -> np.ndarray:
    """:func:`unpacked` integrals of ``mf._eri``, kept on the object (the J/K products and the
    orbital Hessians of :mod:`lcao.scan.stability` share them)."""
    eri = mf._eri
    got = mf.__dict__.get("_lcao_e4")
    if got is None or got[0] is not eri:
        got = mf.__dict__["_lcao_e4"] = (eri, unpacked(eri, mf.mol.nao))
    return got[1]


def jk_matrices(e4: np.ndarray):
    """(Coulomb, exchange) contraction matrices, each (n^2, n^2), from unpacked integrals."""
    n = e4.shape[0]
    return e4.reshape(n * n, n * n), np.ascontiguousarray(e4.transpose(0, 3, 1, 2)).reshape(n * n, n * n)


def contract(jmat, kmat, dm, with_j: bool = True, with_k: bool = True):
    """J and K of one density (n, n) or a stack (..., n, n), shaped like ``dm`` (None where not asked)."""
    dm = np.asarray(dm)
    n = dm.shape[-1]
    flat = dm.reshape(-1, n * n)
    vj = (flat @ jmat.T).reshape(dm.shape) if with_j else None
    vk = (flat @ kmat.T).reshape(dm.shape) if with_k else None
    return vj, vk


_CLASSES: dict = {}


def _with_products(cls):
    """``cls`` with :meth:`get_jk` by matrix products (same name, a subclass)."""
    got = _CLASSES.get(cls)
    if got is None:

        def get_jk(self, mol=None, dm=None, hermi=1, with_j=True, with_k=True, omega=None):
            eri = getattr(self, "_eri", None)
            if dm is None:
                dm = self.make_rdm1()
            if (eri is None or omega or np.iscomplexobj(dm) or (mol is not None and mol is not self.mol)
                    or self.mol.nao > MAX_NAO):
                return cls.get_jk(self, mol, dm, hermi, with_j, with_k, omega)
            mats = self.__dict__.get("_lcao_jk")
            if mats is None or mats[0] is not eri:
                mats = self.__dict__["_lcao_jk"] = (eri, jk_matrices(unpacked_of(self)))
            return contract(*mats[1], dm, with_j, with_k)

        got = _CLASSES[cls] = type(cls.__name__, (cls,), {"get_jk": get_jk, "__module__": cls.__module__})
    return got


def attach(mf) -> bool:
    """Give ``mf`` the matrix-product J/K where the basis is small and its integrals are in memory
    (``mf._eri``); returns whether it did. Its class becomes a subclass of the same name, so copies
    PySCF makes of it (second-order SCF) keep the products. Complex densities and range-separated
    requests go to PySCF's own build."""
    if getattr(mf, "_eri", None) is None or mf.mol.nao > MAX_NAO:
        return False
    mf.__class__ = _with_products(type(mf))
    return True
