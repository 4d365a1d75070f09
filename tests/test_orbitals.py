"""Orbital characters, bond orders, magnetism and overlap integrals."""

import math

import numpy as np
import pytest

from lcao.analysis import analyse
from lcao.levels import parse_level
from lcao.single_point import orbitals
from lcao.methods.molecule import build_molecule
from lcao.methods.scf import solve
from lcao.species import parse_species
from lcao.units import angstrom_to_bohr


def analysed(text, basis, r_angstrom, mult, follow=True):
    sp = parse_species(text)
    lv = parse_level(f"HF/{basis}")
    mol = build_molecule(sp.atoms, float(angstrom_to_bohr(r_angstrom)), lv, sp.charge, mult - 1)
    sol = solve(mol, "RHF" if mult == 1 else "UHF", follow_stability=follow)  # what HF means (common practice)
    assert sol.converged
    return analyse(sol.scf)


# Formal MO-counting bond orders as the trade tabulates them (common practice),
# computed from the calculated orbitals near the experimental equilibrium
# distances of Huber & Herzberg (1979) (OH, O2+ and NO+ rounded).
MO_COUNT = [
    ("Li2", 1, 2.673, 1.0),
    ("N2", 1, 1.098, 3.0),
    ("O2", 3, 1.208, 2.0),
    ("F2", 1, 1.412, 1.0),
    ("CO", 1, 1.128, 3.0),
    ("NO+", 1, 1.063, 3.0),
    ("CN-", 1, 1.17, 3.0),
    ("NO", 2, 1.151, 2.5),
    ("O2+", 2, 1.12, 2.5),
    ("HF", 1, 0.917, 1.0),
    ("LiH", 1, 1.595, 1.0),
    ("OH", 2, 0.970, 1.0),
]


@pytest.mark.parametrize("basis", ["STO-3G", "6-31G"])
@pytest.mark.parametrize("text,mult,r,expected", MO_COUNT)
def test_mo_counting_bond_orders(text, mult, r, expected, basis):
    a = analysed(text, basis, r, mult)
    assert a.mo_count_bond_order == pytest.approx(expected)


@pytest.mark.parametrize("r", [2.0, 3.1, 4.5])
def test_ne2_has_bond_order_zero_at_any_distance(r):
    # common practice: every bonding MO of Ne2 is matched by its antibonding partner
    for basis in ("STO-3G", "6-31G"):
        assert analysed("Ne2", basis, r, 1).mo_count_bond_order == 0.0


@pytest.mark.parametrize("text,r,mult,expected", [("N2", 1.134, 1, 3.00), ("F2", 1.315, 1, 1.00)])
def test_mayer_bond_order_minimal_basis(text, r, mult, expected):
    # Mayer (1983), common practice: minimal-basis Mayer orders at equilibrium reproduce the
    # formal bond order; r are the HF/STO-3G equilibrium distances of the CCCBDB
    assert analysed(text, "STO-3G", r, mult).mayer_bond_order == pytest.approx(expected, abs=0.01)


def test_mayer_bond_order_of_triplet_o2():
    # The symmetry-adapted UHF determinant of O2 (3Sigma_g-) gives the formal Mayer order 2.00 in a
    # minimal basis (Mayer 1983, common practice). Stability analysis finds a lower, symmetry-broken
    # UHF solution (the pi orbitals localise, mixing pi_u and pi_g) whose Mayer order is smaller: test
    # what the method gives for both, with the broken symmetry reported.
    sym = analysed("O2", "STO-3G", 1.217, 3, follow=False)
    assert sym.mayer_bond_order == pytest.approx(2.00, abs=0.01)
    low = analysed("O2", "STO-3G", 1.217, 3, follow=True)
    assert low.mayer_bond_order < 1.95
    assert low.mo_count_bond_order == 2.0
    assert "symmetry-broken" in (low.mo_count_note or "")


def test_o2_is_paramagnetic_with_two_unpaired_pi_star_electrons():
    # O2 X 3Sigma_g- (Huber & Herzberg 1979): two unpaired electrons in pi_g*
    for basis in ("STO-3G", "6-31G"):
        a = analysed("O2", basis, 1.208, 3)
        assert a.unpaired_electrons == 2 and a.magnetism == "paramagnetic"
        assert a.unpaired_orbitals == ("1pi_g", "1pi_g")
        assert a.s2 == pytest.approx(2.0, abs=0.05) and a.s2_exact == 2.0
    assert analysed("N2", "6-31G", 1.098, 1).magnetism == "diamagnetic"


