"""A Dask cluster as the executor: a local cluster on this machine, an existing scheduler, or batch jobs
through dask-jobqueue (SLURM, PBS). Optional: ``pip install lcao[cluster]``.

Tasks are the same plain values as everywhere (:mod:`lcao.scan.tasks`); each runs in a worker through
:func:`run_in_worker`, which sets PySCF's and the BLAS libraries' threads and keeps PySCF's memory under the
worker's limit before the task starts. Results come back to the client, which alone writes the store, so
the workers need no shared disk (the workers of a local cluster share two-electron integrals through a
folder of the executor's own in memory, as a local pool's do, since they share this machine). A worker that
dies has its task re-run elsewhere by the scheduler; a task that fails for a reason of its own raises here
and becomes a failed member in a series. A series sends a cheap member as one task
(:attr:`DaskExecutor.whole_members`, :mod:`lcao.dispatch`).
"""

from __future__ import annotations

import gc
import logging
import shutil
import tempfile

from ..errors import InputError
from .base import Executor

log = logging.getLogger(__name__)

#: how often a task may be retried after a worker died under it (the scheduler counts deaths itself too)
RETRIES = 2
JOBQUEUE_KINDS = ("slurm", "pbs")


def _imports():
    try:
        import dask  # noqa: F401
        import distributed
    except ImportError:
        raise InputError("a Dask cluster needs the cluster extra: pip install 'lcao[cluster]'") from None
    return distributed


_FROZEN = False

#: settings for the workers of a local cluster: no statistical profiler (it samples every task's stack 100
#: times a second and took 3 % off the computation), and glibc's own, adaptive handling of large allocations
#: instead of the trimming threshold of 64 KiB that Dask's nanny sets by default, under which integral arrays
#: are handed back to the system after each use and faulted in again (tasks ran 15 % slower than in a local
#: pool; now the same). The memory a worker holds between tasks is bounded by lcao's caches. The event
#: loops of the scheduler, the nannies and the workers wake less often (Dask's documented settings: the
#: health check of the loop every second instead of every 20 ms, which only warns of a blocked loop; the
#: statistics for the dashboard every 5 s instead of 0.5 s; the check of a worker's memory every second
#: instead of 0.1 s): each wake-up takes the interpreter lock from a running task, and on a local cluster
#: the scheduler and the nannies share the cores with the workers (a survey's client used half the CPU time,
#: and tasks ran 3-5 % faster).
QUIET_LOOPS = {"distributed.admin.tick.interval": "1s", "distributed.admin.system-monitor.interval": "5s",
               "distributed.worker.memory.monitor-interval": "1s"}
WORKER_CONFIG = {**QUIET_LOOPS, "distributed.worker.profile.enabled": False,
                 "distributed.nanny.pre-spawn-environ": {"OMP_NUM_THREADS": 1, "MKL_NUM_THREADS": 1,
                                                         "OPENBLAS_NUM_THREADS": 1}}

#: the same for the workers of a batch job, which read it from DASK_* variables that are merged into Dask's
#: defaults (so the nanny's trimming threshold cannot be removed, only raised, with the mmap threshold: measured
#: 10 % slower than glibc's adaptive handling, 8 % faster than Dask's default)
BATCH_WORKER_CONFIG = {**QUIET_LOOPS, "distributed.worker.profile.enabled": False,
                       "distributed.nanny.pre-spawn-environ": {"MALLOC_TRIM_THRESHOLD_": 2**27,
                                                               "MALLOC_MMAP_THRESHOLD_": 2**26}}


def run_in_worker(fn, threads: int, shared: str | None, *args):
    """Run a task in a Dask worker: threads and PySCF's memory limit first (cheap, and right for every task
    wherever the scheduler sends it), and on a local cluster the integrals shared with the other workers
    through the folder ``shared`` (as in :mod:`lcao.execute.local`)."""
    import os

    from pyscf import lib
    from threadpoolctl import threadpool_limits

    global _FROZEN
    if not _FROZEN:
        # the worker's own objects (Dask, Tornado, the modules) out of the collector's sight, as a forked local
        # pool's are: otherwise every collection during a task walks them (tasks ran 17 % slower)
        gc.freeze()
        _FROZEN = True
    if shared is not None:
        from ..methods.cache import caches

        caches().integrals.share(shared if os.path.isdir(shared) else None)

    os.environ["OMP_NUM_THREADS"] = str(threads)
    lib.num_threads(threads)
    try:
        from distributed import get_worker

        limit = get_worker().memory_manager.memory_limit
        if limit:
            lib.param.MAX_MEMORY = int(0.7 * limit / 1e6 / max(threads, 1)) * max(threads, 1)
    except (ImportError, ValueError, AttributeError):
        pass
    with threadpool_limits(threads):
        return fn(*args)


