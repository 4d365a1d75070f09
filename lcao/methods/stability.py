"""Orbital-rotation Hessians of converged Hartree-Fock solutions, built as dense matrices.

PySCF's stability analysis finds the lowest eigenvalue of the orbital Hessian by Davidson
iteration, one Coulomb and exchange build per iteration (about ten per check). For the small
rotation spaces of diatomics in split-valence bases the Hessian is cheaper to build from
molecular-orbital integrals and diagonalise outright. The matrices here are in PySCF's
scale and layout (vector index ``a * nocc + i``, alpha rotations before beta), so its
eigenvalue threshold and its orbital rotation apply unchanged; tests/test_stability.py
compares them element by element with PySCF's own Hessian-vector products.

With D the occupied-occupied and virtual-virtual Fock blocks (D_ai,bj = F_ab d_ij - F_ij d_ab)
and real orbitals (standard results for the real RHF/UHF orbital Hessian, e.g. Seeger and
Pople, J. Chem. Phys. 66, 3045 (1977)):

* RHF -> RHF (singlet):   4 [D + 4 (ai|bj) - (ab|ij) - (aj|bi)]
* RHF -> UHF (triplet):     D - (ab|ij) - (aj|bi)
* UHF -> UHF, spins s, t: 2 [d_st (D - (ab|ij) - (aj|bi)) + 2 (ai|bj)_st]
"""

from __future__ import annotations

import numpy as np

#: above this many rotations the Davidson iteration is cheaper than a dense diagonalisation
DENSE_LIMIT = 800
#: above this many basis functions the n^4 unpacking and n^5 transformations cost more than PySCF's
#: Davidson iteration (N2, PySCF 2.14, one thread; RHF internal+external / UHF internal, seconds:
#: 6-31G (18) 0.003/0.004 against 0.016/0.010; cc-pVDZ (28) 0.015/0.022 against 0.022/0.030;
#: 6-31G* (30) 0.016/0.032 against 0.026/0.029; 6-311G* (36) 0.037/0.060 against 0.046/0.029;
#: cc-pVTZ (60) 0.79/0.76 against 0.29/0.32, with 100 MB more memory)
DENSE_MAX_NAO = 30
#: an eigenvalue below this marks an instability (PySCF's threshold, same scale)
UNSTABLE_BELOW = -1e-5


def _unpack(eri, n):
    if np.ndim(eri) == 4:
        return eri
    from pyscf import ao2mo

    return ao2mo.restore(1, eri, n)


def _first(e4, c1):
    """(pq|rs) -> (xq|rs) with x = c1 on p; shape (x, n, n*n). The costly step (n^4 times the
    orbitals), shared by the transformations that put the same orbitals on p."""
    n = e4.shape[0]
    return (c1.T @ e4.reshape(n, n**3)).reshape(-1, n, n * n)


def _left(e4, c1, c2, first=None):
    """(pq|rs) -> (xy|rs) with x = c1 on p, y = c2 on q; shape (x, y, n*n). ``first`` is
    ``_first(e4, c1)`` when already at hand."""
    t = _first(e4, c1) if first is None else first  # (x, q, rs)
    return np.matmul(c2.T, t)  # (x, y, rs), one product per x


def _right(left, c3, c4):
    """(xy|rs) -> (xy|zw) with z = c3 on r, w = c4 on s; shape (x, y, z, w)."""
    x, y, nn = left.shape
    n = c3.shape[0]
    t = np.matmul(c3.T, left.reshape(x * y, n, n)) @ c4  # (xy, z, w)
    return t.reshape(x, y, c3.shape[1], c4.shape[1])


def _blocks(e4, co, cv, left=None, first=None):
    """(ai|bj) and (ab|ij) from unpacked AO integrals, occupied indices transformed first (the
    fewer), by plain matrix products: several times faster here than PySCF's general
    transformation. ``first`` is ``_first(e4, co)`` and ``left`` ``_left(e4, co, cv)`` when
    already at hand; the occupied orbitals go onto the first index once for both blocks."""
    first = _first(e4, co) if first is None else first
    left = _left(e4, co, cv, first) if left is None else left
    aibj = _right(left, co, cv).transpose(1, 0, 3, 2)  # (ia|jb) -> (ai|bj)
    abij = _right(_left(e4, co, co, first), cv, cv).transpose(2, 3, 0, 1)  # (ij|ab) -> (ab|ij)
    return aibj, abij


def _fock_diff(f_mo, no, nv):
    foo, fvv = f_mo[:no, :no], f_mo[no:, no:]
    return np.einsum("ab,ij->aibj", fvv, np.eye(no)) - np.einsum("ij,ab->aibj", foo, np.eye(nv))


def _spin_set(mo_coeff, mo_occ, fock_ao):
    """Occupied and virtual orbitals of one spin set and their Fock-difference term D."""
    occ = np.asarray(mo_occ) > 0
    co, cv = mo_coeff[:, occ], mo_coeff[:, ~occ]
    c = np.hstack([co, cv])
    return co, cv, _fock_diff(c.T @ fock_ao @ c, co.shape[1], cv.shape[1])


