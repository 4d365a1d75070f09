"""The real CLI, in process (``main(argv) -> int``), writing only to tmp_path."""

import json
import os

import pytest

from lcao.cli import main


def run(tmp_path, *args):
    return main([*args, "--store", str(tmp_path / "store.sqlite"), "-q"])


def test_curve_writes_documented_outputs(tmp_path, capsys):
    out = tmp_path / "out"
    code = run(tmp_path, "curve", "H2", "--level", "HF/STO-3G", "--from", "0.4", "--to", "3.0", "--points", "20", "--out", str(out))
    assert code == 0
    text = capsys.readouterr().out
    assert "caution" in text and "minimal-basis" in text
    assert "handbook" in text  # experimental comparison printed (Huber & Herzberg row shipped)
    doc = json.loads((out / "curve.json").read_text())
    assert doc["schema_version"] == 1
    assert doc["versions"]["pyscf"]
    assert doc["inputs"]["level"]["d_shells"] in ("cartesian", "spherical")
    for p in doc["points"]:
        for key in ("r_angstrom", "energy_hartree", "converged", "flag", "branch"):
            assert key in p
    assert set(doc["branches"]) == {"restricted", "unrestricted"}
    assert isinstance(doc["limit_energy_hartree"], float)
    fit = doc["fit"]
    for key in ("re_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "de_ev", "d0_ev"):
        assert key in fit
    for key in ("de_ev", "a_per_angstrom", "re_angstrom", "window_angstrom"):
        assert key in fit["morse"]
    lines = (out / "points.csv").read_text().splitlines()
    assert lines[0].startswith("r_angstrom,r_bohr,energy_hartree")
    assert len(lines) == 21
    for name in ("curve.png", "curve.svg"):
        assert (out / name).stat().st_size > 1000
    assert not [f for f in os.listdir(out) if f.startswith(".tmp-")]


@pytest.mark.parametrize(
    "args,fragment",
    [
        (["curve", "Xq2"], "Xq"),
        (["curve", "CO2"], "not a diatomic"),
        (["curve", "O2", "--multiplicity", "2"], "16 electrons"),
        (["curve", "H2", "--charge", "2"], "leaves 0 electrons"),
        (["curve", "N2", "--level", "HF/6-31Gx"], "6-31Gx"),
        (["curve", "N2", "--level", "HFF/6-31G"], "HFF"),
        (["curve", "XeF", "--level", "HF/6-31G"], "Xe"),
        (["curve", "N2", "--from", "0", "--to", "2"], "positive"),
        (["curve", "N2", "--from", "2", "--to", "1"], "greater"),
        (["curve", "N2", "--from", "a", "--to", "2"], "'a'"),
        (["curve", "N2", "--from", "0.1", "--to", "2"], "coincide"),
        (["curve", "N2", "--to", "abc"], "'abc'"),
        (["curve", "N2", "--from", "0.1"], "coincide"),
        (["curve", "N2", "--multiplicity", "x"], "'x'"),
    ],
)
def test_bad_input_one_clear_line_exit_2_nothing_written(tmp_path, capsys, args, fragment):
    out = tmp_path / "out"
    code = run(tmp_path, *args, "--out", str(out))
    err = capsys.readouterr().err
    assert code == 2
    assert fragment in err
    assert "Traceback" not in err
    assert not out.exists()
    assert not (tmp_path / "store.sqlite").exists()


def test_unwritable_output_folder(tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code = run(tmp_path, "curve", "H2", "--level", "HF/STO-3G", "--out", str(blocker / "sub"))
    assert code == 2
    assert str(blocker) in capsys.readouterr().err
    assert not (tmp_path / "store.sqlite").exists()
    # RHF for an odd electron count is refused before anything is computed
    assert run(tmp_path, "curve", "NO", "--level", "RHF/STO-3G", "--out", str(tmp_path / "x")) == 2
    assert "RHF needs a closed-shell singlet" in capsys.readouterr().err
    assert not (tmp_path / "x").exists()


def test_help_and_no_command(capsys):
    assert main([]) == 2
    assert main(["curve", "--help"]) == 0
    assert "--multiplicity" in capsys.readouterr().out
    assert main(["curve"]) == 2  # missing species: a usage error


def test_orbitals_command_writes_json_and_diagram(tmp_path, capsys):
    out = tmp_path / "orb"
    code = run(tmp_path, "orbitals", "O2", "--level", "HF/STO-3G", "--r", "1.21", "--out", str(out))
    assert code == 0
    text = capsys.readouterr().out
    assert "paramagnetic" in text and "Mayer" in text
    doc = json.loads((out / "orbitals.json").read_text())
    assert doc["schema_version"] == 1
    assert set(doc["bond_orders"]) >= {"mo_count", "mulliken", "mayer"}
    assert doc["unpaired_electrons"] == 2 and doc["magnetism"] == "paramagnetic"
    mo = doc["orbitals"][0]
    for key in ("energy_hartree", "occupation_alpha", "occupation_beta", "label", "formal_class",
                "overlap_population_character", "composition_percent"):
        assert key in mo
    for name in ("orbital-levels.png", "orbital-levels.svg"):
        assert (out / name).stat().st_size > 1000


def test_curve_json_carries_bond_orders_along_the_curve(tmp_path):
    out = tmp_path / "c"
    assert run(tmp_path, "curve", "N2", "--level", "HF/STO-3G", "--from", "0.9", "--to", "2.5", "--points", "12", "--out", str(out)) == 0
    doc = json.loads((out / "curve.json").read_text())
    along = doc["along_curve"]
    assert len(along) == 12
    first = along[0]
    assert first["bond_orders"]["mo_count"] == 3.0
    assert "homo" in first["frontier"]
    assert (out / "bond-orders.png").exists()


def test_orbitals_needs_a_distance(tmp_path, capsys):
    assert run(tmp_path, "orbitals", "N2") == 2
    assert run(tmp_path, "orbitals", "N2", "--r", "-1") == 2
    assert "positive" in capsys.readouterr().err
