"""Series members spread over worker processes on one machine, with one writer of the store.

Each worker computes whole members. It reads stored points through its own
read-only connection and sends every point it computes back over a queue; a
writer thread in the parent commits each point to the store as it arrives, so
the store has a single writer and a killed run still loses at most the points
in flight. Each worker runs PySCF and BLAS on its share of the cores (one
thread each when there are as many workers as cores: no oversubscription);
the worker count defaults to the CPU count and is capped by the number of
members. Workers are forked where that is safe (see lcao.scan.workers) and
die with the parent.
"""

from __future__ import annotations

import logging
import multiprocessing as mp
import os
import threading
from concurrent.futures import ProcessPoolExecutor

log = logging.getLogger(__name__)

_QUEUE = None
_STORE = None


def default_workers() -> int:
    return max(1, os.cpu_count() or 1)


class WorkerStore:
    """The store as a worker sees it: reads from the file, writes go to the parent's writer."""

    def __init__(self, path: str, queue, reuse: bool):
        from .store import Store

        self.ro = Store(path, read_only=True)
        self.queue = queue
        self.reuse = reuse
        self.local: dict = {}
        self.local_atoms: dict = {}

    def get_point(self, species, multiplicity, level, sweep, r_bohr):
        from .store import point_key

        key = point_key(species, multiplicity, level, sweep, r_bohr)
        if key in self.local:
            return self.local[key]
        return self.ro.get_point(species, multiplicity, level, sweep, r_bohr) if self.reuse else None

    def put_point(self, species, multiplicity, level, sweep, point) -> bool:
        from .store import point_key

        self.local[point_key(species, multiplicity, level, sweep, point.r_bohr)] = point
        self.queue.put(("point", species, multiplicity, level, sweep, point))
        return True

    def get_atom(self, symbol, charge, spin, level):
        key = (symbol, charge, spin, level.key())
        if key in self.local_atoms:
            return self.local_atoms[key]
        return self.ro.get_atom(symbol, charge, spin, level) if self.reuse else None

    def put_atom(self, state, level) -> None:
        self.local_atoms[(state.symbol, state.charge, state.spin, level.key())] = state
        self.queue.put(("atom", state, level))

    def close(self):
        self.ro.close()


def _init(queue, path, reuse, share, parent):
    global _QUEUE, _STORE
    from .scan.workers import die_with_parent

    die_with_parent(parent)
    os.environ["OMP_NUM_THREADS"] = str(share)
    from pyscf import lib

    from .threads import set_budget

    lib.num_threads(share)
    set_budget(share)
    _QUEUE = queue
    _STORE = WorkerStore(path, queue, reuse)


def _work(member):
    from .series import run_member

    return run_member(member, _STORE)


def _writer(path: str, queue, reuse: bool, errors: list):
    from .store import Store

    try:
        with Store(path, reuse=reuse) as st:
            while True:
                item = queue.get()
                if item is None:
                    return
                if item[0] == "point":
                    _, species, mult, level, sweep, point = item
                    st.put_point(species, mult, level, sweep, point)
                else:
                    _, state, level = item
                    st.put_atom(state, level)
    except Exception as exc:  # reported by run_parallel; nothing else writes the store
        errors.append(exc)


def expected_cost(member) -> float:
    """A rough relative cost of a member, to hand out the dearest first (the pool takes members in
    order, so the cheap ones fill the gaps at the end): more points, more sweeps from the atoms
    (one per charge placement) and more candidate multiplicities to probe cost more."""
    from .atoms import charge_placements

    points = len(member.grid.r_bohr) if member.grid is not None else (member.points or 40)
    probes = 1 if member.multiplicity is not None else len(member.species.multiplicity_candidates())
    return points * (1 + len(charge_placements(member.species))) * (1 + 0.3 * probes)


def run_parallel(members, store_path: str, workers: int, reuse: bool = True, on_done=None):
    """Run series members on ``workers`` processes; returns the rows in member order."""
    from .store import Store

    from .scan.workers import fork_possible

    Store(store_path, reuse=reuse).close()  # create it (schema) before the workers open it read-only
    # fork where safe (Linux, no other thread yet): the workers start with PySCF already loaded
    # instead of spending 0.5-0.8 s each importing it; the writer thread starts after the fork
    ctx = mp.get_context("fork" if fork_possible(2) else "spawn")
    queue = ctx.Queue()
    errors: list = []
    writer = threading.Thread(target=_writer, args=(store_path, queue, reuse, errors), daemon=True)
    rows = [None] * len(members)
    try:
        n = min(workers, len(members))
        share = max(1, default_workers() // n)
        with ProcessPoolExecutor(max_workers=n, mp_context=ctx, initializer=_init,
                                 initargs=(queue, store_path, reuse, share, os.getpid())) as pool:
            order = sorted(range(len(members)), key=lambda i: -expected_cost(members[i]))
            futures = {pool.submit(_work, members[i]): i for i in order}
            writer.start()  # with fork, the pool's processes exist by now (launched at the first submit)
            for fut in futures:
                i = futures[fut]
                rows[i] = fut.result()
                if on_done is not None:
                    on_done(members[i])
    finally:
        if writer.ident is None:  # failed before the pool started: still drain and close the store
            writer.start()
        queue.put(None)
        writer.join()
        queue.close()
        queue.join_thread()  # no feeder thread left behind: the next pool may fork again
    if errors:
        raise errors[0]
    return tuple(rows)
