"""Potential-energy curves against published and analytic references."""

import math

import numpy as np
import pytest

import lcao
from lcao.fit.local import local_fit
from lcao.levels import parse_level
from lcao.scan.grid import range_grid
from lcao.units import bohr_to_angstrom

# Equilibrium distances (angstrom) at HF/STO-3G and HF/6-31G, NIST Computational
# Chemistry Comparison and Benchmark Database (CCCBDB, SRD 101), calculated
# geometries. N2 and CO are the values the issue quotes from the CCCBDB; HF and
# F2/STO-3G are quoted from memory of the CCCBDB listing, not re-checked here.
CCCBDB_RE = [
    ("N2", "STO-3G", 1.134),
    ("N2", "6-31G", 1.089),
    ("CO", "STO-3G", 1.145),
    ("CO", "6-31G", 1.131),
    ("HF", "STO-3G", 0.956),  # from memory
    ("HF", "6-31G", 0.921),  # from memory
    ("F2", "STO-3G", 1.315),  # from memory
]


def fine_scan_re(species, basis, centre):
    """r_e (angstrom) of the restricted branch from a fine local scan (13 points, +-0.06 A)."""
    res = lcao.curve(species, f"HF/{basis}", range_grid(centre - 0.06, centre + 0.06, 13), multiplicity=1, fit=False)
    well = [p for p in res.scan.branches["restricted"] if p.trusted]
    lf = local_fit([p.r_bohr for p in well], [p.energy_hartree for p in well])
    return float(bohr_to_angstrom(lf.re)), res


@pytest.mark.parametrize("species,basis,ref", CCCBDB_RE)
def test_equilibrium_distance_matches_cccbdb(species, basis, ref):
    re_, _ = fine_scan_re(species, basis, ref)
    # issue 2 asks 0.002 A, issue 4 asks 0.001 A for N2, CO and HF
    assert abs(re_ - ref) < (0.001 if species != "F2" else 0.002)


def test_f2_631g_minimum_matches_analytic_gradient():
    """F2 HF/6-31G: no CCCBDB value at hand, so the fitted minimum is checked
    against the root of PySCF's analytic RHF gradient (an independent code path)."""
    from scipy.optimize import brentq

    from lcao.methods.molecule import build_molecule
    from lcao.methods.scf import solve

    level = parse_level("HF/6-31G")

    def dE(r_bohr):
        sol = solve(build_molecule(("F", "F"), r_bohr, level, 0, 0), "RHF", follow_stability=False)
        g = sol.scf.nuc_grad_method().kernel()
        return g[1, 2]

    root = float(bohr_to_angstrom(brentq(dE, 2.55, 2.8, xtol=1e-7)))
    re_, _ = fine_scan_re("F2", "6-31G", 1.41)
    assert abs(re_ - root) < 2e-4


def atom_energy(symbol, basis, spin):
    from lcao.methods import method_for

    level = parse_level(f"HF/{basis}")
    return method_for(level).atom(symbol, 0, spin, level).energy_hartree


@pytest.mark.parametrize("species,symbol,spin", [("H2", "H", 1), ("N2", "N", 3)])
def test_unrestricted_curve_reaches_twice_the_atom_at_5A_restricted_does_not(species, symbol, spin):
    # analytic fact of the UHF model (common practice): two non-interacting UHF atoms
    two_atoms = 2 * atom_energy(symbol, "6-31G", spin)
    grid = range_grid(0.7, 5.0, 16)
    res = lcao.curve(species, "HF/6-31G", grid, multiplicity=1, fit=False)
    far = res.points[-1]
    assert far.trusted and far.branch == "unrestricted"
    assert abs(far.energy_hartree - two_atoms) < 1e-5
    assert res.limit_energy_hartree == pytest.approx(two_atoms, abs=1e-8)
    rhf = lcao.curve(species, "RHF/6-31G", grid, multiplicity=1, fit=False)
    assert rhf.points[-1].energy_hartree - two_atoms > 0.1
    assert any("wrong limit" in n for n in rhf.scan.notes) or rhf.scan.instability is not None


def test_pi_radical_no_converges_everywhere_and_reaches_n_plus_o():
    grid = range_grid(0.9, 5.0, 25)
    res = lcao.curve("NO", "HF/6-31G", grid, fit=False)
    assert res.multiplicity == 2
    assert all(p.converged and p.trusted for p in res.points)
    limit = atom_energy("N", "6-31G", 3) + atom_energy("O", "6-31G", 2)
    assert res.points[-1].energy_hartree == pytest.approx(limit, abs=1e-5)
    # both sweeps were run and the lower kept
    assert {"unrestricted/from-equilibrium", "unrestricted/from-atoms"} <= set(res.scan.sweeps)


def test_plain_library_defaults_miss_the_limit_the_protocol_reaches():
    """The trap the protocol is built against: default UHF from the default guess stays on RHF."""
    from pyscf import gto, scf

    mol = gto.M(atom="N 0 0 0; N 0 0 5", basis="6-31g", verbose=0)
    mf = scf.UHF(mol)
    mf.chkfile = None
    e_default = mf.kernel()
    two_atoms = 2 * atom_energy("N", "6-31G", 3)
    assert e_default - two_atoms > 0.5


