"""Where the work runs: the same curve in one process, on a local pool, and from inside a thread; the
store written by the client only; killed or failing workers lose nothing."""

import os
import pickle
import signal
import threading
import time

import numpy as np
import pytest

import lcao
from lcao.scan.grid import range_grid
from lcao.store import Store

from helpers import count_rows, spawn

GRID = range_grid(0.8, 3.0, 16)


def _same_curve(one, two):
    """The same protocol gives the same points to the last bit (deterministic SCF from the same starts)."""
    assert [p.energy_hartree for p in one.points] == [p.energy_hartree for p in two.points]
    assert [p.branch for p in one.points] == [p.branch for p in two.points]
    assert sorted(one.scan.sweeps) == sorted(two.scan.sweeps)
    for name in one.scan.sweeps:
        a = [p.energy_hartree if p else None for p in one.scan.sweeps[name]]
        b = [p.energy_hartree if p else None for p in two.scan.sweeps[name]]
        assert a == b, name
    assert [p.energy_hartree for p in one.refined] == [p.energy_hartree for p in two.refined]
    assert one.fit.local.re == two.fit.local.re
    assert one.computed == two.computed  # a seed computed by both halves counts once
    assert len(one.along) == len(two.along) == len(one.points)
    for a, b in zip(one.along, two.along):
        assert (a is None) == (b is None)
        if a is not None:
            assert a["r_angstrom"] == b["r_angstrom"] and a["bond_orders"] == b["bond_orders"]


@pytest.mark.parametrize("species,multiplicity", [("N2", 1), ("NO", 2)])
def test_local_processes_give_the_serial_curve(species, multiplicity):
    one = lcao.curve(species, "HF/STO-3G", GRID, multiplicity=multiplicity, workers=1)
    two = lcao.curve(species, "HF/STO-3G", GRID, multiplicity=multiplicity, workers=2)
    assert one.execution["executor"] == "serial" and one.execution["processes_used"] == 1
    assert two.execution["executor"] == "local processes" and two.execution["processes_used"] == 2
    _same_curve(one, two)


def test_a_curve_from_inside_a_thread_uses_two_processes_and_gives_the_serial_numbers():
    # as a notebook kernel or a cluster worker runs it: another thread is alive, so the pool cannot be
    # forked from this process; its workers come from a fork server and both compute
    serial = lcao.curve("N2", "HF/STO-3G", GRID, multiplicity=1, workers=1)
    got = {}

    def job():
        got["curve"] = lcao.curve("N2", "HF/STO-3G", GRID, multiplicity=1, workers=2)

    t = threading.Thread(target=job)
    t.start()
    t.join(timeout=600)
    threaded = got["curve"]
    assert threaded.execution["start_method"] in ("forkserver", "spawn")
    assert threaded.execution["processes_used"] == 2
    _same_curve(serial, threaded)


def test_tasks_and_results_are_plain_values():
    # what crosses a process boundary pickles, and holds no PySCF object or store connection
    from lcao.execute.worker import run_task
    from lcao.levels import parse_level
    from lcao.methods import method_for
    from lcao.methods.base import Target
    from lcao.scan.tasks import ChainTask

    level = parse_level("HF/STO-3G")
    task = ChainTask(method_for(level), Target(("H", "H"), 0, 1, level), "restricted/from-equilibrium", "restricted",
                     (1.3, 1.4, 1.5), check_instability=True)
    again = pickle.loads(pickle.dumps(task))
    assert again.key() == task.key() and again.r_bohr == task.r_bohr
    done = run_task(again)
    back = pickle.loads(pickle.dumps(done))
    assert [p.energy for p in back.value.points] == [p.energy for p in done.value.points]
    names = {type(v).__module__.split(".")[0] for p in back.value.points for v in vars(p).values()}
    assert "pyscf" not in names and "sqlite3" not in names