def parse_cluster(text: str) -> tuple[str, object]:
    """``local:N`` -> ('local', N); ``tcp://HOST:PORT`` -> ('address', text); anything else: InputError."""
    if text.startswith("local:"):
        try:
            n = int(text.split(":", 1)[1])
        except ValueError:
            n = 0
        if n < 1:
            raise InputError(f"--cluster local:N needs a whole number of workers of at least 1, got {text!r}")
        return "local", n
    if text.startswith(("tcp://", "tls://")) and ":" in text.split("://", 1)[1]:
        return "address", text
    raise InputError(f"--cluster takes local:N or tcp://HOST:PORT, got {text!r}")


def jobqueue_cluster(settings: dict):
    """A dask-jobqueue cluster (not started on a scheduler until scaled) from a study's [cluster] table."""
    kind = settings["kind"]
    try:
        import dask_jobqueue
    except ImportError:
        raise InputError("a batch cluster needs the cluster extra: pip install 'lcao[cluster]'") from None
    cls = {"slurm": dask_jobqueue.SLURMCluster, "pbs": dask_jobqueue.PBSCluster}[kind]
    kw = dict(cores=settings["cores"], processes=settings["cores"], memory=settings["memory"],
              walltime=settings["walltime"], worker_extra_args=["--nthreads", "1"])
    if settings.get("queue"):
        kw["queue"] = settings["queue"]
    if settings.get("account"):
        kw["account"] = settings["account"]
    if settings.get("directives"):
        kw["job_extra_directives"] = list(settings["directives"])
    kw["job_script_prologue"] = worker_environment()
    return cls(**kw)


def worker_environment() -> list[str]:
    """Shell lines that give a batch job's workers :data:`BATCH_WORKER_CONFIG` (Dask reads DASK_* variables)."""
    lines = []
    for key, value in BATCH_WORKER_CONFIG.items():
        name = "DASK_" + "__".join(part.upper().replace("-", "_") for part in key.split("."))
        lines.append(f'export {name}="{value!r}"')  # Python literals: no double quote, $ or backslash in them
    return lines


class DaskExecutor(Executor):
    """Tasks on a Dask cluster (see the module docstring).

    Args:
        spec: ``local:N`` (a local cluster of N worker processes, one thread each), ``tcp://HOST:PORT`` (an
            existing scheduler), or a study's [cluster] table (a dict with ``kind`` slurm or pbs).
        threads: PySCF and BLAS threads per task.
    """

    kind = "dask"
    whole_members = True

    def __init__(self, spec, threads: int = 1):
        import dask

        distributed = _imports()
        self.threads = int(threads)
        self._cluster = None
        #: a folder of shared integrals (local clusters only: other workers need not share this disk)
        self.shared = None
        if isinstance(spec, dict):
            self._cluster = jobqueue_cluster(spec)
            self._cluster.scale(jobs=int(spec.get("jobs", 1)))
            self.address = f"{spec['kind']} jobs"
        else:
            how, value = parse_cluster(spec)
            if how == "local":
                # workers on this machine share two-electron integrals through a folder, as a local pool's do
                from .local import _memory_folder

                self.shared = tempfile.mkdtemp(prefix="lcao-dask-", dir=_memory_folder())
                with dask.config.set(WORKER_CONFIG):
                    self._cluster = distributed.LocalCluster(n_workers=value, threads_per_worker=1, processes=True,
                                                             dashboard_address=None)
                self.address = spec
            else:
                self.address = value
        self._client = distributed.Client(self._cluster if self._cluster is not None else self.address,
                                          set_as_default=False)
        if isinstance(spec, dict):
            self._client.wait_for_workers(1)
        self.workers = max(1, sum(w.get("nthreads", 1) for w in self._client.scheduler_info()["workers"].values()))
        self._pool = self._client.get_executor(pure=False, retries=RETRIES)
        self._killed = distributed.KilledWorker

    def submit(self, fn, /, *args, **kwargs):
        return self._pool.submit(run_in_worker, fn, self.threads, self.shared, *args, **kwargs)

    def is_lost_task(self, exc: BaseException) -> bool:
        """Whether an exception says the task's workers kept dying (the task, not lcao, failed)."""
        return isinstance(exc, self._killed)

    def worker_pids(self) -> list[int]:
        """The process ids of the workers (for tests and diagnostics)."""
        import os

        return list(self._client.run(os.getpid).values())

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        try:
            self._pool.shutdown(wait=wait and not cancel_futures)
        finally:
            self._client.close()
            if self._cluster is not None:
                self._cluster.close()
            if self.shared is not None:
                shutil.rmtree(self.shared, ignore_errors=True)

    def terminate(self) -> None:
        """Cancel every future of this run and close the client (and a cluster it started)."""
        self.shutdown(wait=False, cancel_futures=True)

    def describe(self) -> dict:
        return {"executor": self.kind, "workers": self.workers, "threads_per_worker": self.threads,
                "scheduler": self.address}