def test_points_record_what_they_must():
    res = lcao.curve("H2", "HF/STO-3G", range_grid(0.5, 3.0, 12), fit=False)
    for p in res.points:
        d = p.as_dict()
        for key in ("r_angstrom", "energy_hartree", "converged", "flag", "branch", "sweep", "scf_cycles", "s2"):
            assert key in d
        assert p.cycles >= 0 and p.sweep
    assert res.scan.instability is not None
    a, b = res.scan.instability
    assert a < b
    uhf = [p for p in res.points if p.branch == "unrestricted"]
    assert uhf and all(p.s2 is not None for p in uhf)
    assert all(math.isfinite(p.energy_hartree) for p in res.points)


def test_multiplicity_is_chosen_and_candidates_reported():
    res = lcao.curve("O2", "HF/STO-3G", range_grid(1.0, 2.0, 6), fit=False)
    # O2 has a triplet ground state (X 3Sigma_g-, Huber & Herzberg 1979)
    assert res.multiplicity == 3
    mults = [t.multiplicity for t in res.candidates]
    assert mults == [1, 3, 5]
    es = {t.multiplicity: t.energy_hartree for t in res.candidates}
    assert es[3] < es[1] and es[3] < es[5]


def test_outlier_detection_flags_a_point_on_a_higher_state():
    from lcao.points import outlier_reasons

    r = np.linspace(1.5, 4.0, 15)
    e = 0.2 * (1 - np.exp(-1.2 * (r - 2.1))) ** 2 - 100.0
    bad = e.copy()
    bad[7] += 0.1  # an SCF that converged 0.1 Eh too high
    assert outlier_reasons(r, e, np.ones(15, bool)) == [None] * 15
    reasons = outlier_reasons(r, bad, np.ones(15, bool))
    assert reasons[7] is not None and sum(x is not None for x in reasons) == 1


def test_ionic_molecule_gets_its_singlet():
    # LiF X 1Sigma+ (Huber & Herzberg 1979). The sum of covalent radii (1.85 A) is far beyond the ionic
    # bond (1.56 A), where the triplet lies lower at HF/STO-3G; probing shorter distances too finds the singlet.
    res = lcao.curve("LiF", "HF/STO-3G", range_grid(1.3, 2.2, 6), fit=False, analyse_points=False)
    assert res.multiplicity == 1
    assert len({t.r_bohr for t in res.candidates}) >= 1


def test_spin_contaminated_well_is_reported():
    # UHF N2+ in STO-3G: <S^2> far above 0.75 at the minimum (what the method gives; the usual 10 % rule)
    res = lcao.curve("N2+", "HF/STO-3G", range_grid(0.9, 2.5, 12), fit=False, analyse_points=False)
    assert any("spin contamination" in n for n in res.scan.notes)
    clean = lcao.curve("O2", "HF/STO-3G", range_grid(1.0, 2.0, 8), fit=False, analyse_points=False)
    assert not any("spin contamination" in n for n in clean.scan.notes)


def test_both_unrestricted_sweeps_of_co_meet_one_solution(monkeypatch):
    # state following (common practice): the sweep out from the RHF -> UHF instability and the sweep
    # in from the separated atoms should reach the same UHF solution where both are converged. A
    # start extrapolated through CO's difficult region near 2 A once sent the first onto a higher
    # solution at three distances and then onto another state 6.6 mEh lower beyond 2.2 A.
    # By default the sweep from the atoms runs only where the one from the instability ends above the
    # atoms or leaves a point untrusted (StatePlan.atoms_sweep_if_needed); here it is made to run as well,
    # and the default curve, without it, must be the same.
    from dataclasses import replace

    from lcao.methods.scf_method import SelfConsistentField

    grid = range_grid(0.8, 3.0, 40)
    default = lcao.curve("CO", "HF/STO-3G", grid, multiplicity=1)
    assert "unrestricted/from-atoms" not in default.scan.sweeps
    plan = SelfConsistentField.state_plan
    monkeypatch.setattr(SelfConsistentField, "state_plan", lambda self, *a: replace(plan(self, *a), atoms_sweep_if_needed=False))
    res = lcao.curve("CO", "HF/STO-3G", grid, multiplicity=1)
    out = res.scan.sweeps["unrestricted/from-instability"]
    inw = res.scan.sweeps["unrestricted/from-atoms"]
    gaps = [abs(a.energy_hartree - b.energy_hartree) for a, b in zip(out, inw) if a and b and a.converged and b.converged]
    assert len(gaps) > 25 and max(gaps) < 1e-4  # the threshold of the "sweeps disagree" note
    assert not any("disagree" in n for n in res.scan.notes)
    # the same solution: where both sweeps converged, the lower of the two is kept, which differs from the
    # one sweep's point by the SCF convergence (measured 2.4e-9 Eh at most)
    assert [p.energy_hartree for p in default.points] == pytest.approx([p.energy_hartree for p in res.points], abs=1e-8)
