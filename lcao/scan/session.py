"""One run on the client side: tasks go to the executor, results come back and only this process
writes them to the store.

A :class:`Session` is shared by every curve of a run (a series runs its members' curves side by side
on one executor). Its coroutines look up what the store already has, send the rest out as tasks
(:mod:`lcao.scan.tasks`), and commit each result as it arrives, so a run that is killed loses only
the tasks in flight and a rerun computes only what is missing.
"""

from __future__ import annotations

import asyncio
import contextlib
import heapq
import itertools
import logging
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field

from ..execute.serial import SerialExecutor
from ..methods.cache import BoundedCache, nbytes
from ..execute.worker import run_task
from ..store import point_key
from .plan import SweepSpec, pieces
from .tasks import AtomTask, ChainTask, ProbeTask, remember

log = logging.getLogger(__name__)

#: a long chain is split into tasks of about this many seconds (by the method's estimate, then by
#: what the run measures): a killed run loses at most that much per worker, and progress is reported
#: at least that often. Chains of Hartree-Fock points in small bases stay whole.
TASK_SECONDS = 5.0


class PriorityGate:
    """At most ``slots`` holders at a time; waiters are let in by priority (lower first), then in order of
    arrival. The correlation tasks of a curve pass through one, so that no more of them sit in the
    executor's queue than there are workers, and a refinement point (the fit waits on it) goes ahead of
    grid points still waiting."""

    def __init__(self, slots: int):
        self.free = max(1, slots)
        self.waiting: list = []
        self.arrivals = itertools.count()

    async def acquire(self, priority: int) -> None:
        if self.free > 0 and not self.waiting:
            self.free -= 1
            return
        fut = asyncio.get_running_loop().create_future()
        heapq.heappush(self.waiting, (priority, next(self.arrivals), fut))
        try:
            await fut
        except asyncio.CancelledError:
            if fut.done() and not fut.cancelled():  # let in and cancelled at once: pass the slot on
                self.release()
            raise

    def release(self) -> None:
        while self.waiting:
            _, _, fut = heapq.heappop(self.waiting)
            if not fut.done():
                fut.set_result(None)
                return
        self.free += 1


@dataclass
class Tally:
    """Points of one curve computed now and taken from the store (each counted once)."""

    computed: int = 0
    reused: int = 0
    seen: set = field(default_factory=set)
    #: the processes that computed this curve's points
    pids: set = field(default_factory=set)

    def merge(self, other: "Tally") -> None:
        """Take in the points and processes of a part of the same curve (a reference or component level)."""
        for key in other.seen - self.seen:
            self.seen.add(key)
        self.computed += other.computed
        self.reused += other.reused
        self.pids |= other.pids

    def count(self, key, computed: bool) -> None:
        if key in self.seen:
            return
        self.seen.add(key)
        if computed:
            self.computed += 1
        else:
            self.reused += 1


#: orbitals of this run's points kept in memory for the analysis (5 KB per point of N2 in 6-31G,
#: 58 KB in cc-pVTZ)
KEPT_BYTES = 64 * 2**20


def _orbital_bytes(point) -> int:
    return nbytes(point.orbitals)


def kept_key(species, multiplicity, level, sweep, r_bohr) -> tuple:
    return (species.label, multiplicity, level.key(), sweep, round(float(r_bohr), 8))


def _seeded(seed) -> list:
    hist: list = []
    remember(hist, seed)
    return hist


