"""The executor interface: where tasks run.

An executor is a :class:`concurrent.futures.Executor` (``submit(fn, *args) -> Future``) that also
says how many tasks it runs at once and can be stopped at once. Tasks and their results are plain
values (frozen dataclasses of numbers and arrays, see :mod:`lcao.scan.tasks`); nothing that holds a
connection or a PySCF object crosses between the client and the workers, and only the client
writes the results store. Implementations:

* :class:`lcao.execute.serial.SerialExecutor`: in this process, one task after another;
* :class:`lcao.execute.local.LocalProcessExecutor`: a pool of worker processes on this machine.
"""

from __future__ import annotations

import concurrent.futures


class Executor(concurrent.futures.Executor):
    """Base class of lcao's executors (see the module docstring)."""

    #: tasks run at once
    workers: int = 1
    #: a short name for outputs and logs
    kind: str = "executor"
    #: a series sends each cheap member as one task (its whole curve in one worker) rather than its sweeps
    #: and points one by one: for executors whose round trip costs milliseconds (a cluster), not a local pool
    whole_members: bool = False

    def describe(self) -> dict:
        """What ran the work, for the provenance of outputs."""
        return {"executor": self.kind, "workers": self.workers}

    def terminate(self) -> None:
        """Stop at once: queued tasks are cancelled and running ones abandoned (an interrupt)."""
        self.shutdown(wait=False, cancel_futures=True)

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.terminate()
        else:
            self.shutdown(wait=True)
        return False