def test_sto3g_h2_overlap_and_slater_formula():
    # Szabo & Ostlund (1989) section 3.5.2: S12 = 0.6593 at R = 1.4 bohr (STO-3G, zeta 1.24);
    # analytic 1s-1s Slater overlap S = exp(-zR)(1 + zR + z^2 R^2 / 3)
    # (Mulliken, Rieke, Orloff & Orloff, J. Chem. Phys. 17 (1949) 1248), within 2e-3 over 0.5-4 bohr
    lv = parse_level("HF/STO-3G")
    z = 1.24
    for rb in np.linspace(0.5, 4.0, 15):
        mol = build_molecule(("H", "H"), rb, lv, 0, 0)
        a = analyse(solve(mol, "RHF").scf)
        s_ss = a.overlaps["s-s"]
        slater = math.exp(-z * rb) * (1 + z * rb + (z * rb) ** 2 / 3)
        assert abs(s_ss - slater) < 2e-3
    mol = build_molecule(("H", "H"), 1.4, lv, 0, 0)
    assert analyse(solve(mol, "RHF").scf).overlaps["s-s"] == pytest.approx(0.6593, abs=1e-4)


def test_heteronuclear_labels_and_compositions():
    # common practice: g/u labels exist only for homonuclear species (C_inf_v has no inversion centre);
    # Mulliken gross populations of a normalised MO sum to one electron
    a = analysed("CO", "6-31G", 1.128, 1)
    kinds = {m.kind for m in a.orbitals if m.kind}
    assert kinds <= {"sigma", "pi", "delta"} and "pi" in kinds
    assert all("_g" not in (m.label or "") and "_u" not in (m.label or "") for m in a.orbitals)
    for m in a.orbitals:
        if m.occupation > 0:
            assert sum(m.composition.values()) == pytest.approx(100.0, abs=0.1)
    # the carbon lone pair 5sigma is the CO HOMO (common practice)
    assert a.frontier()["homo"]["label"] == "5sigma"


def test_n2_homo_depends_on_the_basis():
    # Hartree-Fock gets the N2 ordering wrong in STO-3G (3sigma_g above 1pi_u) and right in 6-31G
    # (photoelectron spectra put 3sigma_g highest; Koopmans' theorem at HF/6-31G gives 1pi_u): test
    # what the method gives, not the experimental ordering.
    assert analysed("N2", "STO-3G", 1.098, 1).frontier()["homo"]["label"] == "3sigma_g"
    assert analysed("N2", "6-31G", 1.098, 1).frontier()["homo"]["label"] == "1pi_u"


def test_overlap_population_character_is_reported_beside_the_formal_class():
    a = analysed("N2", "STO-3G", 1.134, 1)
    s3 = [m for m in a.orbitals if m.label == "3sigma_g"][0]
    assert s3.formal_class == "bonding"
    assert s3.overlap_character != "bonding"  # s-p mixing: nearly nonbonding by overlap population
    assert a.overlap_character_bond_order < a.mo_count_bond_order


def test_valence_names():
    # the valence names of the period-2 homonuclear pattern (common practice)
    a = analysed("N2", "STO-3G", 1.098, 1)
    names = {m.label: m.valence_name for m in a.orbitals}
    assert names["2sigma_g"] == "sigma 2s" and names["2sigma_u"] == "sigma* 2s"
    assert names["3sigma_g"] == "sigma 2p" and names["1pi_u"] == "pi 2p" and names["1pi_g"] == "pi* 2p"


def test_broken_symmetry_orbitals_at_long_range_are_mixed_not_forced():
    a = analysed("H2", "STO-3G", 3.0, 1)
    # RHF at 3 A; the unrestricted solution localises the electrons on the atoms
    from lcao.single_point import orbitals as orb

    res = orb("H2", "HF/STO-3G", 3.0, branch="unrestricted")
    occ = [m for m in res.analysis.orbitals if m.occupation > 0]
    assert all(m.label is None for m in occ)
    assert all(0.4 < max(m.weights.values()) < 0.6 for m in occ)
    assert a.mo_count_bond_order == 1.0


def test_orbitals_at_the_curve_minimum_and_candidates():
    res = orbitals("O2", "HF/STO-3G", at_minimum=True)
    assert res.multiplicity == 3 and [t.multiplicity for t in res.candidates] == [1, 3, 5]
    assert res.curve is not None and res.point.r_bohr == pytest.approx(res.curve.fit.local.re)