def test_only_the_client_writes_the_store(tmp_path, monkeypatch):
    # a worker that tried to write would fail: the store is opened in the client only
    from lcao.store import Store as S

    client = os.getpid()
    real = S.put_point

    def guarded(self, *args, **kwargs):
        assert os.getpid() == client, "a worker wrote the store"
        return real(self, *args, **kwargs)

    monkeypatch.setattr(S, "put_point", guarded)
    path = tmp_path / "s.sqlite"
    with Store(path) as st:
        res = lcao.curve("NO", "HF/STO-3G", GRID, multiplicity=2, store=st, workers=2)
    # every point of every sweep, and the refinement, is in the file, once
    n_sweep_points = sum(1 for pts in res.scan.sweeps.values() for p in pts if p is not None)
    assert count_rows(str(path)) == n_sweep_points + len(res.refined)
    with Store(path) as st:
        again = lcao.curve("NO", "HF/STO-3G", GRID, multiplicity=2, store=st, workers=2)
    assert again.computed == 0 and again.reused == res.computed
    assert [p.energy_hartree for p in again.points] == [p.energy_hartree for p in res.points]


def test_a_worker_that_dies_loses_nothing(monkeypatch, caplog):
    # the first chain task kills its worker process: the run goes on in this process, same curve
    from lcao.scan import tasks

    one = lcao.curve("NO", "HF/STO-3G", GRID, multiplicity=2, workers=1)
    client = os.getpid()
    real = tasks.ChainTask.run

    def dying(self):
        if os.getpid() != client:
            os._exit(3)
        return real(self)

    monkeypatch.setattr(tasks.ChainTask, "run", dying)
    with caplog.at_level("WARNING", logger="lcao.scan.session"):
        two = lcao.curve("NO", "HF/STO-3G", GRID, multiplicity=2, workers=2)
    assert "worker process ended unexpectedly" in caplog.text
    assert [p.energy_hartree for p in one.points] == [p.energy_hartree for p in two.points]
    assert one.computed == two.computed


def test_sigkilled_run_leaves_no_worker_behind(tmp_path):
    store = str(tmp_path / "k.sqlite")
    args = ["curve", "NO", "--level", "HF/6-31G", "--from", "0.9", "--to", "3.5", "--points", "30", "-q", "--no-plots",
            "--store", store, "--out", str(tmp_path / "o"), "--workers", "2"]
    proc = spawn(args)
    deadline = time.time() + 120
    while count_rows(store) < 5 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before it could be killed"
    children = _children(proc.pid)
    assert children, "the run had no worker processes"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    deadline = time.time() + 10
    while any(_alive(c) for c in children) and time.time() < deadline:
        time.sleep(0.05)
    assert not any(_alive(c) for c in children)


def _children(pid):
    out = []
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as fh:
                    if int(fh.read().rsplit(")", 1)[1].split()[1]) == pid:
                        out.append(int(d))
            except (OSError, IndexError, ValueError):
                continue
    return out


def _alive(pid):
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


@pytest.mark.parametrize("species,multiplicity", [("N2", 1), ("NO", 2)])
def test_analysis_from_kept_orbitals_equals_the_rebuilt_one(species, multiplicity):
    # the orbitals kept from the SCF (F = S C e C^T S) and those rebuilt from the stored density by one
    # Fock diagonalisation (a rerun from the store) give the same analysis along the curve
    with _tmp_store() as st:
        res = lcao.curve(species, "HF/STO-3G", GRID, multiplicity=multiplicity, store=st, workers=1)
        rebuilt = lcao.curve(species, "HF/STO-3G", GRID, multiplicity=multiplicity, store=st, workers=1)
    assert rebuilt.computed == 0 and len(rebuilt.along) == len(res.along)
    for a, b in zip(res.along, rebuilt.along):
        assert (a is None) == (b is None)
        if a is None:
            continue
        for k, v in a["bond_orders"].items():
            if isinstance(v, float):
                assert v == pytest.approx(b["bond_orders"][k], abs=1e-4), k  # both within the SCF tolerance
            else:
                assert v == b["bond_orders"][k], k
        assert a["unpaired_electrons"] == b["unpaired_electrons"]
        assert a["s2"] == pytest.approx(b["s2"], abs=1e-4)
        for side in ("homo", "lumo"):
            assert a["frontier"][side]["label"] == b["frontier"][side]["label"]
            assert a["frontier"][side]["energy_hartree"] == pytest.approx(b["frontier"][side]["energy_hartree"], abs=1e-5)


