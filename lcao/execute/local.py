"""A pool of worker processes on this machine (:class:`concurrent.futures.ProcessPoolExecutor`).

Workers are forked from this process where that is safe (Linux, no other thread alive: they start
with PySCF already loaded), and otherwise started by a fork server that has PySCF loaded (a notebook
kernel or a thread of a cluster worker: the first pool of the session pays about a second for it).
Results are the same either way. Each worker runs PySCF and BLAS on ``threads`` threads, ignores
Ctrl-C (the client stops the pool) and dies with the client. The workers of one pool share the
two-electron integrals they compute through a folder of the pool's own (on /dev/shm where it
exists), removed when the pool shuts down.
"""

from __future__ import annotations

import gc
import importlib
import multiprocessing as mp
import os
import shutil
import sys
import tempfile
import threading
from concurrent.futures import ProcessPoolExecutor

from .base import Executor

#: modules the workers need, imported once before they start (by this process before a fork, or by
#: the fork server), so that no worker spends its first task importing them (about 0.1 s each time)
PRELOAD = ["lcao.execute.worker", "lcao.scan.tasks", "lcao.methods.hf", "lcao.methods.scf", "lcao.methods.stability",
           "lcao.analysis.orbitals", "pyscf.gto", "pyscf.scf", "pyscf.scf.stability", "pyscf.soscf.newton_ah",
           "pyscf.scf.atom_hf", "pyscf.ao2mo", "scipy.linalg"]


def _memory_folder() -> str | None:
    """A memory file system for the pool's shared integrals where the machine has one (Linux's /dev/shm)."""
    return "/dev/shm" if os.path.isdir("/dev/shm") and os.access("/dev/shm", os.W_OK) else None


def fork_safe() -> bool:
    """Whether a fork now gives a sound child: Linux, and no other thread alive in this process."""
    return (sys.platform.startswith("linux") and "fork" in mp.get_all_start_methods()
            and threading.active_count() == 1 and not mp.current_process().daemon)


def start_method() -> str:
    """'fork' where :func:`fork_safe`, else 'forkserver' where the platform has it, else 'spawn'."""
    if fork_safe():
        return "fork"
    return "forkserver" if "forkserver" in mp.get_all_start_methods() else "spawn"


class LocalProcessExecutor(Executor):
    """``workers`` worker processes, each on ``threads`` threads (see the module docstring)."""

    kind = "local processes"

    def __init__(self, workers: int, threads: int = 1):
        from .worker import initialise

        self.workers = int(workers)
        self.threads = int(threads)
        self.start_method = start_method()
        ctx = mp.get_context(self.start_method)
        if self.start_method == "forkserver":
            ctx.set_forkserver_preload(PRELOAD)
        elif self.start_method == "fork":
            for name in PRELOAD:
                importlib.import_module(name)
        self._before = set(mp.active_children())
        self.shared = tempfile.mkdtemp(prefix="lcao-pool-", dir=_memory_folder())
        self._pool = ProcessPoolExecutor(self.workers, mp_context=ctx, initializer=initialise,
                                         initargs=(self.threads, os.getpid() if self.start_method == "fork" else None,
                                                   self.shared))
        if self.start_method == "fork":
            # start the workers now, with this process's objects moved out of the collector's sight: a
            # collection in a worker would otherwise touch, and so copy, every page of them (the first
            # tasks of a fresh worker took up to 0.1 s longer)
            gc.freeze()
            try:
                self._pool.submit(int).result()
            finally:
                gc.unfreeze()

    def submit(self, fn, /, *args, **kwargs):
        return self._pool.submit(fn, *args, **kwargs)

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        self._pool.shutdown(wait=wait, cancel_futures=cancel_futures)
        shutil.rmtree(self.shared, ignore_errors=True)

    def terminate(self) -> None:
        """Cancel what is queued and stop the worker processes now (an interrupt, a failed run)."""
        self._pool.shutdown(wait=False, cancel_futures=True)
        mine = [p for p in mp.active_children() if p not in self._before]
        for p in mine:
            p.terminate()
        for p in mine:
            p.join(timeout=5)
        shutil.rmtree(self.shared, ignore_errors=True)

    def describe(self) -> dict:
        return {"executor": self.kind, "workers": self.workers, "threads_per_worker": self.threads,
                "start_method": self.start_method}
