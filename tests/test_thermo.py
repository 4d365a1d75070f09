"""Thermochemistry and the parameter sheet."""

import json

import numpy as np
import pytest

from lcao.cli import main
from lcao.sheet import ENERGY_FIELDS, LENGTH_FIELDS, build_sheet
from lcao.thermo import MoleculeConstants, fit_nasa, thermo_table
from lcao.units import BOHR_ANGSTROM, ENERGY_UNITS

# NIST-JANAF Thermochemical Tables, 4th ed. (Chase 1998), ideal gas at 298.15 K and 1 bar, J/(mol K):
# N2 as the issue quotes it; O2, CO and H2 (normal hydrogen) quoted from memory of the tables.
JANAF = {"N2": (191.609, 29.124), "O2": (205.147, 29.376), "CO": (197.653, 29.142), "H2": (130.680, 28.836)}


@pytest.mark.parametrize("species", ["N2", "O2", "CO"])
def test_handbook_constants_reproduce_janaf(species):
    sheet = build_sheet(species, source="handbook", anharmonic=True)
    s_ref, cp_ref = JANAF[species]
    assert sheet.record["s298_j_per_mol_k"] == pytest.approx(s_ref, rel=1e-3)
    assert sheet.record["cp298_j_per_mol_k"] == pytest.approx(cp_ref, rel=1e-3)


def test_o2_needs_its_triplet_degeneracy():
    sheet = build_sheet("O2", source="handbook", anharmonic=True)
    assert sheet.record["electronic_degeneracy"] == 3
    r = sheet.record
    m = MoleculeConstants(r["molecular_mass_dalton"], 2, sheet.provenance["rotational_constant_for_thermo_cm1"], r["we_cm1"], 1)
    s_singlet = thermo_table(m, [298.15])["s_j_per_mol_k"][0]
    assert abs(s_singlet / JANAF["O2"][0] - 1) > 0.03  # R ln 3 = 9.1 J/(mol K) missing


def test_h2_needs_the_explicit_rotational_sum():
    sheet = build_sheet("H2", source="handbook")
    s_ref, cp_ref = JANAF["H2"]
    assert sheet.record["s298_j_per_mol_k"] == pytest.approx(s_ref, rel=5e-3)
    assert sheet.record["cp298_j_per_mol_k"] == pytest.approx(cp_ref, rel=5e-3)
    # the high-temperature limit of the rotational partition function is far off at 298 K
    b = sheet.provenance["rotational_constant_for_thermo_cm1"]
    from scipy import constants as c

    q_sum = sum((2 * j + 1) * np.exp(-b * j * (j + 1) * 100 * c.h * c.c / (c.k * 298.15)) for j in range(40)) / 2
    q_lim = c.k * 298.15 / (2 * b * 100 * c.h * c.c)
    assert abs(q_lim / q_sum - 1) > 0.05


@pytest.mark.parametrize("form", ["nasa7", "nasa9"])
def test_polynomial_fit_and_continuity(form):
    m = MoleculeConstants(28.006148, 2, 1.98957, 2358.57, 1)
    t = np.linspace(200, 6000, 581)
    tab = thermo_table(m, t)
    s298 = thermo_table(m, [298.15])["s_j_per_mol_k"][0]
    fit = fit_nasa(t, tab["cp_j_per_mol_k"], s298, 0.0, form=form)
    tt = np.linspace(300, 5000, 300)
    assert np.max(np.abs(fit.cp(tt) / thermo_table(m, tt)["cp_j_per_mol_k"] - 1)) < 5e-3
    for name, (lo, hi) in fit.at_common().items():
        assert lo == pytest.approx(hi, rel=1e-6), name
    # the coefficients are rounded to the nine significant digits of the fixed-column layout (E15.8), so
    # H(298.15 K) and S(298.15 K) hold to that rounding (a6 ~ 1e3 K: R * 298 K * 1e-8 relative, ~1e-5 J/mol)
    assert float(fit.h(np.array([298.15]))[0]) == pytest.approx(0.0, abs=1e-4)
    assert float(fit.s(np.array([298.15]))[0]) == pytest.approx(s298, rel=1e-8)
    # H from the polynomial matches the statistical H(T) - H(298.15)
    dh_stat = thermo_table(m, [2000.0])["h_minus_h298_kj_per_mol"][0] * 1000
    assert float(fit.h(np.array([2000.0]))[0]) == pytest.approx(dh_stat, rel=5e-3)


def round_trip_checked(record):
    n = 0
    for name in ENERGY_FIELDS:
        base = record[f"{name}_hartree"]
        for unit, factor in ENERGY_UNITS.items():
            v = record[f"{name}_{unit}"]
            if base is None:
                assert v is None
                continue
            assert v / factor == pytest.approx(base, rel=1e-12, abs=0)
            n += 1
    for name in LENGTH_FIELDS:
        if record[f"{name}_bohr"] is not None:
            assert record[f"{name}_angstrom"] / BOHR_ANGSTROM == pytest.approx(record[f"{name}_bohr"], rel=1e-12, abs=0)
            n += 1
    return n


def test_computed_sheet_round_trips_and_carries_the_caution(tmp_path, capsys):
    out = tmp_path / "sheet"
    code = main(["sheet", "CO", "--level", "HF/STO-3G", "--points", "16", "--out", str(out),
                 "--store", str(tmp_path / "s.sqlite"), "-q"])
    assert code == 0
    text = capsys.readouterr().out
    assert "not fit for rate constants" in text
    doc = json.loads((out / "sheet.json").read_text())
    assert doc["schema_version"] == 1
    rec = doc["records"][0]
    assert round_trip_checked(rec) > 20
    prov = rec["provenance"]
    for key in ("level", "multiplicity_source", "state", "versions", "grid", "local_fit_window_angstrom", "date", "warnings", "source"):
        assert key in prov
    assert "not fit for rate constants" in prov["caution"]
    assert rec["symmetry_number"] == 1 and rec["electronic_degeneracy"] == 1
    assert (out / "sheet.csv").read_text().splitlines()[0].startswith("species,level")
    rows = (out / "thermo.csv").read_text().splitlines()
    assert rows[0].startswith("t_k,cp_j_per_mol_k,s_j_per_mol_k,h_minus_h298_kj_per_mol,gef_j_per_mol_k")
    assert (out / "thermo.png").exists()


def test_pi_radical_degeneracy_and_handbook_switch():
    # NO X 2Pi: degeneracy 2 (spin) x 2 (Lambda = 1) = 4 (common practice)
    hb = build_sheet("NO", source="handbook")
    assert hb.record["electronic_degeneracy"] == 4
    assert hb.provenance["source"] == "handbook"
    assert all(v == "handbook" for v in hb.provenance["field_sources"].values())
