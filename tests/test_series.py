"""Series, ladders, study files and the handbook comparison."""

import csv
import json

import pytest

from lcao.cli import main
from lcao.data import handbook_row
from lcao.export.series_files import member_values, signed_errors
from lcao.levels import parse_level
from lcao.series import by_electron_count, members_from, run_series
from lcao.store import Store
from lcao.study import StudyError, load_study

SERIES_14 = ["N2", "CO", "CN-", "NO+", "BF"]


@pytest.fixture(scope="module")
def series14(tmp_path_factory):
    path = tmp_path_factory.mktemp("series") / "store.sqlite"
    with Store(path) as st:
        rows = run_series(members_from(SERIES_14, [parse_level("HF/6-31G")], points=16), st)
        n = st.count_points()
    return rows, path, n


def test_14_electron_series_matches_cccbdb_and_handbook(series14):
    rows, _, _ = series14
    by = {r.species: r for r in rows}
    assert all(r.status == "ok" for r in rows)
    # NIST CCCBDB HF/6-31G bond lengths (the values the issue quotes); the CCCBDB entries for CN-,
    # NO+ and BF are not known to us here and are not checked
    for sp, ref in (("N2", 1.089), ("CO", 1.131)):
        assert abs(member_values(by[sp])["re_angstrom"] - ref) < 0.002
    for r in rows:
        hb = handbook_row(r.species)
        if hb is None:
            assert r.handbook == {}
            continue
        for key in ("re_angstrom", "we_cm1", "d0_ev", "ground_term"):
            assert r.handbook[key] == hb[key]
        if hb.get("re_angstrom") is not None and hb["multiplicity"] == member_values(r)["multiplicity"]:
            assert signed_errors(r)["re_angstrom"] == pytest.approx(member_values(r)["re_angstrom"] - hb["re_angstrom"])
    # isoelectronic with N2: formal triple bonds, closed shells (common practice)
    assert all(member_values(r)["bond_order_mo_count"] == 3.0 and member_values(r)["magnetism"] == "diamagnetic" for r in rows)


def test_rerunning_a_series_computes_nothing(series14):
    rows, path, n = series14
    with Store(path) as st:
        again = run_series(members_from(SERIES_14, [parse_level("HF/6-31G")], points=16), st)
        assert st.count_points() == n
    assert [member_values(r)["re_angstrom"] for r in again] == [member_values(r)["re_angstrom"] for r in rows]


def test_n2_ladder_shows_the_hartree_fock_basis_trend(tmp_path):
    # CCCBDB: HF/STO-3G 1.134, HF/6-31G 1.089, HF/6-31G* 1.078 A (Cartesian d); experiment 1.0977 A
    # (Huber & Herzberg 1979). r_e shrinks as the basis grows; by these CCCBDB numbers it already lies
    # below experiment at HF/6-31G and further below with polarisation functions (the Hartree-Fock
    # limit is near 1.066 A), so that is what is tested.
    levels = [parse_level(t) for t in ("HF/STO-3G", "HF/6-31G", "HF/6-31G*")]
    assert levels[2].cartesian
    with Store(tmp_path / "s.sqlite") as st:
        rows = run_series(members_from(["N2"], levels, points=16), st)
    re_ = [member_values(r)["re_angstrom"] for r in rows]
    assert re_[0] > re_[1] > re_[2]
    assert re_[0] > 1.0977 > re_[1] > re_[2]
    for got, ref in zip(re_, (1.134, 1.089, 1.078)):
        assert abs(got - ref) < 0.002


def test_members_by_electron_count():
    got = {s.label for s in by_electron_count(14, ["B", "C", "N", "O", "F"], (-2, 2))}
    assert {"N2", "CO", "CN-", "NO+", "BF", "C2^2-"} <= got
    assert all(s.n_electrons == 14 for s in by_electron_count(14, ["B", "C", "N", "O", "F"], (-2, 2)))
    assert {s.label for s in by_electron_count(14, ["C", "N", "O"], (0, 0))} == {"N2", "CO"}


def test_failed_member_appears_with_its_reason(tmp_path):
    with Store(tmp_path / "s.sqlite") as st:
        rows = run_series(members_from(["H2", "XeF"], [parse_level("HF/6-31G")], points=12), st)
    assert rows[0].status == "ok"
    # a basis without functions for an element: the member is listed as skipped, with the reason (a survey by
    # rule meets many such members; before surveys, this was a failed member)
    assert rows[1].status == "skipped" and "Xe" in rows[1].reason and "6-31G" in rows[1].reason


STUDY = '''
title = "test study"
out = "out"

[defaults]
levels = ["HF/STO-3G"]
points = 12

[[group]]
name = "hydrides"
species = ["H2", "LiH"]
'''


def test_study_file_runs_and_writes_each_group(tmp_path, capsys):
    f = tmp_path / "study.toml"
    f.write_text(STUDY)
    assert main(["run", str(f), "-q"]) == 0
    doc = json.loads((tmp_path / "out" / "hydrides" / "series.json").read_text())
    assert doc["schema_version"] == 1 and [r["species"] for r in doc["rows"]] == ["H2", "LiH"]
    assert (tmp_path / "out" / "hydrides" / "series.csv").read_text().startswith("species,level,status")
    assert "H2" in capsys.readouterr().out


