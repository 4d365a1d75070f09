"""Independent sweeps of one curve in forked processes: the same points as one process, the
points of a child in the file store, and no child left behind by a killed run."""

import os

import numpy as np
import signal
import time

import pytest

import lcao
from lcao import threads
from lcao.scan import workers
from lcao.scan.grid import range_grid
from lcao.store import Store

from helpers import count_rows, spawn


def _curve(species, level, budget, monkeypatch, store=None, multiplicity=None):
    monkeypatch.setattr(threads, "_BUDGET", budget)
    return lcao.curve(species, level, range_grid(0.8, 3.0, 16), multiplicity=multiplicity, store=store)


@pytest.mark.parametrize("species,multiplicity", [("N2", 1), ("NO", 2)])
def test_forked_sweeps_give_the_same_curve(species, multiplicity, monkeypatch):
    forks = []
    real = workers.run_groups
    monkeypatch.setattr(workers, "run_groups", lambda groups, fn, *a: forks.append(len(groups)) or real(groups, fn, *a))
    one = _curve(species, "HF/STO-3G", 1, monkeypatch, multiplicity=multiplicity)
    assert forks == []
    two = _curve(species, "HF/STO-3G", 2, monkeypatch, multiplicity=multiplicity)
    assert forks and all(n == 2 for n in forks)  # the sweeps did run in a child
    # the same protocol, so the same points to the last bit (deterministic SCF from the same starts)
    assert [p.energy_hartree for p in one.points] == [p.energy_hartree for p in two.points]
    assert [p.branch for p in one.points] == [p.branch for p in two.points]
    assert sorted(one.scan.sweeps) == sorted(two.scan.sweeps)
    for name in one.scan.sweeps:
        a = [p.energy_hartree if p else None for p in one.scan.sweeps[name]]
        b = [p.energy_hartree if p else None for p in two.scan.sweeps[name]]
        assert a == b, name
    assert one.fit.as_dict()["re_angstrom"] == two.fit.as_dict()["re_angstrom"]
    assert one.computed == two.computed  # a seed computed on both sides counts once
    # the analysis along the curve, run beside the refinement in both processes, in point order
    assert len(one.along) == len(two.along) == len(one.points)
    for a, b in zip(one.along, two.along):
        assert (a is None) == (b is None)
        if a is not None:
            assert a["r_angstrom"] == b["r_angstrom"] and a["bond_orders"] == b["bond_orders"]
    without = lcao.curve(species, "HF/STO-3G", range_grid(0.8, 3.0, 16), multiplicity=multiplicity, refine=False)
    assert [a and a["bond_orders"] for a in without.along] == [a and a["bond_orders"] for a in two.along]


def test_forked_sweeps_hand_their_integrals_back(monkeypatch):
    # the inward half of N2's restricted sweep runs in a child; the parent keeps the integral sets
    # of those distances afterwards, equal to PySCF's (the reference: a fresh gto.M build)
    from pyscf import gto

    from lcao.levels import parse_level
    from lcao.pipeline import clear_caches
    from lcao.scan.scf import INTEGRALS, build_molecule

    clear_caches()
    res = _curve("N2", "HF/STO-3G", 2, monkeypatch, multiplicity=1)
    level = parse_level("HF/STO-3G")
    mols = [build_molecule(("N", "N"), p.r_bohr, level, 0, 0) for p in res.points]
    kept = INTEGRALS.kept_keys()
    assert all(INTEGRALS.key(m) in kept for m in mols)
    first = mols[0]  # computed in the child only: inside the instability, on the inward half
    ref = gto.M(atom=f"N 0 0 0; N 0 0 {res.points[0].r_bohr}", unit="Bohr", basis="STO-3G", verbose=0)
    assert np.max(np.abs(INTEGRALS.get(first) - ref.intor("int2e", aosym="s8"))) < 1e-12
    clear_caches()


def test_side_work_reaches_the_parent_while_it_runs_its_own_group():
    # a child done with its group sends side work (here forever); the parent takes it between its
    # own steps, gets the child's result at the join, and the child is stopped afterwards
    def fn(group, in_child):
        if in_child:
            def forever():
                k = 0
                while True:
                    workers.send_side_work(("payload", k, np.full(20000, k)))  # 160 KB: over a default pipe
                    k += 1
            workers.after_result(forever)
            return ("child result", group)
        got = []
        deadline = time.time() + 60
        while len(got) < 5 and time.time() < deadline:
            got += workers.take_side_work()
            time.sleep(0.01)
        return got

    mine, theirs = workers.run_groups([["here"], ["there"]], fn)
    assert theirs == ("child result", ["there"])
    assert [x[1] for x in mine[:5]] == [0, 1, 2, 3, 4] and all((x[2] == x[1]).all() for x in mine)
    assert workers.take_side_work() == []  # nothing is polled outside run_groups
    deadline = time.time() + 10
    while workers._UNREAPED and time.time() < deadline:
        workers._reap()
        time.sleep(0.05)
    assert workers._UNREAPED == []  # stopped and collected


def test_side_work_is_not_done_outside_a_forked_child():
    # a failed child's part computed again here must not register side work in this process
    workers.after_result(lambda: (_ for _ in ()).throw(AssertionError("side work ran here")))
    assert workers._AFTER == []


