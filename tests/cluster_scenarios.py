"""Scenarios of tests/test_cluster.py that start a Dask cluster, run in a process of their own
(``python tests/cluster_scenarios.py NAME TMPDIR``; the result as JSON on the last line of stdout).

A Dask client leaves threads behind in its process (its event loop); in the pytest process they would
make later tests' worker pools start by fork server instead of fork, so those tests could no longer patch
their workers. Keeping every cluster in a child process keeps the test process as other tests expect it.
"""

from __future__ import annotations

import json
import os
import signal
import sys
import threading
import time

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

SIX = ["N2", "CO", "NO", "O2", "CN", "BF"]


def _members(species, level):
    from lcao.levels import parse_level
    from lcao.series import members_from

    return members_from(species, [parse_level(level)])


def _computed(rows) -> int:
    return sum(r.computed for r in rows)


def same_numbers(tmp):
    from lcao.execute.dask import DaskExecutor
    from lcao.series import run_series
    from lcao.store import Store

    members = _members(SIX, "HF/6-31G")
    with Store(os.path.join(tmp, "serial.sqlite")) as store:
        serial = run_series(members, store, workers=1)
    with Store(os.path.join(tmp, "dask.sqlite")) as store, DaskExecutor("local:2") as ex:
        workers = ex.workers
        on_cluster = run_series(members, store, executor=ex)

    def re(r):
        return None if r.fit is None or r.fit.local is None else r.fit.local.re

    return {"workers": workers, "rows": [[a.species, a.status, b.status, re(a), re(b)] for a, b in zip(serial, on_cluster)]}


def dead_worker(tmp):
    from helpers import count_rows
    from lcao.execute.dask import DaskExecutor
    from lcao.series import run_series
    from lcao.store import Store

    members = _members(SIX[:4], "HF/STO-3G")
    path = os.path.join(tmp, "store.sqlite")
    killed = []
    with Store(path) as store, DaskExecutor("local:2") as ex:
        victim = ex.worker_pids()[0]

        def kill_when_started():
            deadline = time.time() + 120
            while count_rows(path) < 15 and time.time() < deadline:
                time.sleep(0.05)
            os.kill(victim, signal.SIGKILL)
            killed.append(victim)

        t = threading.Thread(target=kill_when_started, daemon=True)
        t.start()
        rows = run_series(members, store, executor=ex)
        t.join(timeout=5)
    with Store(path) as store:
        again = run_series(members, store, workers=1)
    return {"killed": killed == [victim], "statuses": [[r.species, r.status, r.reason] for r in rows],
            "rerun_computed": _computed(again)}


def scheduler_address(tmp):
    from distributed import LocalCluster

    from lcao.cli import main

    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        code = main(["series", "H2", "--level", "HF/STO-3G", "--points", "12", "--cluster", cluster.scheduler_address,
                     "--store", os.path.join(tmp, "s.sqlite"), "--out", os.path.join(tmp, "out"), "-q", "--no-plots"])
    return {"code": code}


if __name__ == "__main__":
    name, tmp = sys.argv[1], sys.argv[2]
    result = {"same_numbers": same_numbers, "dead_worker": dead_worker, "scheduler_address": scheduler_address}[name](tmp)
    print(json.dumps(result))
