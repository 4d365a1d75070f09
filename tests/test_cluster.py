"""Dask as the execution engine: the same numbers as a serial run, a worker killed mid-survey, the client
killed mid-survey, and the batch job script of a SLURM study without a scheduler.

External references: the serial run of the same members (an independent execution path: one process, no
Dask) and the job script that dask-jobqueue itself writes.
"""

from __future__ import annotations

import importlib.util
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time

import pytest

from helpers import ROOT, count_rows
from lcao.cli import main
from lcao.levels import parse_level
from lcao.series import members_from, run_series
from lcao.store import Store

# the cluster extra; scripts/test installs it, so CI runs these tests. Found, not imported: every Dask
# client runs in a child process (tests/cluster_scenarios.py says why)
pytestmark = pytest.mark.skipif(importlib.util.find_spec("distributed") is None, reason="needs lcao[cluster]")

SIX = ["N2", "CO", "NO", "O2", "CN", "BF"]


def stored(path, column: str = "energy") -> dict:
    """Point key -> ``column`` of every point in a store."""
    con = sqlite3.connect(path)
    try:
        rows = con.execute(f"SELECT species, multiplicity, level, sweep, r_key, {column} FROM points").fetchall()
    finally:
        con.close()
    return {r[:5]: r[5] for r in rows}


def computed_now(row) -> int:
    return row.computed


def scenario(name, tmp_path) -> dict:
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    r = subprocess.run([sys.executable, os.path.join(ROOT, "tests", "cluster_scenarios.py"), name, str(tmp_path)],
                       capture_output=True, text=True, env=env, timeout=900)
    assert r.returncode == 0, r.stderr[-3000:]
    return json.loads(r.stdout.strip().splitlines()[-1])


def test_six_species_on_a_local_cluster_match_the_serial_run(tmp_path):
    got = scenario("same_numbers", tmp_path)
    assert got["workers"] == 2
    a, b = stored(tmp_path / "serial.sqlite"), stored(tmp_path / "dask.sqlite")
    assert a.keys() == b.keys() and len(a) > 6 * 20  # each point once (the store's key), the same points
    for key, e in a.items():
        if e is None:
            assert b[key] is None
        else:
            assert b[key] == pytest.approx(e, abs=1e-8), key
    for species, s1, s2, re1, re2 in got["rows"]:
        assert s1 == s2, species
        if re1 is not None:
            assert re2 == pytest.approx(re1, abs=1e-6)


def test_a_worker_killed_mid_survey(tmp_path):
    """The scheduler re-runs the dead worker's task elsewhere: the survey completes, and a rerun computes
    nothing."""
    got = scenario("dead_worker", tmp_path)
    assert got["killed"]
    assert all(status == "ok" for _, status, _ in got["statuses"]), got["statuses"]
    assert got["rerun_computed"] == 0