@pytest.mark.parametrize(
    "text,fragment",
    [
        (STUDY.replace("points = 12", "pionts = 12"), "'pionts'"),
        (STUDY.replace('name = "hydrides"', 'name = "hydrides"\nspecis = ["N2"]'), "'specis'"),
        (STUDY.replace("points = 12", 'points = "twelve"'), "points must be whole number"),
        (STUDY + "\n[[group]]\nname = 'x'\nspecies = ['CO2']\n", "not a diatomic"),
        ("title = 'unclosed", "not valid TOML"),
        (STUDY.replace('levels = ["HF/STO-3G"]', 'levels = ["HF/STO-3Q"]'), "STO-3Q"),
    ],
)
def test_bad_study_files_fail_before_any_computation(tmp_path, capsys, text, fragment):
    f = tmp_path / "study.toml"
    f.write_text(text)
    with pytest.raises(StudyError) as err:
        load_study(f)
    assert fragment in str(err.value)
    assert main(["run", str(f), "-q"]) == 2
    assert fragment in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_series_command_writes_table_and_files(tmp_path, capsys):
    code = main(["series", "H2", "LiH", "--level", "HF/STO-3G", "--points", "12", "--out", str(tmp_path / "o"),
                 "--store", str(tmp_path / "s.sqlite"), "-q"])
    assert code == 0
    out = capsys.readouterr().out
    assert "H2" in out and "LiH" in out and "handbook" in out
    for name in ("series.csv", "series.json", "series-re.png", "series-bond-orders.png", "series-levels.png"):
        assert (tmp_path / "o" / name).exists()


def test_members_on_two_workers_match_one_and_store_each_point_once(tmp_path):
    members = members_from(["H2", "LiH"], [parse_level("HF/STO-3G")], points=12)
    with Store(tmp_path / "one.sqlite") as st:
        serial = run_series(members, st, workers=1)
        n_serial = st.count_points()
    with Store(tmp_path / "two.sqlite") as st:
        rows = run_series(members, st, workers=2)
        assert st.count_points() == n_serial
    for a, b in zip(serial, rows):
        assert a.species == b.species
        assert member_values(a)["re_angstrom"] == pytest.approx(member_values(b)["re_angstrom"], abs=1e-9)
    with Store(tmp_path / "two.sqlite") as st:
        again = run_series(members, st, workers=2)  # everything reused
        assert st.count_points() == n_serial
    assert [member_values(r)["we_cm1"] for r in again] == pytest.approx([member_values(r)["we_cm1"] for r in rows], abs=1e-9)


def test_large_basis_members_run_here_on_threads_and_the_rest_on_processes(tmp_path, monkeypatch, capsys):
    # with the threshold lowered to 10 functions, N2/STO-3G (10) counts as large: it runs in this
    # process (on threads), H2 and HeH+ (2 each) on the worker processes; the rows keep their order
    from lcao import execute, threads

    monkeypatch.setattr(threads, "THREADED_FROM_NAO", 10)
    made = []
    real = execute.make_executor

    def recording(workers=None, basis_size=0):
        ex = real(workers, basis_size)
        made.append((basis_size, type(ex).__name__, getattr(ex, "threads", None)))
        return ex

    monkeypatch.setattr(execute, "make_executor", recording)
    out = tmp_path / "o"
    code = main(["series", "H2", "N2", "HeH+", "--level", "HF/STO-3G", "--points", "12", "--workers", "2", "-q",
                 "--no-plots", "--store", str(tmp_path / "s.sqlite"), "--out", str(out)])
    assert code == 0, capsys.readouterr().err
    # the small members together on worker processes, then N2 alone here on both cores as threads
    assert made == [(0, "LocalProcessExecutor", 1), (10, "SerialExecutor", 2)]
    doc = json.loads((out / "series.json").read_text())
    assert [r["species"] for r in doc["rows"]] == ["H2", "N2", "HeH+"]
    assert all(r["status"] == "ok" for r in doc["rows"])


def test_survey_by_rule_lists_every_pair_and_skips_what_the_basis_cannot_do(tmp_path, capsys):
    """Every diatomic of H and K with charges 0..1 (homonuclear and heteronuclear: 3 pairs x 2 charges, less
    none: each has electrons); cc-pVTZ has no potassium functions in PySCF's library, so the members with K are
    listed as skipped with the reason and the run still succeeds."""
    from lcao.series import every_pair, parse_elements

    assert [s.label for s in every_pair(parse_elements("H,K"), (0, 1))] == ["H2", "HK", "K2", "H2+", "HK+", "K2+"]
    assert parse_elements("H-Li,N") == ["H", "He", "Li", "N"]
    code = main(["series", "--elements", "H,K", "--charges", "0..0", "--level", "HF/cc-pVTZ", "--points", "12",
                 "--out", str(tmp_path / "s"), "--store", str(tmp_path / "s.sqlite"), "-q", "--no-plots"])
    out = capsys.readouterr().out
    assert code == 0
    assert any(line.strip().startswith("HK ") and "skipped: basis cc-pVTZ has no functions for K" in line
               for line in out.splitlines())
    assert "missing" not in out  # skipped members have no folder, and the report expects none
    rows = {r["species"]: r for r in csv.DictReader(open(tmp_path / "s" / "series.csv"))}
    assert rows["H2"]["status"] == "ok" and rows["K2"]["status"] == "skipped"
