"""Coulomb and exchange matrices as two matrix products, for small basis sets.

PySCF's in-core J/K build reads the 8-fold packed integrals in C; for the basis sets of a diatomic
in STO-3G or 6-31G most of its time is the fixed cost of the call. With the integrals unpacked once
per SCF object into two (n^2, n^2) matrices,

    J_kl = sum_ij (kl|ij) D_ij,        K_il = sum_jk (ij|kl) D_jk,

both are one matrix product for any number of densities (PySCF's convention; real integrals, so
neither needs D to be symmetric). Measured (N2 UHF, two densities, PySCF 2.14, one thread, ms):
STO-3G (10 functions) 0.13 against 0.006 plus 0.03 to unpack; 6-31G (18) 0.28 against 0.04 plus
0.17; cc-pVDZ (28) 0.83 against 0.57 plus 3.8, so the products are used up to :data:`MAX_NAO`
functions only. The SCF objects of :func:`lcao.methods.scf.make_scf` take them through
:func:`product_class`, a subclass of PySCF's class that overrides only the public ``get_jk``;
tests/test_methods.py compares them with PySCF's build.
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
    orbital Hessians of :mod:`lcao.methods.stability` share them)."""
    eri = mf._eri
    got = mf.__dict__.get("_lcao_e4")  # not getattr: PySCF's __getattr__ imports all of PySCF on a miss
    if got is None or got[0] is not eri:
        got = mf.__dict__["_lcao_e4"] = (eri, unpacked(eri, eri_size(eri)))
    return got[1]


def eri_size(eri) -> int:
    """Basis size of an 8-fold packed two-electron set."""
    pairs = int(round((np.sqrt(8 * eri.size + 1) - 1) / 2))
    return int(round((np.sqrt(8 * pairs + 1) - 1) / 2))


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


def product_class(cls):
    """A subclass of the PySCF SCF class ``cls`` whose ``get_jk`` uses the products where the basis has
    at most :data:`MAX_NAO` functions and the integrals are in memory, and PySCF's build otherwise."""
    got = _CLASSES.get(cls)
    if got is None:

        def get_jk(self, mol=None, dm=None, hermi=1, with_j=True, with_k=True, omega=None):
            eri = self.__dict__.get("_eri")
            if dm is None:
                dm = self.make_rdm1()
            if (eri is None or omega or np.iscomplexobj(dm) or (mol is not None and mol is not self.mol)
                    or np.shape(dm)[-1] > MAX_NAO):
                return cls.get_jk(self, mol, dm, hermi, with_j, with_k, omega)
            mats = self.__dict__.get("_lcao_jk")
            if mats is None or mats[0] is not eri:
                mats = self.__dict__["_lcao_jk"] = (eri, jk_matrices(unpacked_of(self)))
            return contract(*mats[1], dm, with_j, with_k)

        got = _CLASSES[cls] = type(cls.__name__, (cls,), {"get_jk": get_jk, "__module__": cls.__module__})
    return got
