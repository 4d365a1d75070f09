"""The results store: resume after SIGKILL, reuse, schema checks."""

import json
import os
import signal
import sqlite3
import time

import pytest

from lcao.errors import StoreError
from lcao.store import Store

from helpers import count_rows, spawn, store_from_newer_schema

CURVE = ["curve", "NO", "--level", "HF/6-31G", "--from", "0.9", "--to", "3.5", "--points", "24", "-q"]


def test_sigkill_mid_scan_then_rerun_gives_identical_results(tmp_path):
    killed_store = str(tmp_path / "killed.sqlite")
    clean_store = str(tmp_path / "clean.sqlite")
    # reference: an uninterrupted run
    ref = spawn(CURVE + ["--store", clean_store, "--out", str(tmp_path / "ref")])
    assert ref.wait(timeout=300) == 0, ref.stderr.read().decode()
    total = count_rows(clean_store)
    # a run killed once part of the points are stored
    proc = spawn(CURVE + ["--store", killed_store, "--out", str(tmp_path / "killed")])
    deadline = time.time() + 240
    while count_rows(killed_store) < total // 3 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before it could be killed"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    stored = count_rows(killed_store)
    assert 0 < stored < total
    # nothing half-written: the output folder has no curve.json yet
    assert not os.path.exists(tmp_path / "killed" / "curve.json")
    again = spawn(CURVE + ["--store", killed_store, "--out", str(tmp_path / "killed")])
    assert again.wait(timeout=300) == 0, again.stderr.read().decode()
    doc = json.loads((tmp_path / "killed" / "curve.json").read_text())
    ref_doc = json.loads((tmp_path / "ref" / "curve.json").read_text())
    assert doc["counts"]["reused_from_store"] >= stored
    assert doc["counts"]["computed_now"] == total - stored
    assert count_rows(killed_store) == total
    for a, b in zip(doc["points"], ref_doc["points"]):
        assert a["r_bohr"] == b["r_bohr"]
        assert a["energy_hartree"] == pytest.approx(b["energy_hartree"], abs=1e-10)
        assert a["branch"] == b["branch"]


def test_rerun_reuses_everything_and_recompute_replaces(tmp_path):
    import lcao
    from lcao.scan.grid import range_grid

    grid = range_grid(0.6, 2.0, 8)
    with Store(tmp_path / "s.sqlite") as st:
        first = lcao.curve("H2", "HF/STO-3G", grid, store=st, fit=False)
        second = lcao.curve("H2", "HF/STO-3G", grid, store=st, fit=False)
    assert first.scan.computed > 0 and second.scan.computed == 0
    assert [p.energy_hartree for p in first.points] == [p.energy_hartree for p in second.points]
    with Store(tmp_path / "s.sqlite", reuse=False) as st:
        third = lcao.curve("H2", "HF/STO-3G", grid, store=st, fit=False)
    assert third.scan.reused == 0 and third.scan.computed == first.scan.computed


def test_not_a_store(tmp_path):
    bogus = tmp_path / "notes.sqlite"
    bogus.write_text("these are not the droids")
    with pytest.raises(StoreError, match="not an lcao store"):
        Store(bogus)
    other = tmp_path / "other.sqlite"
    con = sqlite3.connect(other)
    con.execute("CREATE TABLE t (x)")
    con.commit()
    con.close()
    with pytest.raises(StoreError, match="not an lcao store"):
        Store(other)


def test_store_from_a_newer_schema_is_refused(tmp_path):
    path = store_from_newer_schema(tmp_path / "new.sqlite")
    with pytest.raises(StoreError, match="newer"):
        Store(path)


