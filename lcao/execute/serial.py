"""Every task in this process, one after another, at the moment it is submitted."""

from __future__ import annotations

import concurrent.futures

from .base import Executor


class SerialExecutor(Executor):
    """Runs each task in this process when it is submitted (the future is already done).

    ``threads`` is the thread count PySCF and the BLAS libraries use meanwhile (the caller applies
    it, see :func:`lcao.threads.limited`).
    """

    kind = "serial"

    def __init__(self, threads: int = 1):
        self.workers = 1
        self.threads = threads

    def submit(self, fn, /, *args, **kwargs) -> concurrent.futures.Future:
        fut: concurrent.futures.Future = concurrent.futures.Future()
        try:
            fut.set_result(fn(*args, **kwargs))
        except (KeyboardInterrupt, SystemExit):
            raise
        except BaseException as exc:  # noqa: BLE001 - handed to the caller through the future
            fut.set_exception(exc)
        return fut

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        return None

    def describe(self) -> dict:
        return {"executor": self.kind, "workers": 1, "threads_per_worker": self.threads}
