"""The kinetics hand-off: thermo-species.yaml and thermo-nasa7.txt loaded by Cantera, the dissociation
equilibrium against evaluated tables and against Cantera's own equilibrium solver, and bad input refused.

External references:
- Cantera (https://cantera.org), an independent open-source kinetics library: it reads our YAML directly and
  our fixed-column file through its own converter (ck2yaml), evaluates the polynomials itself and solves
  the equilibrium itself.
- The NASA Glenn coefficients shipped with Cantera as ``nasa_gas.yaml`` (McBride, Zehe & Gordon,
  NASA/TP-2002-211556), fitted to the evaluated tables (NIST-JANAF, Chase 1998, and Gurvich et al.).
- NIST-JANAF S(298.15 K) of the atoms (Chase 1998), quoted from memory, not checked against the printed tables.
"""

from __future__ import annotations

import csv
import math
import os
import subprocess
import sys

import numpy as np
import pytest

ct = pytest.importorskip("cantera")  # the test extra installs it; CI runs these tests

from lcao.errors import InputError  # noqa: E402
from lcao.export.curve_files import write_outputs  # noqa: E402
from lcao.export.kinetics_files import check_entries  # noqa: E402
from lcao.export.sheet_files import sheet_writers  # noqa: E402
from lcao.sheet import build_sheet  # noqa: E402
from lcao.thermo.species_set import ThermoEntry  # noqa: E402

R = ct.gas_constant / 1000.0  # J/(mol K), Cantera's value
TEMPERATURES = (300.0, 1000.0, 3000.0, 5000.0)
#: NO+ has no D_0 in the shipped table; its enthalpy of formation is given (NIST-JANAF, Chase 1998: 990.185
#: kJ/mol for NO+, quoted from memory) so that the sheet can be written
HANDBOOK_SHEETS = {"N2": {}, "O2": {}, "CO": {}, "NO+": {"dhf298_kj_per_mol": 990.185}}


def _sheet(species, **kw):
    return build_sheet(species, source="handbook", anharmonic=True, **{**HANDBOOK_SHEETS.get(species, {}), **kw})


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    """Each handbook sheet built and written exactly as `lcao sheet` writes it."""
    out = {}
    for species in HANDBOOK_SHEETS:
        sheet = _sheet(species)
        folder = tmp_path_factory.mktemp(species.replace("+", "p"))
        write_outputs(sheet, folder, sheet_writers(sheet))
        out[species] = (sheet, folder)
    return out


def _converted(folder) -> dict:
    """The fixed-column file through Cantera's converter: species name -> ct.Species."""
    from cantera import ck2yaml

    target = os.path.join(folder, "converted.yaml")
    ck2yaml.convert(None, thermo_file=os.path.join(folder, "thermo-nasa7.txt"), out_name=target, quiet=True)
    return {s.name: s for s in ct.Species.list_from_file(target)}


def _compare(species_thermo, fit, where):
    for t in TEMPERATURES:
        cp = species_thermo.cp(t) / 1000.0
        h = species_thermo.h(t) / 1000.0
        s = species_thermo.s(t) / 1000.0
        for name, theirs, ours in (("cp", cp, fit.cp(t)), ("h", h, fit.h(t)), ("s", s, fit.s(t))):
            ours = float(np.asarray(ours).ravel()[0])
            assert theirs == pytest.approx(ours, rel=1e-6), f"{where}: {name} at {t} K"


def test_both_files_load_in_cantera_and_give_our_polynomials(written):
    """cp, h and s by Cantera at 300, 1000, 3000 and 5000 K equal lcao's within 1e-6 relative, for N2, O2,
    CO, NO+ and the N, O, C atoms (and O+ and the electron that come with NO+)."""
    seen = set()
    for species, (sheet, folder) in written.items():
        gas = ct.Solution(os.path.join(folder, "thermo-species.yaml"))  # loads as one phase
        converted = _converted(folder)
        assert set(gas.species_names) == {e.name for e in sheet.species_set} == set(converted)
        for entry in sheet.species_set:
            _compare(gas.species(entry.name).thermo, entry.nasa, f"{species} YAML {entry.name}")
            _compare(converted[entry.name].thermo, entry.nasa, f"{species} fixed-column {entry.name}")
            assert gas.species(entry.name).thermo.reference_pressure == pytest.approx(1e5)
            seen.add(entry.name)
        assert gas.species(species).charge == pytest.approx(1.0 if species == "NO+" else 0.0)
    assert {"N2", "O2", "CO", "NO+", "N", "O", "C"} <= seen