def test_a_client_killed_mid_survey_then_rerun(tmp_path):
    """The client (and the local cluster it started) killed: a rerun computes only what the store lacks."""
    args = [sys.executable, "-m", "lcao", "series", *SIX[:4], "--level", "HF/STO-3G", "--cluster", "local:2",
            "--store", "store.sqlite", "--out", "out", "-q", "--no-plots"]
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(args, cwd=tmp_path, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    path = tmp_path / "store.sqlite"
    deadline = time.time() + 180
    while count_rows(str(path)) < 20 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    os.killpg(proc.pid, signal.SIGKILL)  # the client and every process it started
    proc.wait(timeout=30)
    before = stored(path, "created")
    assert len(before) >= 20
    members = members_from(SIX[:4], [parse_level("HF/STO-3G")])
    with Store(path) as store:
        rows = run_series(members, store, workers=1)
    after = stored(path, "created")
    assert all(r.status == "ok" for r in rows)
    assert {k: after[k] for k in before} == before  # nothing committed before the kill was computed again
    assert len(after) > len(before) and sum(computed_now(r) for r in rows) > 0  # the missing part was


def test_slurm_job_script_without_a_scheduler(tmp_path, capsys):
    study = tmp_path / "survey.toml"
    study.write_text(
        'title = "survey"\n'
        '[cluster]\nkind = "slurm"\ncores = 8\nmemory = "16GB"\nwalltime = "02:30:00"\nqueue = "short"\n'
        'account = "chem-42"\njobs = 3\ndirectives = ["--constraint=avx2"]\n'
        '[[group]]\nname = "g"\nspecies = ["N2"]\n')
    r = subprocess.run([sys.executable, "-m", "lcao", "cluster-script", str(study)], capture_output=True, text=True,
                       timeout=120, env=dict(os.environ, PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", "")))
    assert r.returncode == 0, r.stderr
    script = r.stdout
    assert "#SBATCH" in script
    assert "-n 1" in script and "--cpus-per-task=8" in script  # one job, eight cores
    assert "--mem=15G" in script or "--mem=16G" in script  # dask-jobqueue rounds the memory down a little
    assert "-t 02:30:00" in script and "-p short" in script and "-A chem-42" in script
    assert "#SBATCH --constraint=avx2" in script
    assert "distributed.cli.dask_worker" in script and "--nworkers 8" in script and "--nthreads 1" in script
    assert "3 such job(s)" in script
    # the workers' settings travel as Dask configuration variables (Dask's documented DASK_* form, read by the
    # worker when it starts): no statistical profiler, the nanny's memory trimming raised, and the event loop's
    # health check once a second (Dask's default 20 ms)
    exports = [line for line in script.splitlines() if line.startswith("export DASK_")]
    env = dict(os.environ)
    for line in exports:
        name, value = line[len("export "):].split("=", 1)
        env[name] = value.strip('"')
    probe = ("import dask, distributed; print(dask.config.get('distributed.worker.profile.enabled'),"
             " dask.config.get('distributed.nanny.pre-spawn-environ')['MALLOC_TRIM_THRESHOLD_'],"
             " dask.config.get('distributed.admin.tick.interval'),"
             " dask.config.get('distributed.worker.memory.monitor-interval'))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, env=env, timeout=60).stdout
    assert out.split() == ["False", str(2**27), "1s", "1s"]


def test_cluster_option_errors(tmp_path, capsys):
    assert main(["series", "N2", "--cluster", "local:zero", "--out", str(tmp_path / "o")]) == 2
    assert "local:N" in capsys.readouterr().err
    assert main(["series", "N2", "--cluster", "local:2", "--workers", "2", "--out", str(tmp_path / "o")]) == 2
    assert not (tmp_path / "o").exists()
    bad = tmp_path / "bad.toml"
    bad.write_text('[cluster]\nkind = "lsf"\ncores = 1\nmemory = "1GB"\nwalltime = "00:10:00"\n'
                   '[[group]]\nname = "g"\nspecies = ["N2"]\n')
    assert main(["cluster-script", str(bad)]) == 2
    assert "slurm' or 'pbs'" in capsys.readouterr().err


def test_ctrl_c_cancels_the_cluster_and_keeps_what_was_committed(tmp_path):
    args = [sys.executable, "-m", "lcao", "series", *SIX[:4], "--level", "HF/STO-3G", "--cluster", "local:2",
            "--store", "store.sqlite", "--out", "out", "-q", "--no-plots"]
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(args, cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    path = tmp_path / "store.sqlite"
    deadline = time.time() + 180
    while count_rows(str(path)) < 15 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    proc.send_signal(signal.SIGINT)
    try:
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    assert proc.returncode == 130, err[-2000:]
    assert "every finished point is saved" in err
    time.sleep(2)
    try:  # the local cluster the client started is gone with it
        os.killpg(proc.pid, 0)
        alive = True
    except ProcessLookupError:
        alive = False
    if alive:
        os.killpg(proc.pid, signal.SIGKILL)
    assert not alive, "worker processes outlived the interrupted client"
    before = stored(path, "created")
    with Store(path) as store:
        rows = run_series(members_from(SIX[:4], [parse_level("HF/STO-3G")]), store, workers=1)
    assert all(r.status == "ok" for r in rows)
    assert {k: v for k, v in stored(path, "created").items() if k in before} == before


def test_an_existing_scheduler_by_address(tmp_path):
    """--cluster tcp://HOST:PORT: a scheduler started elsewhere (here a local cluster of one worker)."""
    assert scenario("scheduler_address", tmp_path)["code"] == 0
    doc = json.loads((tmp_path / "out" / "H2_HF-STO-3G" / "curve.json").read_text())
    assert doc["execution"]["executor"] == "dask" and doc["execution"]["scheduler"].startswith("tcp://")