def _exchange_part(d, aibj, abij):
    """D - (ab|ij) - (aj|bi): the same-spin part shared by all three Hessians."""
    return d - abij.transpose(0, 2, 1, 3) - aibj.transpose(0, 3, 2, 1)


def rhf_hessians(mo_coeff, mo_occ, fock_ao, eri):
    """(singlet, triplet) orbital Hessians of a closed-shell RHF solution.

    Args:
        mo_coeff: (nao, nmo) orbitals; mo_occ: occupations (2 or 0).
        fock_ao: the Fock matrix of the solution's density, AO basis.
        eri: two-electron integrals, 8-fold packed, or already unpacked (nao, nao, nao, nao).
    """
    co, cv, d = _spin_set(mo_coeff, mo_occ, fock_ao)
    aibj, abij = _blocks(_unpack(eri, co.shape[0]), co, cv)
    common = _exchange_part(d, aibj, abij)
    n = co.shape[1] * cv.shape[1]
    singlet = 4.0 * (common + 4.0 * aibj).reshape(n, n)
    triplet = common.reshape(n, n)
    return singlet, triplet


def uhf_hessian(mo_coeff, mo_occ, fock_ao, eri):
    """Orbital Hessian of a UHF solution (alpha rotations first)."""
    e4 = _unpack(eri, mo_coeff[0].shape[0])
    cos, cvs, ds = zip(*(_spin_set(mo_coeff[s], mo_occ[s], fock_ao[s]) for s in (0, 1)))
    sizes = [cos[s].shape[1] * cvs[s].shape[1] for s in (0, 1)]
    h = np.zeros((sum(sizes), sum(sizes)))
    off = [0, sizes[0]]
    left_a = None
    for s in (0, 1):
        if sizes[s] == 0:
            continue
        first = _first(e4, cos[s])
        left = _left(e4, cos[s], cvs[s], first)
        if s == 0:
            left_a = left
        aibj, abij = _blocks(e4, cos[s], cvs[s], left, first)
        blk = 2.0 * (_exchange_part(ds[s], aibj, abij) + 2.0 * aibj)
        h[off[s]:off[s] + sizes[s], off[s]:off[s] + sizes[s]] = blk.reshape(sizes[s], sizes[s])
    if sizes[0] and sizes[1]:
        # (i_a a_a | j_b b_b) -> (a_a i_a | b_b j_b)
        x = _right(left_a, cos[1], cvs[1]).transpose(1, 0, 3, 2).reshape(sizes[0], sizes[1])
        h[: sizes[0], sizes[0]:] = 4.0 * x
        h[sizes[0]:, : sizes[0]] = 4.0 * x.T
    return h


def lowest_mode(h):
    """Lowest eigenvalue and its unit eigenvector of a symmetric matrix, or (None, None) when
    every eigenvalue is at or above :data:`UNSTABLE_BELOW`.

    A Cholesky factorisation of ``h - UNSTABLE_BELOW`` succeeds exactly when the matrix is stable
    by that threshold, at a small fraction of the cost of the eigenvalue; only an unstable
    matrix is diagonalised.
    """
    from scipy.linalg import LinAlgError, cho_factor, eigh

    try:
        cho_factor(h - UNSTABLE_BELOW * np.eye(len(h)), check_finite=False)
        return None, None
    except LinAlgError:
        pass
    w, v = eigh(h, subset_by_index=[0, 0])
    return float(w[0]), v[:, 0]


def dense_possible(mf) -> bool:
    """Whether this is a Hartree-Fock solution (the dense formulas hold for it only) with the integrals in
    memory and a small enough basis and rotation space."""
    from pyscf.dft.rks import KohnShamDFT

    if mf.__dict__.get("_eri") is None or mf.mol.nao > DENSE_MAX_NAO or isinstance(mf, KohnShamDFT):
        return False
    occ = np.asarray(mf.mo_occ)
    if occ.ndim == 1:
        n = int((occ > 0).sum() * (occ == 0).sum())
    else:
        n = int(sum((o > 0).sum() * (o == 0).sum() for o in occ))
    return 0 < n <= DENSE_LIMIT


def _integrals(mf):
    """The unpacked integrals kept on ``mf`` by :mod:`lcao.methods.jk` where it has them, else the packed ones."""
    from .jk import MAX_NAO, unpacked_of

    return unpacked_of(mf) if mf.mol.nao <= MAX_NAO else mf._eri


def _rhf_pair(mf):
    """(singlet, triplet) Hessians of an RHF solution, built once per solution."""
    got = mf.__dict__.get("_lcao_hessians")  # not getattr: PySCF's __getattr__ imports all of PySCF on a miss
    if got is not None and got[0] is mf.mo_coeff:
        return got[1]
    dm = mf.make_rdm1()
    fock = mf.get_hcore() + mf.get_veff(mf.mol, dm)
    pair = rhf_hessians(mf.mo_coeff, mf.mo_occ, fock, _integrals(mf))
    mf._lcao_hessians = (mf.mo_coeff, pair)
    return pair


