"""The units of work of a scan, as plain values: each task's ``run()`` is what a worker executes.

A task carries everything it needs (the method object, the target, distances, warm starts and the
points already in the store) and returns plain values (:class:`lcao.methods.PointResult`,
:class:`lcao.methods.AtomResult`, dicts); it never touches the store. :func:`lcao.execute.worker.run_task`
runs one anywhere: in this process, in a local worker or on a cluster.
"""

from __future__ import annotations

import hashlib
import logging
from dataclasses import dataclass, field

from ..methods.base import AtomResult, Method, PointResult, Target, Warm

log = logging.getLogger(__name__)

#: converged points of a chain that the next warm start is extrapolated from: over seven closed- and
#: open-shell curves in STO-3G and 6-31G (N2, NO, O2, CO, CN-, BF, NO+), two points took 12388 SCF
#: cycles in all, three 11203, four 10712, five 11392, six 12066
EXTRAPOLATION_POINTS = 4
#: a point that took more cycles than this starts the next one from its own warm start, not from an
#: extrapolation. Without it (CO, HF/STO-3G) the sweep from the instability, extrapolated through a
#: region of 20-50 cycles near 2 A, landed on a higher solution at three distances; with it the sweeps
#: agree again. The seven curves above took 10224 cycles with 8 here, 10489 with 12, 10449 with 20.
SMOOTH_CYCLES = 8


def task_key(*parts) -> str:
    """A short deterministic key from the parts that determine a task's result."""
    return hashlib.sha1(repr(parts).encode()).hexdigest()[:16]


def remember(history: list, p: PointResult) -> None:
    """Add a point to the extrapolation history of a chain (the rule of :data:`SMOOTH_CYCLES`)."""
    if not p.converged:
        return
    if p.stability not in ("stable", "not checked") or p.cycles > SMOOTH_CYCLES:
        # the point moved to another solution, or the solution changes fast here: no extrapolation
        # across (it would overshoot, and can land on another solution)
        history.clear()
    history.append((p.r_bohr, p.warm))
    del history[:-EXTRAPOLATION_POINTS]


@dataclass(frozen=True)
class ChainOutcome:
    """What a chain task computed.

    Attributes:
        points: per distance of the task, the point computed here (None where it was known).
        seed: the seed point when computed here, else None.
        history: the extrapolation history at the end, to continue the chain in another task.
    """

    points: tuple
    seed: PointResult | None
    history: tuple


@dataclass(frozen=True)
class ChainTask:
    """A warm-started chain of points along ``r_bohr`` (one sweep, or one piece of it).

    Each point starts from the warm start extrapolated through the last converged points of the same
    solution (``history`` carries them from an earlier piece), or from ``start`` when there are none.
    ``seed`` is a distance computed first from ``start`` (or known) that starts the chain without
    belonging to it: the first point of the other half of a sweep. Points already in the store
    (``known``) are taken, not recomputed. A chain that checks for an instability towards the other
    branch stops checking, when it runs outward, after the first unstable point: only the smallest
    unstable distance starts the other branch, and the check costs as much as the point itself.
    """

    method: Method
    target: Target
    sweep: str
    branch: str
    r_bohr: tuple
    known: tuple = ()
    start: Warm | None = field(default=None, repr=False)
    history: tuple = field(default=(), repr=False)
    seed: float | None = None
    seed_known: PointResult | None = field(default=None, repr=False)
    check_instability: bool = False

    def key(self) -> str:
        t = self.target
        return task_key("chain", t.atoms, t.charge, t.multiplicity, t.level.key(), self.sweep, self.r_bohr, self.seed)

    def run(self) -> ChainOutcome:
        m, t = self.method, self.target
        history = list(self.history)
        known = self.known or (None,) * len(self.r_bohr)

        def start_for(r):
            return m.extrapolate(history, r) if history else self.start

        seed = None
        if self.seed is not None:
            p = self.seed_known
            if p is None:
                p = seed = m.point(t, self.seed, self.branch, self.start, self.check_instability)
            remember(history, p)
        out = []
        check = self.check_instability
        outward = len(self.r_bohr) < 2 or self.r_bohr[-1] > self.r_bohr[0]
        for r, got in zip(self.r_bohr, known):
            if got is None:
                got = m.point(t, r, self.branch, start_for(r), check)
                out.append(got)
                log.debug("%s %s r=%.4f bohr E=%.8f conv=%s cycles=%d", t.atoms, self.sweep, r, got.energy,
                          got.converged, got.cycles)
            else:
                out.append(None)
            if outward and got.unstable_towards is not None:
                check = False  # the protocol needs the first unstable distance only (the smallest)
            remember(history, got)
        return ChainOutcome(tuple(out), seed, tuple(history))


