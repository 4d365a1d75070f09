"""The dense orbital Hessians against PySCF's own Hessian-vector products.

The reference is PySCF's stability code (pyscf.scf.stability and pyscf.soscf.newton_ah, 2.14):
applying its Hessian to every unit vector gives the full matrix, which must equal ours element
by element, and the stability decisions of both routes must agree.
"""

import warnings

import numpy as np
import pytest

from lcao.levels import parse_level
from lcao.methods import stability as dense
from lcao.methods.molecule import build_molecule
from lcao.methods.scf import make_scf, solve, unstable_towards_uhf

LEVEL = parse_level("HF/6-31G")


def _converged(symbols, r, charge, spin, reference, dm0=None):
    mol = build_molecule(symbols, r, LEVEL, charge, spin)
    mf = make_scf(mol, reference)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mf.kernel(dm0=dm0)
    assert mf.converged
    return mf


def _fock(mf):
    return mf.get_hcore() + mf.get_veff(mf.mol, mf.make_rdm1())


@pytest.mark.parametrize("r", [2.0, 2.6, 4.0])
def test_rhf_hessians_equal_pyscf(r):
    from pyscf.scf import stability
    from pyscf.soscf import newton_ah

    mf = _converged(("N", "N"), r, 0, 0, "RHF")
    singlet, triplet = dense.rhf_hessians(mf.mo_coeff, mf.mo_occ, _fock(mf), mf._eri)
    _, hop, _ = newton_ah.gen_g_hop_rhf(mf, mf.mo_coeff, mf.mo_occ, with_symmetry=False)
    eye = np.eye(len(singlet))
    ref_singlet = np.array([hop(x).real * 2 for x in eye])  # rhf_internal's hessian_x
    _, _, hop_t, _ = stability._gen_hop_rhf_external(mf, with_symmetry=False)
    ref_triplet = np.array([hop_t(x) for x in eye])
    assert np.max(np.abs(singlet - ref_singlet)) < 1e-9
    assert np.max(np.abs(triplet - ref_triplet)) < 1e-9


@pytest.mark.parametrize("symbols,charge,spin,r", [(("N", "O"), 0, 1, 2.2), (("N", "N"), 1, 1, 2.1), (("O", "O"), 0, 2, 2.3)])
def test_uhf_hessian_equals_pyscf(symbols, charge, spin, r):
    from pyscf.soscf import newton_ah

    mf = _converged(symbols, r, charge, spin, "UHF")
    h = dense.uhf_hessian(mf.mo_coeff, mf.mo_occ, _fock(mf), mf._eri)
    _, hop, _ = newton_ah.gen_g_hop_uhf(mf, mf.mo_coeff, mf.mo_occ, with_symmetry=False)
    ref = np.array([hop(x).real * 2 for x in np.eye(len(h))])  # uhf_internal's hessian_x
    assert np.max(np.abs(h - ref)) < 1e-9


def test_lowest_mode_threshold():
    # analytic: diag(-1, 2) is unstable with mode e_1; diag(-1e-6, 3) is stable by PySCF's -1e-5 threshold
    e, v = dense.lowest_mode(np.diag([-1.0, 2.0]))
    assert e == pytest.approx(-1.0) and abs(abs(v[0]) - 1) < 1e-12
    assert dense.lowest_mode(np.diag([-1e-6, 3.0])) == (None, None)


def test_same_decisions_and_energies_as_davidson(monkeypatch):
    # N2 is RHF -> UHF unstable beyond about 1.1 A (2.1 bohr) in 6-31G and stable at 1.0 A: the dense
    # route and PySCF's Davidson route must agree on both, and the followed UHF energies must match
    mf_in = _converged(("N", "N"), 1.9, 0, 0, "RHF")
    mf_out = _converged(("N", "N"), 3.0, 0, 0, "RHF")
    mol = build_molecule(("N", "N"), 3.0, LEVEL, 0, 0)
    results = {}
    for route, limit in (("dense", dense.DENSE_LIMIT), ("davidson", 0)):
        monkeypatch.setattr(dense, "DENSE_LIMIT", limit)
        unstable_in, _ = unstable_towards_uhf(mf_in)
        unstable_out, dm = unstable_towards_uhf(mf_out)
        sol = solve(mol, "UHF", dm)
        results[route] = (unstable_in, unstable_out, sol.energy, sol.stability)
    assert results["dense"][:2] == results["davidson"][:2] == (False, True)
    assert abs(results["dense"][2] - results["davidson"][2]) < 1e-8


@pytest.mark.parametrize("r", [2.0, 3.2])
def test_davidson_route_decides_as_pyscf_stability(r):
    # the reference is PySCF's own stability analysis (pyscf.scf.stability, default tolerances), in
    # 6-311G* where lcao takes its Davidson route: N2 RHF internal and RHF -> UHF, N2 UHF, NO ROHF
    from pyscf.scf import stability

    level = parse_level("HF/6-311G*")

    def conv(symbols, spin, reference):
        mf = make_scf(build_molecule(symbols, r, level, 0, spin), reference)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            mf.kernel()
        assert mf.converged
        return mf

    rhf, uhf, rohf = conv(("N", "N"), 0, "RHF"), conv(("N", "N"), 0, "UHF"), conv(("N", "O"), 1, "ROHF")
    assert not dense.dense_possible(rhf)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cases = [
            (dense.davidson_internal(rhf, "RHF"), stability.rhf_internal(rhf, verbose=0, return_status=True, nroots=1)[1]),
            (dense.davidson_rhf_to_uhf(rhf), stability.rhf_external(rhf, verbose=0, return_status=True, nroots=1)[1]),
            (dense.davidson_internal(uhf, "UHF"), stability.uhf_internal(uhf, verbose=0, return_status=True, nroots=1)[1]),
            (dense.davidson_internal(rohf, "ROHF"), stability.rohf_internal(rohf, verbose=0, return_status=True, nroots=1)[1]),
        ]
    for (e, _v), pyscf_stable in cases:
        assert (e is None) == pyscf_stable


def test_davidson_triplet_product_equals_the_dense_triplet_hessian():
    # our Davidson route's RHF -> UHF Hessian-vector product (on PySCF's public triplet response)
    # applied to every unit vector gives the dense triplet block, element by element
    mf = _converged(("N", "N"), 2.6, 0, 0, "RHF")
    _, triplet = dense.rhf_hessians(mf.mo_coeff, mf.mo_occ, _fock(mf), mf._eri)
    products = []
    real = dense._davidson

    def capture(hx, hdiag, x0):
        products.extend(hx(x) for x in np.eye(len(hdiag)))
        return real(hx, hdiag, x0)

    dense._davidson = capture
    try:
        dense.davidson_rhf_to_uhf(mf)
    finally:
        dense._davidson = real
    assert np.max(np.abs(np.array(products) - triplet)) < 1e-9


def test_orbital_rotation_equals_pyscfs():
    # the reference is PySCF's own rotation along a stability mode (pyscf.scf.stability, 2.14)
    from pyscf.scf import stability

    mf = _converged(("N", "N"), 3.0, 0, 0, "RHF")
    _, triplet = dense.rhf_hessians(mf.mo_coeff, mf.mo_occ, _fock(mf), mf._eri)
    _, v = dense.lowest_mode(triplet)
    assert np.max(np.abs(dense.rotate_orbitals(mf.mo_coeff, mf.mo_occ, v)
                         - stability._rotate_mo(mf.mo_coeff, mf.mo_occ, v))) < 1e-14