def internal(mf, reference: str):
    """Lowest internal mode of a converged RHF or UHF solution: (eigenvalue, vector), or
    (None, None) when it is stable (see :func:`lowest_mode`)."""
    if reference == "RHF":
        return lowest_mode(_rhf_pair(mf)[0])
    dm = mf.make_rdm1()
    fock = mf.get_hcore() + mf.get_veff(mf.mol, dm)
    return lowest_mode(uhf_hessian(mf.mo_coeff, mf.mo_occ, fock, _integrals(mf)))


def rhf_to_uhf(mf):
    """Lowest RHF -> UHF (triplet) mode of a converged closed-shell RHF solution, or (None, None)."""
    return lowest_mode(_rhf_pair(mf)[1])


#: The Davidson route (larger bases): a first pass to this eigenvalue tolerance, and a second at
#: PySCF's default (1e-4) only when the first lowest value lands between UNSTABLE_BELOW and
#: CLEAR_MARGIN. A Ritz value bounds the lowest eigenvalue from above, so a first value below the
#: threshold is already decisive, and one above the margin is far outside the first pass's error.
LOOSE_TOL = 1e-3
CLEAR_MARGIN = 1e-2


def _davidson(hx, hdiag, x0):
    from pyscf import lib

    def precond(dx, e, _x0):
        hd = hdiag - e
        hd[abs(hd) < 1e-8] = 1e-8
        return dx / hd

    e, v = lib.davidson(hx, x0, precond, tol=LOOSE_TOL, nroots=1, verbose=0)
    if UNSTABLE_BELOW <= e <= CLEAR_MARGIN:
        e, v = lib.davidson(hx, v, precond, tol=1e-4, nroots=1, verbose=0)
    return (float(e), np.asarray(v)) if e < UNSTABLE_BELOW else (None, None)


def davidson_internal(mf, reference: str, keep_symmetry: bool = False):
    """Lowest internal mode by Davidson iteration on PySCF's orbital-Hessian products (its public
    ``pyscf.soscf.newton_ah.gen_g_hop_*``, scaled as its stability analysis scales them), or
    (None, None) when stable. With ``keep_symmetry`` (a solution of a molecule built with a point group)
    only the rotations between orbitals of the same irrep are searched."""
    from pyscf.soscf import newton_ah

    gen = {"RHF": newton_ah.gen_g_hop_rhf, "UHF": newton_ah.gen_g_hop_uhf, "ROHF": newton_ah.gen_g_hop_rohf}[reference]
    g, hop, hdiag = gen(mf, mf.mo_coeff, mf.mo_occ, with_symmetry=keep_symmetry)
    hdiag = hdiag * 2
    x0 = np.zeros_like(g)
    x0[g != 0] = 1.0 / hdiag[g != 0]
    if keep_symmetry:  # PySCF zeroes the diagonal, gradient and products of the forbidden rotations
        allowed = hdiag != 0
        if not allowed.any():
            return None, None
        x0[~allowed] = 0.0
        x0[np.flatnonzero(allowed)[np.argmin(hdiag[allowed])]] = 1
        hdiag = np.where(allowed, hdiag, 1e8)
    else:
        x0[np.argmin(hdiag)] = 1
    return _davidson(lambda x: hop(x).real * 2, hdiag, x0)


def davidson_rhf_to_uhf(mf):
    """Lowest RHF -> UHF (triplet) mode by Davidson iteration, or (None, None) when stable.

    The Hessian-vector product is D x + C_v^T v(d) C_o with d = C_v (2x) C_o^T + transpose and v the
    triplet response of PySCF's public ``mf.gen_response(singlet=False)`` (the same matrix as the
    dense :func:`rhf_hessians` triplet block)."""
    occ = np.asarray(mf.mo_occ) > 0
    co, cv = mf.mo_coeff[:, occ], mf.mo_coeff[:, ~occ]
    fock_ao = mf.get_hcore() + mf.get_veff(mf.mol, mf.make_rdm1())
    foo = co.T @ fock_ao @ co
    fvv = cv.T @ fock_ao @ cv
    nocc, nvir = co.shape[1], cv.shape[1]
    hdiag = (fvv.diagonal().reshape(-1, 1) - foo.diagonal()).ravel()
    response = mf.gen_response(singlet=False, hermi=1)

    def hop(x):
        x1 = x.reshape(nvir, nocc)
        x2 = fvv @ x1 - x1 @ foo
        d1 = cv @ (2.0 * x1) @ co.T
        x2 = x2 + cv.T @ response(d1 + d1.T) @ co
        return x2.ravel()

    x0 = np.zeros_like(hdiag)
    x0[hdiag > 1e-5] = 1.0 / hdiag[hdiag > 1e-5]
    return _davidson(hop, hdiag, x0)


def rotate_orbitals(mo_coeff, mo_occ, dx):
    """Orbitals rotated by the step ``dx`` (PySCF's vector layout of occupied-virtual rotations):
    C exp(R), R the antisymmetric matrix of ``pyscf.scf.hf.unpack_uniq_var``."""
    from pyscf.scf import hf
    from scipy.linalg import expm

    return np.dot(mo_coeff, expm(hf.unpack_uniq_var(dx, mo_occ)))