@dataclass(frozen=True)
class AtomTask:
    """One atom state at a level."""

    method: Method
    symbol: str
    charge: int
    spin: int
    level: object

    def key(self) -> str:
        return task_key("atom", self.symbol, self.charge, self.spin, self.level.key())

    def run(self) -> AtomResult:
        return self.method.atom(self.symbol, self.charge, self.spin, self.level)


@dataclass(frozen=True)
class ProbeTask:
    """One distance of a multiplicity probe: the primary branch and, where it turns out unstable
    towards the secondary, the secondary from that instability (either may be known)."""

    method: Method
    target: Target
    r_bohr: float
    primary: str
    secondary: str | None
    check_instability: bool
    known_primary: PointResult | None = field(default=None, repr=False)
    known_secondary: PointResult | None = field(default=None, repr=False)

    def key(self) -> str:
        t = self.target
        return task_key("probe", t.atoms, t.charge, t.multiplicity, t.level.key(), self.r_bohr)

    def run(self) -> tuple:
        """(primary point or None when known, secondary point or None)."""
        m, t = self.method, self.target
        p = self.known_primary
        new_p = None
        if p is None:
            p = new_p = m.point(t, self.r_bohr, self.primary, None, self.check_instability)
        new_q = None
        if self.secondary and p.unstable_towards == self.secondary and self.known_secondary is None:
            start = p.branch_start if p.branch_start is not None else m.instability_start(t, p, self.secondary)
            new_q = m.point(t, self.r_bohr, self.secondary, start)
        return new_p, new_q


@dataclass(frozen=True)
class InstabilityStartTask:
    """The warm start along the instability of a stored point (its own was not kept)."""

    method: Method
    target: Target
    point: PointResult = field(repr=False)
    branch: str

    def run(self):
        return self.method.instability_start(self.target, self.point, self.branch)


@dataclass(frozen=True)
class AnalysisTask:
    """Orbital analyses of points: ``items`` are (point, branch); ``summary`` True returns the short
    per-point summary used along a curve, False the whole :class:`lcao.analysis.OrbitalAnalysis`."""

    method: Method
    target: Target
    items: tuple = field(repr=False)
    summary: bool = True

    def run(self) -> tuple:
        from ..errors import CalculationError

        out = []
        for point, branch in self.items:
            try:
                a = self.method.analyse(self.target, point, branch)
            except CalculationError as exc:
                log.warning("no orbital analysis at %.4f bohr: %s", point.r_bohr, exc)
                out.append(None)
                continue
            out.append(summarise(a, point, branch) if self.summary else a)
        return tuple(out)


def summarise(a, point: PointResult, branch: str) -> dict:
    """The per-point summary along a curve: bond orders, unpaired electrons, <S^2>, frontier orbitals, overlaps."""
    from ..units import bohr_to_angstrom

    out = {
        "r_angstrom": float(bohr_to_angstrom(point.r_bohr)),
        "branch": branch,
        "bond_orders": a.bond_orders(),
        "unpaired_electrons": a.unpaired_electrons,
        "s2": a.s2,
        "frontier": a.frontier(),
        "overlaps": {k: v for k, v in a.overlaps.items() if k != "functions"},
    }
    if a.natural is not None:  # a multiconfigurational point: what its natural orbitals say
        out.update(effective_bond_order=a.natural["effective_bond_order"],
                   natural_occupations=a.natural["natural_occupations"],
                   leading_configuration_weight=a.natural["leading_configuration_weight"],
                   state=a.natural["state"])
    return out


