"""Executors: where the tasks of a run go (see :mod:`lcao.execute.base`).

:func:`make_executor` picks one for a run from the worker count and the basis size: one process
(serial) for one worker or for large basis sets, whose integrals would not fit twice and which use
every core as threads instead (:mod:`lcao.threads`); a local process pool otherwise.
"""

from __future__ import annotations

from .base import Executor
from .local import LocalProcessExecutor, fork_safe
from .serial import SerialExecutor

__all__ = ["Executor", "LocalProcessExecutor", "SerialExecutor", "fork_safe", "make_executor"]


def make_executor(workers: int | None = None, basis_size: int = 0) -> Executor:
    """The executor for a run.

    Args:
        workers: processes to use (None: the cores of this machine, :func:`lcao.threads.cores`).
        basis_size: the largest molecule's basis functions: from
            :data:`lcao.threads.THREADED_FROM_NAO` the run stays in this process on every core.
    """
    from ..threads import THREADED_FROM_NAO, cores

    n = cores() if workers is None else int(workers)
    if basis_size >= THREADED_FROM_NAO:
        return SerialExecutor(threads=n)
    if n <= 1:
        return SerialExecutor(threads=1)
    return LocalProcessExecutor(n, threads=1)
