"""A level of theory defined here, in the test file, runs through the public API with no change to the
driver: a curve with its separated atoms at the same level, energy components on every point, and a
fit. The method is second-order Moller-Plesset perturbation theory written directly on PySCF (RHF/UHF
then MP2, all electrons); the reference values are PySCF's own MP2, computed here without lcao."""

import numpy as np
import pytest
from pyscf import gto, mp, scf

import lcao
from lcao.methods import AtomResult, Capabilities, Method, PointResult, StatePlan, register, unregister
from lcao.scan.grid import range_grid
from lcao.store import Store
from lcao.units import bohr_to_angstrom


def _molecule(atoms, r_bohr, level, charge, spin):
    geom = [(atoms[0], (0.0, 0.0, 0.0))] + ([(atoms[1], (0.0, 0.0, r_bohr))] if len(atoms) > 1 else [])
    return gto.M(atom=geom, unit="Bohr", basis=level.basis, cart=level.cartesian, charge=charge, spin=spin,
                 verbose=0)


def _mp2(mol, dm0):
    mf = (scf.RHF(mol) if mol.spin == 0 else scf.UHF(mol))
    mf.conv_tol = 1e-10
    mf.kernel(dm0=dm0)
    pt = mp.MP2(mf).run(verbose=0)
    return mf, pt


class SecondOrder(Method):
    """MP2 on the restricted (singlet) or unrestricted reference; a density as the warm start."""

    names = ("TESTMP2",)
    capabilities = Capabilities(stability=False, orbitals=False, spin_square=False, components=("reference", "correlation"))

    def state_plan(self, level, multiplicity):
        branch = "restricted" if multiplicity == 1 else "unrestricted"
        return StatePlan(branch, {branch: "RMP2" if multiplicity == 1 else "UMP2"})

    def point(self, target, r_bohr, branch, start, check_instability=False):
        mol = _molecule(target.atoms, r_bohr, target.level, target.charge, target.spin)
        dm0 = None if not start else np.asarray(start["dm"])
        if dm0 is not None and mol.spin == 0 and dm0.ndim == 3:
            dm0 = dm0.sum(axis=0)
        mf, pt = _mp2(mol, dm0)
        return PointResult(r_bohr, float(pt.e_tot), bool(mf.converged), int(mf.cycles),
                           components={"reference": float(mf.e_tot), "correlation": float(pt.e_corr)},
                           warm={"dm": np.asarray(mf.make_rdm1())})

    def atom(self, symbol, charge, spin, level):
        mol = _molecule((symbol,), 0.0, level, charge, spin)
        mf, pt = _mp2(mol, None)
        dm = np.asarray(mf.make_rdm1())
        dm = dm if dm.ndim == 3 else np.array([dm / 2, dm / 2])
        return AtomResult(symbol, charge, spin, float(pt.e_tot), bool(mf.converged), {"dm": dm},
                          {"reference": float(mf.e_tot), "correlation": float(pt.e_corr)})

    def fragment_start(self, target, a, b, flip):
        from scipy.linalg import block_diag

        da, db = np.asarray(a.warm["dm"]), np.asarray(b.warm["dm"])
        da, db = (da[::-1] if flip == "a" else da), (db[::-1] if flip == "b" else db)
        return {"dm": np.array([block_diag(da[0], db[0]), block_diag(da[1], db[1])])}

    def basis_size(self, target):
        return int(_molecule(target.atoms, 2.0, target.level, target.charge, target.spin).nao)


@pytest.fixture()
def second_order():
    method = register(SecondOrder())
    yield method
    unregister(method)


def test_a_method_from_this_file_runs_a_whole_curve(second_order, tmp_path):
    grid = range_grid(0.95, 1.35, 11)
    with Store(tmp_path / "s.sqlite") as st:
        res = lcao.curve("N2", "TESTMP2/6-31G", grid, multiplicity=1, store=st, workers=2)
    assert res.scan.reference == "RMP2" and all(p.trusted for p in res.points)
    # every point against PySCF's MP2 directly, with its components (independent computation)
    p = res.points[5]
    _, pt = _mp2(gto.M(atom=f"N 0 0 0; N 0 0 {p.r_bohr}", unit="Bohr", basis="6-31G", verbose=0), None)
    assert p.energy_hartree == pytest.approx(pt.e_tot, abs=1e-8)
    assert p.components["correlation"] == pytest.approx(pt.e_corr, abs=1e-8)
    assert p.components["reference"] + p.components["correlation"] == pytest.approx(p.energy_hartree, abs=1e-10)
    # the separated atoms at the same level: two UMP2 quartet nitrogen atoms from PySCF directly
    _, atom = _mp2(gto.M(atom="N 0 0 0", basis="6-31G", spin=3, verbose=0), None)
    assert res.limit_energy_hartree == pytest.approx(2 * atom.e_tot, abs=1e-7)
    # the fit: r_e against a fine scan of PySCF's MP2 about the minimum (a parabola through 5 points
    # 0.005 A apart, the reference)
    assert res.fit is not None and res.fit.bound
    re_fit = float(bohr_to_angstrom(res.fit.local.re))
    rs = np.linspace(re_fit - 0.01, re_fit + 0.01, 5)
    es = [_mp2(gto.M(atom=f"N 0 0 0; N 0 0 {x}", basis="6-31G", verbose=0), None)[1].e_tot for x in rs]
    c = np.polyfit(rs, es, 2)
    assert re_fit == pytest.approx(-c[1] / (2 * c[0]), abs=5e-4)
    assert res.fit.de == pytest.approx(2 * atom.e_tot - res.fit.local.e_min, abs=1e-6)
    # the store keeps the components, and a rerun takes every point from it
    with Store(tmp_path / "s.sqlite") as st:
        again = lcao.curve("N2", "TESTMP2/6-31G", grid, multiplicity=1, store=st, workers=1)
        stored = st.get_point(res.species, 1, res.level, p.sweep, p.r_bohr)
    assert again.computed == 0 and stored.components == pytest.approx(p.components)
    assert [q.energy_hartree for q in again.points] == [q.energy_hartree for q in res.points]


def test_registration_is_checked(second_order):
    from lcao.errors import LevelError
    from lcao.levels import parse_level

    assert parse_level("testmp2/STO-3G").method == "TESTMP2"
    with pytest.raises(ValueError, match="already registered"):
        register(SecondOrder())
    unregister(second_order)
    with pytest.raises(LevelError, match="unknown method or functional 'TESTMP2'"):
        parse_level("TESTMP2/STO-3G")
    register(second_order)


def test_a_method_without_orbitals_is_refused_for_an_orbital_analysis(second_order):
    from lcao.errors import InputError

    with pytest.raises(InputError, match="no orbitals"):
        lcao.orbitals("N2", "TESTMP2/6-31G", 1.1, multiplicity=1)