def test_polynomials_follow_the_statistical_tables(written):
    """The polynomials reproduce the partition-function tables they were fitted to (Cp within 0.5 %, S
    within 0.05 %: a fit, not a transfer, so looser than the 1e-6 above)."""
    for sheet, _ in written.values():
        for entry in sheet.species_set:
            t = entry.table["t_k"]
            assert np.allclose(entry.nasa.cp(t), entry.table["cp_j_per_mol_k"], rtol=5e-3)
            assert np.allclose(entry.nasa.s(t), entry.table["s_j_per_mol_k"], rtol=5e-4)


def test_one_atmosphere_differs_only_in_entropy(tmp_path):
    """Ideal gas: S(1 atm) = S(1 bar) - R ln(1.01325); Cp and H unchanged (common practice)."""
    gases = {}
    for p in ("1bar", "1atm"):
        sheet = _sheet("O2", reference_pressure=p)
        write_outputs(sheet, tmp_path / p, sheet_writers(sheet))
        gases[p] = ct.Solution(str(tmp_path / p / "thermo-species.yaml"))
        assert f"reference pressure {'1 bar' if p == '1bar' else '1 atm'}" in (tmp_path / p / "thermo-nasa7.txt").read_text()
    shift = R * math.log(1.01325)
    for name in ("O2", "O"):
        a, b = gases["1bar"].species(name).thermo, gases["1atm"].species(name).thermo
        assert b.reference_pressure == pytest.approx(101325.0)
        for t in TEMPERATURES:
            assert b.cp(t) == pytest.approx(a.cp(t), rel=1e-12)
            assert b.h(t) == pytest.approx(a.h(t), rel=1e-12)
            assert (a.s(t) - b.s(t)) / 1000.0 == pytest.approx(shift, rel=1e-6)
            g_a, g_b = a.h(t) - t * a.s(t), b.h(t) - t * b.s(t)
            assert (g_b - g_a) / 1000.0 == pytest.approx(t * shift, rel=1e-6)


def test_dissociation_constants_match_the_evaluated_tables(written):
    """log10 K_p of N2 <=> 2N and O2 <=> 2O at 3000 and 5000 K from handbook constants and D_0 agree with
    the NASA Glenn coefficients (fitted to NIST-JANAF / Gurvich) within 0.05. Our atoms lack excited terms
    and the molecules their excited states (O2's a 1Delta_g at 7918 cm-1 is most of O2's 0.045 at 5000 K)."""
    glenn = {s.name: s.thermo for s in ct.Species.list_from_file("nasa_gas.yaml")}

    def g(name, t):
        return glenn[name].h(t) - t * glenn[name].s(t)

    for mol, atom in (("N2", "N"), ("O2", "O")):
        d = written[mol][0].dissociation
        for t in (3000.0, 5000.0):
            ref = -(2 * g(atom, t) - g(mol, t)) / (ct.gas_constant * t) / math.log(10)
            i = int(np.argmin(abs(d.t_k - t)))
            assert d.t_k[i] == t
            assert d.log10_kp[i] == pytest.approx(ref, abs=0.05), f"{mol} at {t} K"
    # NIST-JANAF (Chase 1998) log10 K_f of N(g) at 3000 K, -4.856, doubled for N2 <=> 2N (from memory)
    d = written["N2"][0].dissociation
    assert d.log10_kp[list(d.t_k).index(3000.0)] == pytest.approx(2 * -4.856, abs=0.05)


def test_atoms_entropy_at_298_matches_janaf(written):
    """S(298.15 K, 1 bar) of N, O and C: NIST-JANAF (Chase 1998) 153.301, 161.059 and 158.100 J/(mol K),
    quoted from memory; also the NASA Glenn values Cantera ships. Within 0.1 %."""
    janaf = {"N": 153.301, "O": 161.059, "C": 158.100}
    glenn = {s.name: s.thermo for s in ct.Species.list_from_file("nasa_gas.yaml")}
    entries = {e.name: e for sheet, _ in written.values() for e in sheet.species_set}
    for atom, s_ref in janaf.items():
        ours = float(entries[atom].nasa.s(298.15))
        assert ours == pytest.approx(s_ref, rel=1e-3)
        assert ours == pytest.approx(glenn[atom].s(298.15) / 1000.0, rel=1e-3)


def test_cantera_equilibrium_gives_our_degree_of_dissociation(written):
    """Cantera's own equilibrium solver on our YAML (pure N2 at 6000 K and 1 bar) against dissociation.csv."""
    sheet, folder = written["N2"]
    gas = ct.Solution(str(folder / "thermo-species.yaml"))
    gas.TPX = 6000.0, 1e5, "N2:1"
    gas.equilibrate("TP")
    x_n, x_n2 = gas["N"].X[0], gas["N2"].X[0]
    alpha_cantera = x_n / (x_n + 2 * x_n2)
    with open(folder / "dissociation.csv") as fh:
        rows = list(csv.DictReader(line for line in fh if not line.startswith("#")))
    row = next(r for r in rows if float(r["t_k"]) == 6000.0)
    assert alpha_cantera == pytest.approx(float(row["alpha_at_1_bar"]), abs=1e-4)
    assert 0.05 < alpha_cantera < 0.3  # N2 is partly dissociated at 6000 K (NASA Glenn gives about 0.12)