def test_child_points_reach_the_file_store(tmp_path, monkeypatch):
    path = tmp_path / "s.sqlite"
    with Store(path) as st:
        res = _curve("NO", "HF/STO-3G", 2, monkeypatch, store=st, multiplicity=2)
    # every point of every sweep is in the file, once
    n_sweep_points = sum(1 for pts in res.scan.sweeps.values() for p in pts if p is not None)
    assert count_rows(str(path)) == n_sweep_points + len(res.refined)
    with Store(path) as st:
        again = _curve("NO", "HF/STO-3G", 2, monkeypatch, store=st, multiplicity=2)
    assert again.computed == 0
    assert [p.energy_hartree for p in again.points] == [p.energy_hartree for p in res.points]
    with Store(path) as st:
        again_here = _curve("NO", "HF/STO-3G", 1, monkeypatch, store=st, multiplicity=2)
    assert again.reused == again_here.reused  # a seed read on both sides counts once


def test_no_fork_without_two_cores_or_with_threads():
    import threading

    assert not workers.fork_possible(1)
    assert workers.fork_possible(2)  # the test process has no other thread
    ev = threading.Event()
    t = threading.Thread(target=ev.wait)
    t.start()
    try:
        assert not workers.fork_possible(2)  # a child would inherit locks held by other threads
    finally:
        ev.set()
        t.join()


def test_balance_keeps_the_first_task_here_and_evens_the_load():
    # analytic: sizes 10 (first), 30, 20, 5 over two groups -> [10, 20, 5] and [30]
    groups = workers.balance(["a", "b", "c", "d"], [10, 30, 20, 5], 2)
    assert groups[0][0] == "a"
    assert sorted(map(sorted, groups)) == [["a", "c", "d"], ["b"]]


def test_sigkilled_run_leaves_no_sweep_process_writing(tmp_path):
    store = str(tmp_path / "k.sqlite")
    args = ["curve", "NO", "--level", "HF/6-31G", "--from", "0.9", "--to", "3.5", "--points", "30", "-q", "--no-plots",
            "--store", store, "--out", str(tmp_path / "o")]
    proc = spawn(args)
    deadline = time.time() + 120
    while count_rows(store) < 10 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before it could be killed"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    time.sleep(0.5)
    n = count_rows(store)
    time.sleep(1.5)
    assert count_rows(store) == n  # nothing writes after the run was killed


@pytest.mark.parametrize("species,multiplicity", [("N2", 1), ("NO", 2)])
def test_analysis_from_kept_orbitals_equals_the_rebuilt_one(species, multiplicity, monkeypatch):
    # the orbitals kept from the SCF (F = S C e C^T S) and those rebuilt from the stored density by one
    # Fock diagonalisation must give the same analysis along the curve
    from lcao.pipeline import point_summaries
    from lcao.scan.scf import ORBITALS
    from lcao.store import MemoryStore

    st = MemoryStore()
    res = _curve(species, "HF/STO-3G", 1, monkeypatch, store=st, multiplicity=multiplicity)
    ORBITALS.clear()
    rebuilt = point_summaries(res.species, res.multiplicity, res.level, res.scan, st)
    assert len(rebuilt) == len(res.along)
    for a, b in zip(res.along, rebuilt):
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


def test_workers_1_on_the_command_line_computes_in_one_process(tmp_path, monkeypatch):
    from lcao.cli import main

    def no_fork(groups, fn, *a):
        raise AssertionError("forked although --workers 1")

    monkeypatch.setattr(workers, "run_groups", no_fork)
    monkeypatch.setattr(threads, "_BUDGET", None)
    code = main(["curve", "NO", "--level", "HF/STO-3G", "--from", "0.9", "--to", "3.0", "--points", "16", "--workers", "1",
                 "-q", "--no-plots",
                 "--store", str(tmp_path / "s.sqlite"), "--out", str(tmp_path / "o")])
    assert code == 0


@pytest.mark.parametrize("how", ["raises", "dies"])
def test_a_failing_sweep_process_loses_nothing(how, monkeypatch, caplog):
    # a child that raises, or dies without a word, has its part computed again here: same curve
    from lcao.scan import protocol

    parent = os.getpid()
    real = protocol._Runner._run_group

    def flaky(self, group, in_child, r_all, out):
        if in_child and os.getpid() != parent:
            if how == "raises":
                raise RuntimeError("simulated failure")
            os._exit(3)
        return real(self, group, in_child, r_all, out)

    one = _curve("NO", "HF/STO-3G", 1, monkeypatch, multiplicity=2)
    monkeypatch.setattr(protocol._Runner, "_run_group", flaky)
    with caplog.at_level("WARNING", logger="lcao.scan.workers"):
        two = _curve("NO", "HF/STO-3G", 2, monkeypatch, multiplicity=2)
    assert "computing its part here" in caplog.text
    assert [p.energy_hartree for p in one.points] == [p.energy_hartree for p in two.points]
    assert one.computed == two.computed


def test_starting_density_extrapolation_is_exact_for_low_order_polynomials():
    # analytic: Lagrange extrapolation through m points reproduces polynomials of degree < m
    from lcao.scan.protocol import extrapolated_density

    a, b, c = np.arange(4.0).reshape(2, 2), np.eye(2), np.ones((2, 2))

    def dm(r):
        return a + b * r + c * r * r

    rs = [1.0, 1.3, 1.5]
    got = extrapolated_density([(r, dm(r)) for r in rs], 1.8)
    assert np.max(np.abs(got - dm(1.8))) < 1e-12
    lin = extrapolated_density([(r, a + b * r) for r in rs[:2]], 1.8)
    assert np.max(np.abs(lin - (a + b * 1.8))) < 1e-12
    assert extrapolated_density([(1.0, a)], 2.0) is not None
    assert np.array_equal(extrapolated_density([(1.0, a)], 2.0), a)
    # a repeated distance gives no extrapolation, only the last density
    assert np.array_equal(extrapolated_density([(1.0, a), (1.0, b)], 2.0), b)