#: the tables of a schema-1 store, as lcao wrote them before warm starts and energy components
SCHEMA_1 = """
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE points (
    species TEXT NOT NULL, charge INTEGER NOT NULL, multiplicity INTEGER NOT NULL,
    level TEXT NOT NULL, protocol INTEGER NOT NULL, sweep TEXT NOT NULL, r_key INTEGER NOT NULL,
    r_bohr REAL NOT NULL, energy REAL, converged INTEGER NOT NULL, cycles INTEGER NOT NULL,
    s2 REAL, rescue TEXT, stability TEXT, reason TEXT, extra TEXT,
    dm_shape TEXT NOT NULL, dm BLOB NOT NULL, created TEXT NOT NULL,
    PRIMARY KEY (species, charge, multiplicity, level, protocol, sweep, r_key)
);
CREATE TABLE atoms (
    symbol TEXT NOT NULL, charge INTEGER NOT NULL, spin INTEGER NOT NULL,
    level TEXT NOT NULL, protocol INTEGER NOT NULL,
    energy REAL, converged INTEGER NOT NULL, dm_shape TEXT NOT NULL, dm BLOB NOT NULL, created TEXT NOT NULL,
    PRIMARY KEY (symbol, charge, spin, level, protocol)
);
INSERT INTO meta VALUES ('schema_version', '1');
"""


def test_a_schema_1_store_reads_and_is_upgraded_in_place(tmp_path):
    import numpy as np

    from lcao.levels import parse_level
    from lcao.species import parse_species

    path = tmp_path / "old.sqlite"
    con = sqlite3.connect(path)
    con.executescript(SCHEMA_1)
    dm = np.arange(8.0).reshape(2, 2, 2)
    con.execute("INSERT INTO points VALUES ('H2', 0, 1, 'HF/sto-3g/sph', 1, 'restricted/from-equilibrium', 140000000,"
                " 1.4, -1.1167, 1, 3, NULL, 'none', 'stable', NULL, ?, '[2, 2, 2]', ?, 'then')",
                (json.dumps({"uhf_unstable": True}), dm.tobytes()))
    con.execute("INSERT INTO atoms VALUES ('H', 0, 1, 'HF/sto-3g/sph', 1, -0.466, 1, '[2, 1, 1]', ?, 'then')",
                (np.array([1.0, 0.0]).tobytes(),))
    con.commit()
    con.close()
    sp, lv = parse_species("H2"), parse_level("HF/STO-3G")
    with Store(path, read_only=True) as ro:  # read as it is, nothing changed
        p = ro.get_point(sp, 1, lv, "restricted/from-equilibrium", 1.4)
        assert ro.schema == 1 and p.energy == -1.1167 and np.array_equal(p.warm["dm"], dm)
        assert p.unstable_towards == "unrestricted" and p.components == {}
    with Store(path) as st:  # opened for writing: upgraded, old rows intact, new rows complete
        assert st.schema == 2
        a = st.get_atom("H", 0, 1, lv)
        assert a.energy_hartree == -0.466 and a.warm["dm"].shape == (2, 1, 1)
        st.put_point(sp, 1, lv, "restricted/from-equilibrium",
                     p.__class__(1.5, -1.11, True, 4, components={"reference": -1.11}, warm={"dm": dm, "t": np.ones(3)}))
        q = st.get_point(sp, 1, lv, "restricted/from-equilibrium", 1.5)
        assert q.components == {"reference": -1.11} and np.array_equal(q.warm["t"], np.ones(3))
        assert np.array_equal(st.get_point(sp, 1, lv, "restricted/from-equilibrium", 1.4).warm["dm"], dm)
    con = sqlite3.connect(path)
    assert con.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()[0] == "2"
    con.close()


def _open_at_once(path, barrier, results):
    from lcao.store import Store

    barrier.wait()
    try:
        Store(path).close()
        results.put("ok")
    except Exception as exc:  # noqa: BLE001 - reported to the test
        results.put(repr(exc))


def test_runs_opening_one_new_store_at_once_all_open_it(tmp_path):
    # three processes open one new store at the same moment, fifteen times: before the store waited for
    # the lock that switching a new file to WAL takes, 10 of 120 such opens failed "database is locked"
    import multiprocessing as mp

    ctx = mp.get_context("spawn")
    for k in range(15):
        barrier, results = ctx.Barrier(3), ctx.Queue()
        procs = [ctx.Process(target=_open_at_once, args=(str(tmp_path / f"s{k}.sqlite"), barrier, results))
                 for _ in range(3)]
        for p in procs:
            p.start()
        got = [results.get(timeout=120) for _ in procs]
        for p in procs:
            p.join()
        assert got == ["ok"] * 3