def test_kinetics_files_carry_level_date_source_and_caution(written):
    sheet, folder = written["NO+"]
    for name in ("thermo-species.yaml", "thermo-nasa7.txt"):
        text = (folder / name).read_text()
        assert "for screening" in text and "design or safety decision" in text
        assert "reference pressure 1 bar" in text
        assert "Huber & Herzberg" in text  # the constants' source
        assert "990.185 kJ/mol given by the user" in text and "ionisation energy" in text  # where H(298) came from
        assert sheet.provenance["date"] in text
    lines = (folder / "thermo-nasa7.txt").read_text().splitlines()
    records = lines[lines.index("THERMO ALL") + 2: lines.index("END")]
    assert len(records) == 4 * len(sheet.species_set)
    for k, line in enumerate(records):
        assert len(line) == 80 and line[79] == str(k % 4 + 1)  # 80 columns, line number in column 80
    assert records[0][:18].strip() == "NO+" and records[0][44] == "G"
    assert "E  -1" in records[0][24:44]  # the electron count of a cation
    # upper range first in the fixed-column file, low range first in the YAML (McBride et al. 1993; Cantera)
    hi = sheet.species_set[0].nasa.ranges[1]
    assert float(records[1][:15]) == hi.cp_coeffs[0]


def _cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "lcao", *args], cwd=cwd, capture_output=True, text=True, timeout=300)


@pytest.mark.parametrize("extra, message", [
    (["--name", "_a-very-long-suffix"], "holds 18"),
    (["--temperatures", "300,1000,8000"], "reaches outside 200-6000 K"),
    (["--temperatures", "300,200,1000"], "increasing order"),
    (["--reference-pressure", "2bar"], "invalid choice"),
    (["--pressure", "-1"], "positive number of bar"),
])
def test_bad_input_is_refused_before_anything_is_written(tmp_path, extra, message):
    r = _cli("sheet", "N2", "--constants", "handbook", "--out", "out", *extra, cwd=tmp_path)
    assert r.returncode == 2, r.stderr
    assert message in r.stderr and len(r.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()


def test_more_elements_than_the_layout_holds_are_refused():
    """A diatomic has at most two elements and the electron; the check guards the writer itself."""
    sheet = _sheet("N2")
    e = sheet.species_set[0]
    crowded = ThermoEntry("X", (("C", 1), ("N", 1), ("O", 1), ("H", 1), ("E", -1)), e.nasa, e.table, "molecule", "")
    with pytest.raises(InputError, match="holds 4"):
        check_entries([crowded])


def test_series_writes_kinetics_files_for_its_bound_members(tmp_path):
    """A series writes one set for its bound members (He2 is repulsive and left out); Cantera loads both."""
    r = _cli("series", "N2", "NO+", "He2", "--level", "HF/STO-3G", "--out", "s", "--no-plots", "--store", "s.sqlite",
             "--workers", "1", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert "not in the kinetics files: He2 at HF/STO-3G: verdict repulsive" in r.stdout
    gas = ct.Solution(str(tmp_path / "s" / "thermo-species.yaml"))
    assert set(gas.species_names) == {"N2", "N", "NO+", "O+", "E"}
    from cantera import ck2yaml

    ck2yaml.convert(None, thermo_file=str(tmp_path / "s" / "thermo-nasa7.txt"), out_name=str(tmp_path / "c.yaml"), quiet=True)
    assert {s.name for s in ct.Species.list_from_file(str(tmp_path / "c.yaml"))} == set(gas.species_names)
    assert "HF/STO-3G" in (tmp_path / "s" / "thermo-nasa7.txt").read_text()


def test_nasa9_yaml_when_asked(tmp_path):
    """--polynomial nasa9: the YAML carries NASA9 (Cantera evaluates it as lcao does); the fixed-column file
    stays NASA7, the only form its layout holds."""
    sheet = _sheet("O2", polynomial="nasa9")
    write_outputs(sheet, tmp_path, sheet_writers(sheet))
    gas = ct.Solution(str(tmp_path / "thermo-species.yaml"))
    for name in ("O2", "O"):
        sp = gas.species(name)
        assert sp.input_data["thermo"]["model"] == "NASA9"
        _compare(sp.thermo, sheet.handoff["nasa9"][name], f"NASA9 {name}")
    assert {s.name for s in _converted(tmp_path).values()} == {"O2", "O"}