def _tmp_store():
    from lcao.store import MemoryStore

    return MemoryStore()


def test_workers_1_on_the_command_line_computes_in_one_process(tmp_path, monkeypatch):
    from lcao import execute
    from lcao.cli import main

    def no_pool(*a, **k):
        raise AssertionError("a worker pool although --workers 1")

    monkeypatch.setattr(execute, "LocalProcessExecutor", no_pool)
    code = main(["curve", "NO", "--level", "HF/STO-3G", "--from", "0.9", "--to", "3.0", "--points", "16", "--workers", "1",
                 "-q", "--no-plots", "--store", str(tmp_path / "s.sqlite"), "--out", str(tmp_path / "o")])
    assert code == 0


def test_warm_start_extrapolation_is_exact_for_low_order_polynomials():
    # analytic: Lagrange extrapolation through m points reproduces polynomials of degree < m
    from lcao.methods.base import lagrange_extrapolate

    a, b, c = np.arange(4.0).reshape(2, 2), np.eye(2), np.ones((2, 2))

    def dm(r):
        return {"dm": a + b * r + c * r * r}

    rs = [1.0, 1.3, 1.5]
    got = lagrange_extrapolate([(r, dm(r)) for r in rs], 1.8)
    assert np.max(np.abs(got["dm"] - dm(1.8)["dm"])) < 1e-12
    lin = lagrange_extrapolate([(r, {"dm": a + b * r}) for r in rs[:2]], 1.8)
    assert np.max(np.abs(lin["dm"] - (a + b * 1.8))) < 1e-12
    assert np.array_equal(lagrange_extrapolate([(1.0, {"dm": a})], 2.0)["dm"], a)
    # a repeated distance gives no extrapolation, only the last warm start
    assert np.array_equal(lagrange_extrapolate([(1.0, {"dm": a}), (1.0, {"dm": b})], 2.0)["dm"], b)


def test_a_correlated_curve_is_the_same_on_one_worker_and_two():
    # on two workers the level's energies start during the reference sweep and the refinement starts on
    # the well alone; what the curve keeps must not depend on that (same starts, same numbers, to the bit)
    grid = range_grid(0.9, 2.6, 14)
    one = lcao.curve("N2", "MP2/cc-pVDZ", grid, multiplicity=1, workers=1, analyse_points=False)
    two = lcao.curve("N2", "MP2/cc-pVDZ", grid, multiplicity=1, workers=2, analyse_points=False)
    assert [p.energy_hartree for p in one.points] == [p.energy_hartree for p in two.points]
    assert [p.branch for p in one.points] == [p.branch for p in two.points]
    assert [(p.r_bohr, p.energy_hartree) for p in one.refined] == [(p.r_bohr, p.energy_hartree) for p in two.refined]
    assert len(one.refined) >= 9 and one.fit.local.re == two.fit.local.re


def test_the_priority_gate_lets_in_the_urgent_first():
    import asyncio

    from lcao.scan.session import PriorityGate

    async def scenario():
        gate = PriorityGate(1)
        order = []

        async def holder(name, priority):
            await gate.acquire(priority)
            order.append(name)
            await asyncio.sleep(0)
            gate.release()

        await gate.acquire(1)  # the one slot taken: everyone else waits
        waiting = [asyncio.ensure_future(holder(n, p)) for n, p in (("grid a", 1), ("grid b", 1), ("refine", 0))]
        await asyncio.sleep(0)
        gate.release()
        await asyncio.gather(*waiting)
        return order, gate.free

    order, free = asyncio.run(scenario())
    assert order == ["refine", "grid a", "grid b"] and free == 1