@dataclass(frozen=True)
class AtomLevelsTask:
    """Orbital energies of the separated atoms (for the orbital diagram)."""

    method: Method
    level: object
    atoms: tuple = field(repr=False)

    def run(self) -> tuple:
        return tuple(self.method.atom_levels(a, self.level) for a in self.atoms)


@dataclass(frozen=True)
class CorrelationTask:
    """A level's energies on reference points: ``items`` are (reference point, branch), each correlated
    independently (:meth:`lcao.methods.Method.on_reference`); ``fine`` False for grid points (converged to
    the library's defaults), True for the points a fit reads. With ``unless_broken`` (the reference method
    and target), a reference point that breaks the molecule's spatial symmetry is not correlated (None in its
    place): the correlation started before the curve is done, whose restricted reference is then the
    symmetry-adapted one there (:func:`lcao.scan.on_reference.symmetric_restricted`)."""

    method: Method
    target: Target
    items: tuple = field(repr=False)
    fine: bool = True
    unless_broken: tuple | None = None

    def run(self) -> tuple:
        from .assemble import SPATIAL_BREAK_ELECTRONS

        out = []
        for point, branch in self.items:
            if self.unless_broken is not None:
                off = self.unless_broken[0].spatial_breaking(self.unless_broken[1], point)
                if off is not None and off > SPATIAL_BREAK_ELECTRONS:
                    out.append(None)
                    continue
            out.append(self.method.on_reference(self.target, point, branch, self.fine))
        return tuple(out)


@dataclass(frozen=True)
class CounterpoiseTask:
    """The separated atoms in the dimer's basis at distances: ``items`` are (r_bohr, first atom, second atom)
    (:class:`lcao.methods.AtomResult`); each gives (first atom in the dimer basis, second atom in it)."""

    method: Method
    level: object
    items: tuple = field(repr=False)

    def run(self) -> tuple:
        out = []
        for r, a, b in self.items:
            out.append((self.method.ghost_atom(a, self.level, b.symbol, r, True),
                        self.method.ghost_atom(b, self.level, a.symbol, r, False)))
        return tuple(out)


@dataclass(frozen=True)
class SpatialCheckTask:
    """How far each point's solution breaks the molecule's spatial symmetry
    (:meth:`lcao.methods.Method.spatial_breaking`): a tuple of floats (None where not measured)."""

    method: Method
    target: Target
    points: tuple = field(repr=False)

    def run(self) -> tuple:
        return tuple(self.method.spatial_breaking(self.target, p) for p in self.points)


@dataclass(frozen=True)
class MemberTask:
    """A whole series member in one worker, the unit of work of a cluster for cheap levels
    (:func:`lcao.series.run_series`): its curve, fit and orbitals on a serial executor and an in-memory store.
    Returns (its :class:`lcao.series.SeriesRow`, the points and the atoms it stored, as plain values that the
    client commits to the real store, so that only the client writes it)."""

    member: object = field(repr=False)
    files: bool = False
    #: the client's executor as outputs describe it (``Executor.describe()``)
    execution: dict = field(default_factory=dict)

    def run(self) -> tuple:
        from ..execute.serial import SerialExecutor
        from ..series import run_member_async
        from ..store import RecordingStore
        from .session import Session, run_sync

        described = {**self.execution, "unit_of_work": "the whole member in one worker"}

        class InWorker(SerialExecutor):  # serial here, described as what the client ran it on
            def describe(self) -> dict:
                return dict(described)

        store = RecordingStore()
        try:
            row = run_sync(run_member_async(Session(store, InWorker()), self.member, self.files))
        finally:
            store.close()
        return row, tuple(store.points), tuple(store.atoms)