class Session:
    """The client side of a run (see the module docstring).

    Args:
        store: a :class:`lcao.store.Store` (written only here).
        executor: a :class:`lcao.execute.Executor`.
        progress: optional callable(label, points) after each finished task.
    """

    def __init__(self, store, executor, progress=None):
        self.store = store
        self.executor = executor
        self.progress = progress
        self.pids: set = set()
        self._atoms: dict = {}
        self._rate: dict = {}
        #: points computed in this run with their orbitals (never stored), for the analysis
        self.kept = BoundedCache(KEPT_BYTES, _orbital_bytes)
        #: callables(species, multiplicity, level, sweep, branch, points) told of each piece of a chain
        #: as it is committed (:class:`lcao.scan.on_reference.EarlyCorrelation` listens)
        self.watchers: list = []
        #: correlation tasks in the executor at once: one per worker, refinement points first
        self.correlation_gate = PriorityGate(max(1, executor.workers))

    # tasks ---------------------------------------------------------------------------------

    async def run(self, task):
        """Run one task on the executor; returns its value. A worker process that dies hands its
        task, and the rest of the run, to this process (with a warning)."""
        try:
            done = await asyncio.wrap_future(self.executor.submit(run_task, task))
        except Exception as exc:
            lost = getattr(self.executor, "is_lost_task", None)
            if lost is not None and lost(exc):  # a cluster task whose workers kept dying: a failed calculation
                from ..errors import CalculationError

                raise CalculationError(f"the cluster lost this task: {exc}") from None
            if not isinstance(exc, BrokenProcessPool):
                raise
            if not isinstance(self.executor, SerialExecutor):
                log.warning("a worker process ended unexpectedly; the rest of the run is computed in this process")
                self.executor.terminate()
                self.executor = SerialExecutor()
            done = run_task(task)
        self.pids.add(done.pid)
        return done

    def progress_tick(self, label: str, n: int) -> None:
        """Tell the progress reporter that ``n`` more points are done."""
        self._tick(label, n)

    def _tick(self, label: str, n: int) -> None:
        if self.progress is not None and n:
            self.progress(label, n)

    def _measured(self, level, seconds_per_point: float) -> None:
        """Keep the measured cost of a point at ``level``; the first one also goes to the progress
        reporter (the CLI turns it into an estimate of the time still needed)."""
        first = level.key() not in self._rate
        self._rate[level.key()] = seconds_per_point
        report = getattr(self.progress, "measured", None)
        if first and report is not None:
            report(level.text, seconds_per_point, self.executor.workers)

    def points_per_task(self, method, target, level_key: str) -> int:
        rate = self._rate.get(level_key)
        if rate is None:
            rate = method.seconds_per_point(method.basis_size(target))
        return max(1, int(TASK_SECONDS / max(rate, 1e-6)))

    # points ---------------------------------------------------------------------------------

    def stored_point(self, species, multiplicity, level, sweep, r_bohr):
        return self.store.get_point(species, multiplicity, level, sweep, r_bohr)

    def commit_point(self, species, multiplicity, level, sweep, point, tally: Tally) -> None:
        self.store.put_point(species, multiplicity, level, sweep, point)
        tally.count(point_key(species, multiplicity, level, sweep, point.r_bohr), True)
        if point.orbitals is not None:
            self.kept.put(kept_key(species, multiplicity, level, sweep, point.r_bohr), point)

    async def chains(self, method, species, target, specs, tally: Tally) -> dict:
        """Run several chains of one sweep side by side; their points merged (index -> PointResult)."""
        got = await asyncio.gather(*(self.chain(method, species, target, sp, tally) for sp in specs))
        merged: dict = {}
        for part in got:
            merged.update(part)
        return merged

    async def chain(self, method, species, target, spec: SweepSpec, tally: Tally) -> dict:
        """Run one sweep chain; returns index -> :class:`lcao.methods.PointResult` (stored or new, the
        seed included)."""
        level, mult = target.level, target.multiplicity
        r_all = spec.r_all
        got: dict = {}

        def known(i):
            p = self.stored_point(species, mult, level, spec.sweep, r_all[i])
            if p is not None:
                got[i] = p
                tally.count(point_key(species, mult, level, spec.sweep, r_all[i]), False)
            return p

        seed_known = known(spec.seed) if spec.seed is not None else None
        stored = [known(i) for i in spec.indices]
        missing = [i for i, p in zip(spec.indices, stored) if p is None]
        if not missing:
            self._tick(spec.sweep, len(spec.indices))
            return got
        size = self.points_per_task(method, target, level.key())
        history: tuple = ()
        parts = pieces(spec.indices, size)
        check = spec.check_instability
        outward = len(spec.indices) < 2 or spec.indices[-1] > spec.indices[0]
        for j, part in enumerate(parts):
            part_known = tuple(got.get(i) for i in part)
            if all(p is not None for p in part_known) and not (j == 0 and spec.seed is not None and seed_known is None):
                # nothing to compute in this piece: its history goes on here
                hist = list(history) if j else ([] if seed_known is None else _seeded(seed_known))
                for p in part_known:
                    remember(hist, p)
                history = tuple(hist)
                self._tick(spec.sweep, len(part))
                continue
            task = ChainTask(method, target, spec.sweep, spec.branch, tuple(r_all[i] for i in part), part_known,
                             spec.start, history, r_all[spec.seed] if (spec.seed is not None and j == 0) else None,
                             seed_known if j == 0 else None, check)
            done = await self.run(task)
            tally.pids.add(done.pid)
            outcome = done.value
            new = []
            if outcome.seed is not None:
                got.setdefault(spec.seed, outcome.seed)
                self.commit_point(species, mult, level, spec.sweep, outcome.seed, tally)
                new.append(outcome.seed)
            for i, p in zip(part, outcome.points):
                if p is not None:
                    got[i] = p
                    self.commit_point(species, mult, level, spec.sweep, p, tally)
                    new.append(p)
            if outward and any(p.unstable_towards is not None for p in new):
                check = False  # as within a chain (lcao.scan.tasks.ChainTask): the first unstable distance only
            if new:
                self._measured(level, done.seconds / len(new))
                for watch in list(self.watchers):
                    watch(species, mult, level, spec.sweep, spec.branch, new)
            history = outcome.history
            self._tick(spec.sweep, len(part))
        return got

    async def probe(self, method, species, target, r_bohr: float, plan, tally: Tally):
        """One distance of a multiplicity probe: (primary point, secondary point or None)."""
        level, mult = target.level, target.multiplicity
        check = plan.instability_check and plan.secondary is not None
        if check:
            names = {plan.primary: f"probe/{plan.primary}", plan.secondary: f"probe/{plan.secondary}"}
        else:
            names = {plan.primary: f"probe/{plan.reference[plan.primary].lower()}"}
        p = self.stored_point(species, mult, level, names[plan.primary], r_bohr)
        q = None
        if plan.secondary and check:
            q = self.stored_point(species, mult, level, names[plan.secondary], r_bohr)
        for name, pt in ((names[plan.primary], p), (names.get(plan.secondary), q)):
            if pt is not None:
                tally.count(point_key(species, mult, level, name, r_bohr), False)
        need_q = check and q is None and (p is None or p.unstable_towards == plan.secondary)
        if p is None or need_q:
            done = await self.run(ProbeTask(method, target, r_bohr, plan.primary, plan.secondary if check else None,
                                            check, p, q))
            tally.pids.add(done.pid)
            new_p, new_q = done.value
            if new_p is not None:
                p = new_p
                self.commit_point(species, mult, level, names[plan.primary], p, tally)
            if new_q is not None:
                q = new_q
                self.commit_point(species, mult, level, names[plan.secondary], q, tally)
            self._tick("probe", 1)
        return p, q

    async def correlate(self, method, species, target, jobs, parts: int, tally: Tally, early=None,
                        fine: bool = True, priority: int | None = None) -> dict:
        """``method``'s points on reference points: ``jobs`` are (sweep, branch, reference point); returns
        (sweep, r_bohr rounded to 1e-8) -> PointResult, from the store, from ``early`` (a callable(reference
        point) giving an awaitable of the point already under way on that very reference point, or None) or
        computed in about four independent tasks per ``parts`` (more where the points are dear), each
        committed as it comes back; ``fine`` False for grid points (:class:`lcao.scan.tasks.CorrelationTask`).
        The tasks pass :attr:`correlation_gate` with ``priority`` (default: 0 for fine points, 1 for grid
        points)."""
        from .tasks import CorrelationTask

        level, mult = target.level, target.multiplicity
        got: dict = {}
        todo = []
        started = []
        for sweep, branch, ref in jobs:
            p = self.stored_point(species, mult, level, sweep, ref.r_bohr)
            if p is not None:
                got[(sweep, round(ref.r_bohr, 8))] = p
                tally.count(point_key(species, mult, level, sweep, ref.r_bohr), False)
            elif early is not None and (pending := early(ref)) is not None:
                started.append(((sweep, branch, ref), pending))
            else:
                todo.append((sweep, branch, ref))

        async def take(job, pending):
            p = await pending
            if p is None:  # the early task skipped it (its reference breaks the spatial symmetry): computed now
                got.update(await self.correlate(method, species, target, [job], parts, tally, None, fine, priority))
                return
            got[(job[0], round(p.r_bohr, 8))] = p
            self.commit_point(species, mult, level, job[0], p, tally)
            self._tick("correlation", 1)

        taking = [take(job, pending) for job, pending in started]
        if not todo:
            await asyncio.gather(*taking)
            return got
        # about four tasks per worker: points of one level differ in cost (a stretched or unrestricted point
        # takes two or three times a point in the well), and small tasks keep every worker busy to the end
        size = max(1, min(self.points_per_task(method, target, level.key()), -(-len(todo) // (4 * max(1, parts)))))
        chunks = [todo[k:k + size] for k in range(0, len(todo), size)]

        async def one(chunk):
            await self.correlation_gate.acquire(priority if priority is not None else (0 if fine else 1))
            try:
                done = await self.run(CorrelationTask(method, target, tuple((ref, branch) for _, branch, ref in chunk),
                                                      fine))
            finally:
                self.correlation_gate.release()
            tally.pids.add(done.pid)
            self._measured(level, done.seconds / max(1, len(chunk)))
            for (sweep, _, _), p in zip(chunk, done.value):
                got[(sweep, round(p.r_bohr, 8))] = p
                self.commit_point(species, mult, level, sweep, p, tally)
            self._tick("correlation", len(chunk))

        await asyncio.gather(*(one(c) for c in chunks), *taking)
        return got

    # atoms -----------------------------------------------------------------------------------

    async def atoms(self, method, level, states) -> dict:
        """(symbol, charge, 2S) -> :class:`lcao.methods.AtomResult` for every state, from this run, the
        store, or computed (each state once per run, whichever curve asks first)."""

        async def one(state):
            key = (level.key(),) + tuple(state)
            fut = self._atoms.get(key)
            if fut is None:
                fut = self._atoms[key] = asyncio.ensure_future(self._atom(method, level, state))
            return await fut

        got = await asyncio.gather(*(one(s) for s in dict.fromkeys(states)))
        return dict(zip(dict.fromkeys(states), got))

    async def _atom(self, method, level, state):
        symbol, charge, spin = state
        a = self.store.get_atom(symbol, charge, spin, level)
        if a is None:
            a = (await self.run(AtomTask(method, symbol, charge, spin, level))).value
            self.store.put_atom(a, level)
        return a


def run_sync(coro):
    """Run a coroutine of this package to its end and return its value, from plain synchronous code.

    In a thread whose event loop is already running (a notebook cell), the coroutine runs on a loop
    of its own in a helper thread. An interrupt stops the loop; the caller's ``with`` blocks then stop
    the workers (see :func:`open_session`).
    """
    import concurrent.futures

    try:
        asyncio.get_running_loop()
    except RuntimeError:
        return _run(coro)
    with concurrent.futures.ThreadPoolExecutor(1) as helper:
        return helper.submit(_run, coro).result()


def _quiet_about_interrupts(loop, context):
    """The loop's exception handler: a task that an interrupt ended is not reported again when it is
    collected (the caller says what the interrupt kept); anything else goes to asyncio's default."""
    if not isinstance(context.get("exception"), KeyboardInterrupt):
        loop.default_exception_handler(context)


def _run(coro):
    loop = asyncio.new_event_loop()
    loop.set_exception_handler(_quiet_about_interrupts)
    try:
        return loop.run_until_complete(coro)
    finally:
        pending = [t for t in asyncio.all_tasks(loop) if not t.done()]
        for t in pending:
            t.cancel()
        if pending:
            loop.run_until_complete(asyncio.gather(*pending, return_exceptions=True))
        loop.close()


@contextlib.contextmanager
def open_session(store=None, workers=None, basis_size: int = 0, progress=None, executor=None):
    """``with open_session(store, workers, basis_size, progress) as session``: a :class:`Session` on an
    executor chosen for the run (:func:`lcao.execute.make_executor`), PySCF and BLAS threads set for this
    process, and the executor stopped at the end (at once after an error or an interrupt).

    ``store`` None uses a throw-away in-memory store; an ``executor`` given is used and left open.
    """
    from ..execute import make_executor
    from ..store import MemoryStore
    from ..threads import limited

    with contextlib.ExitStack() as stack:
        if store is None:
            store = stack.enter_context(MemoryStore())
        if executor is None:
            executor = stack.enter_context(make_executor(workers, basis_size))
        stack.enter_context(limited(executor.threads if isinstance(executor, SerialExecutor) else 1))
        yield Session(store, executor, progress)
