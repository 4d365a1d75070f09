"""What a worker process runs: its start-up (threads, signals) and the task entry point."""

from __future__ import annotations

import os
import signal
import time
from dataclasses import dataclass


@dataclass(frozen=True)
class Done:
    """A task's result with where and how long it ran.

    Attributes:
        value: what ``task.run()`` returned (a plain value).
        pid: the process that ran it; seconds: its wall time.
    """

    value: object
    pid: int
    seconds: float


def run_task(task) -> Done:
    """Run one task (an object with ``run()``, see :mod:`lcao.scan.tasks`) and time it."""
    t0 = time.perf_counter()
    value = task.run()
    return Done(value, os.getpid(), time.perf_counter() - t0)


def die_with_parent(parent: int | None) -> None:
    """Ask Linux to kill this process when its parent dies (a killed run leaves no orphans); ``parent``
    is the pid this process was forked from (None when a fork server started it, which itself ends
    with the client)."""
    import ctypes

    try:
        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):  # pragma: no cover - not Linux/glibc
        pass
    if parent is not None and os.getppid() != parent:  # the parent died before the request took effect
        os._exit(1)


def initialise(threads: int, parent: int | None, shared: str | None = None) -> None:
    """Start-up of a worker process: ``threads`` threads for PySCF and the BLAS libraries, Ctrl-C left
    to the client (which stops the workers), death with the client, and integrals shared with the
    pool's other workers through the folder ``shared`` (:meth:`lcao.methods.cache.IntegralCache.share`)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    die_with_parent(parent)
    from ..methods.cache import caches

    caches().integrals.share(shared)
    os.environ["OMP_NUM_THREADS"] = str(threads)
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    lib.num_threads(threads)
    threadpool_limits(threads)
