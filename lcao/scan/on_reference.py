"""The protocol for a level computed on another level's solutions (a correlated method on Hartree-Fock).

The reference level's curve is computed first, with the whole protocol (its sweeps are stored under the
reference level and shared by every level on it). Then the level's energy is computed once at every
trusted reference point of every branch, each point independently (the tasks spread over the workers),
and the separated atoms at the same level beside them. A closed-shell curve with both branches takes the
restricted one through the well and switches once to the unrestricted one
(:func:`lcao.scan.assemble.switch_once`): a correlated energy is not variational, and on the restricted
reference of a stretched bond it can fall below the right curve.
The refinement about the minimum follows the reference's well branch at the level's own minimum.

The restricted reference is the symmetry-adapted one: where the lowest restricted solution of a stretched
bond, or of C2 already about its equilibrium, breaks the molecule's spatial symmetry (N2 in cc-pVDZ from about
1.47 A), the restricted solution kept in the point group takes its place (:func:`symmetric_restricted`), in a
well level's window too, and the refinement follows it. Coupled cluster and MP2 on the broken
determinant fall tens of millihartree below the usual curve and turn down early (N2 CCSD(T)/cc-pVDZ at 1.62 A:
40 mEh below, against PySCF's RCCSD(T) on the symmetry-adapted RHF); on the symmetry-adapted one the curve is
the usual RCCSD(T) curve up to the switch to the unrestricted branch. Its points are stored under their own
sweep (``restricted-symmetric/correlated``).
"""

from __future__ import annotations

import asyncio

from ..atoms import fragment_choices, needed_states, separated_atoms
from ..methods import method_for
from ..methods.base import Target
from ..points import CurvePoint
from ..units import bohr_to_angstrom
from . import assemble, plan as planning
from .session import Tally
from .tasks import CorrelationTask


#: the search for the switch from the restricted to the unrestricted branch: restricted points past the
#: instability computed beside the unrestricted branch, then outward this many at a time (fixed, not
#: per worker: which restricted points exist decides which are flagged, and the curve must not depend on
#: the number of workers)
SEARCH_AHEAD = 4
SEARCH_STEP = 2
#: points per task of the early correlation (small, so that a reference chain's next piece waits little)
EARLY_POINTS_PER_TASK = 2


class EarlyCorrelation:
    """This level's energies on the reference points of the sweeps from equilibrium, started as each piece
    of those sweeps is committed, on the workers that the reference's sequential chains leave idle (one
    worker fewer than the executor has, so that a chain never waits for more than a small task), until
    the reference curve is done (:meth:`close` cancels those not started by then). At the correlation
    stage, a job whose reference point is one of these takes the result already under way (:meth:`take`);
    the rest are cancelled (:meth:`drop_rest`). Nothing here is stored before the final
    reference curve has chosen its points, so the store never holds a level's energy on a reference point
    the curve did not keep."""

    def __init__(self, session, method, species, target: Target, ref_level, tally: Tally, fine: bool = False):
        self.session, self.method, self.species, self.target, self.tally = session, method, species, target, tally
        self.fine = fine
        self.ref_key = ref_level.key()
        #: a restricted reference point that breaks the spatial symmetry is skipped: the curve takes the
        #: symmetry-adapted one there
        self.unless_broken = (method_for(ref_level), Target(target.atoms, target.charge, target.multiplicity, ref_level))
        self.pending: dict = {}  # (r_bohr rounded, reference energy) -> (future, index in its task)
        self.futures: list = []
        self.taken: set = set()
        self.started: set = set()
        self.gate = asyncio.Semaphore(max(1, session.executor.workers - 1))

    def __call__(self, species, multiplicity, level, sweep, branch, points) -> None:
        if (species.label != self.species.label or multiplicity != self.target.multiplicity
                or level.key() != self.ref_key or not sweep.endswith("from-equilibrium")):
            return
        pts = [p for p in points if p.usable]
        size = min(EARLY_POINTS_PER_TASK,
                   self.session.points_per_task(self.method, self.target, self.target.level.key()))
        for k in range(0, len(pts), size):
            chunk = pts[k:k + size]
            task = CorrelationTask(self.method, self.target, tuple((p, branch) for p in chunk), fine=self.fine,
                                   unless_broken=self.unless_broken if branch == "restricted" else None)
            fut = asyncio.ensure_future(self._run(task))
            self.futures.append(fut)
            for j, p in enumerate(chunk):
                self.pending[(round(p.r_bohr, 8), p.energy)] = (fut, j)

    async def _run(self, task):
        async with self.gate:  # the reference's chains keep a worker
            self.started.add(id(asyncio.current_task()))
            return await self.session.run(task)

    def close(self) -> None:
        """The reference curve is done: the tasks not yet started are cancelled (the correlation stage
        computes what it needs, in its own order), those running are kept."""
        for fut in self.futures:
            if id(fut) not in self.started:
                fut.cancel()
        self.pending = {k: v for k, v in self.pending.items() if id(v[0]) in self.started}

    def take(self, ref):
        """An awaitable of this level's point on the reference point ``ref``, or None where none was started."""
        entry = self.pending.pop((round(ref.r_bohr, 8), ref.energy), None)
        if entry is None:
            return None
        fut, j = entry
        self.taken.add(id(fut))

        async def value():
            done = await fut
            self.tally.pids.add(done.pid)
            return done.value[j]
        return value()

    def drop_rest(self) -> None:
        """Cancel the tasks none of whose points a job took (a task already running on a worker finishes
        there and its result is dropped)."""
        for fut in self.futures:
            if id(fut) not in self.taken:
                fut.cancel()
            fut.add_done_callback(lambda f: f.cancelled() or f.exception())


async def symmetric_restricted(session, ref_method, species, ref_target, r_all, ref, tally: Tally):
    """Where a trusted point of the reference's restricted branch breaks the molecule's spatial symmetry (its
    density off the symmetry blocks by more than :data:`lcao.scan.assemble.SPATIAL_BREAK_ELECTRONS`), the
    symmetry-adapted restricted solution there instead: its sweep from equilibrium, outward and, where a
    point inside it breaks too, inward (the same sweep as a Hartree-Fock curve's symmetry-adapted branch,
    :func:`lcao.scan.protocol.symmetric_branch`, so the store shares it), and its points in place of the
    broken ones. The points are added to ``ref.found``.

    Returns:
        (the restricted branch with the symmetry-adapted points in place, a note), or None where no point
        breaks the symmetry or the reference method has no symmetry-adapted branch.
    """
    from ..methods.molecule import point_group
    from .grid import expected_bond_length_bohr
    from .protocol import off_symmetry, symmetric_sweep

    rest = ref.result.branches.get("restricted")
    name = ref_method.symmetric_branch(ref_target.level, "restricted") if rest is not None else None
    if name is None:
        return None
    off = await off_symmetry(session, ref_method, ref_target, rest, ref.found)
    broken = [i for i, x in enumerate(off) if x is not None and x > assemble.SPATIAL_BREAK_ELECTRONS]
    if not broken:
        return None
    i0 = planning.equilibrium_index(r_all, expected_bond_length_bohr(*species.z))
    # the inward half only where a shorter bond breaks it too (C2 in cc-pVDZ from 1.13 A)
    sweep, pts = await symmetric_sweep(session, ref_method, species, ref_target, r_all, i0, name, ref.found, tally,
                                       inward=min(broken) < i0)
    out = list(rest)
    for i in broken:
        out[i] = pts[i] if pts[i] is not None else _placeholder(rest[i], sweep, "no symmetry-adapted reference")
    gaps = [pts[i].energy_hartree - rest[i].energy_hartree for i in broken if pts[i] is not None and pts[i].trusted]
    group = point_group(species.atoms)
    note = (f"restricted reference: the symmetry-adapted {ref_target.level.method} solution ({group})"
            f" from {float(bohr_to_angstrom(r_all[broken[0]])):.3f} A, where the lowest restricted solution breaks the"
            f" molecule's spatial symmetry" + (f" (up to {max(gaps):.4f} Eh lower)" if gaps else "")
            + "; correlation on the symmetry-adapted determinant (common practice)")
    return tuple(out), note


async def _correlate_branches(correlate, branches: dict, n: int, on_well=None, well_only=False) -> dict:
    """The level's points on the reference branches (``correlate(branch, indices, urgent)`` -> (sweep, r) ->
    point). A single branch: every trusted point. Both branches of a closed shell: the unrestricted branch
    everywhere (in groups outward from the instability) and the restricted one only as far as the final
    curve can use it (:func:`lcao.scan.assemble.switch_once`): inside the instability and the first
    :data:`SEARCH_AHEAD` points past it beside the unrestricted branch, then outward :data:`SEARCH_STEP` at a time
    (urgent: they go ahead of grid points still waiting for a worker) until the switch
    (:func:`lcao.scan.assemble.switch_index`: the unrestricted energy below the restricted one, or the
    restricted curve turning down), and past it only where the unrestricted point is not trusted. The
    restricted reference of a stretched bond is where coupled cluster converges slowest (1-3 s a point for
    N2 in cc-pVDZ against 0.5 s in the well), and past the switch its energies were never used.
    ``on_well(got)`` is called with the restricted points of the well as soon as they are in, while the
    unrestricted branch still runs. With ``well_only`` (the window of a well level) only the restricted
    branch, which holds the well: an unrestricted point at the window's edge, just past the instability,
    was never used and cost the most (UCCSD(T)/cc-pVTZ of N2 at 1.145 A: 8.7 s and 650 MB)."""
    if set(branches) != {"restricted", "unrestricted"}:
        got: dict = {}
        for branch in branches:
            got.update(await correlate(branch, range(n)))
        return got
    rest, uns = branches["restricted"], branches["unrestricted"]
    trusted = lambda pts, i: pts[i] is not None and pts[i].trusted  # noqa: E731
    start = next((i for i in range(n) if trusted(uns, i)), None)
    if start is None or well_only:
        return await correlate("restricted", range(n))
    # the first restricted points past the instability go with the well: the switch rarely comes
    # sooner, and they run beside the unrestricted branch instead of after it
    todo = [i for i in range(start, n) if trusted(rest, i)]
    ahead, todo = todo[:SEARCH_AHEAD], todo[SEARCH_AHEAD:]
    inside = asyncio.ensure_future(correlate("restricted", [*range(start), *ahead]))
    # the unrestricted branch in groups outward from the instability: the search for the switch waits only
    # for the groups holding the points it compares
    u_idx = [i for i in range(n) if trusted(uns, i)]
    groups: dict = {}
    for k in range(0, len(u_idx), SEARCH_AHEAD):
        fut = asyncio.ensure_future(correlate("unrestricted", u_idx[k:k + SEARCH_AHEAD]))
        groups.update((i, fut) for i in u_idx[k:k + SEARCH_AHEAD])
    got = dict(await inside)
    if on_well is not None:
        on_well(got)

    async def unrestricted_at(indices):
        for fut in {id(groups[i]): groups[i] for i in indices if i in groups}.values():
            got.update(await fut)

    def energies(branch, pts):
        out = []
        for i in range(n):
            p = got.get(_key(pts[i])) if trusted(pts, i) else None
            out.append(p.energy if p is not None and p.converged else None)
        return out

    def switch():
        return assemble.switch_index(energies("restricted", rest), energies("unrestricted", uns), start)[0]

    await unrestricted_at(ahead)
    at = switch()
    while todo and at is None:
        batch, todo = todo[:SEARCH_STEP], todo[SEARCH_STEP:]
        searched, _ = await asyncio.gather(correlate("restricted", batch, True), unrestricted_at(batch))
        got.update(searched)
        at = switch()
    await unrestricted_at(u_idx)
    at = n if at is None else at
    fallback = [i for i in todo if i > at and not trusted(uns, i)]
    if fallback:
        got.update(await correlate("restricted", fallback))
    return got


def _sweep(ref_point) -> str:
    """The sweep this level's point on a reference point is stored under: ``<reference branch>/correlated``
    (``restricted-symmetric/correlated`` on a symmetry-adapted restricted point)."""
    return f"{ref_point.branch}/correlated"


def _reference_branch(point) -> str:
    """The reference branch behind this level's curve point (the inverse of :func:`_sweep`)."""
    suffix = "/correlated"
    return point.sweep[:-len(suffix)] if point.sweep.endswith(suffix) else point.branch


def _key(ref_point) -> tuple:
    """The key of this level's point on ``ref_point`` among the points computed (``Session.correlate``)."""
    return _sweep(ref_point), round(ref_point.r_bohr, 8)


def _level_points(got: dict, ref_points, branch: str, n: int) -> tuple[dict, list]:
    """A branch at this level from the points computed so far (``got``: (sweep, r) -> point): (computed
    points by sweep and grid index, CurvePoints per grid index). A trusted reference point with nothing at
    this level was left out on purpose (the restricted branch past the switch, :func:`_correlate_branches`)
    and stays None; an untrusted one gets a flagged placeholder."""
    by_sweep: dict = {}
    listed: list = [None] * n
    for i, p in enumerate(ref_points):
        if p is None:
            continue
        if _key(p) in got:
            by_sweep.setdefault(_sweep(p), {})[i] = got[_key(p)]
            listed[i] = assemble.curve_points({i: got[_key(p)]}, n, branch, _sweep(p))[i]
        elif not p.trusted:
            listed[i] = _placeholder(p, _sweep(p))
    return by_sweep, listed


def _placeholder(ref_point: CurvePoint, sweep: str, why: str | None = None) -> CurvePoint:
    """A flagged point where the reference was not trusted: nothing was computed at this level there."""
    return CurvePoint(ref_point.r_bohr, float("nan"), False, why or f"reference not trusted: {ref_point.flag}",
                      ref_point.branch, sweep, ref_point.cycles)


async def scan(session, method, species, target: Target, r_all, tally: Tally, *, refine_points=True, analyse=True,
               parts=1, fitted=False):
    """As :func:`lcao.scan.protocol.scan`, for a method with a :meth:`~lcao.methods.Method.reference_level`."""
    from . import protocol

    ref_level = method.reference_level(target.level)
    ref_method = method_for(ref_level)
    ref_target = Target(target.atoms, target.charge, target.multiplicity, ref_level)
    ref_tally = Tally()
    states = needed_states(species, target.spin)
    atoms_task = asyncio.ensure_future(session.atoms(method, target.level, states))
    early = (EarlyCorrelation(session, method, species, target, ref_level, tally, fine=fitted)
             if session.executor.workers > 1 else None)
    if early is not None:
        session.watchers.append(early)
    try:
        ref, _, _ = await protocol.scan(session, ref_method, species, ref_target, r_all, ref_tally,
                                        refine_points=False, analyse=False, spatial=False)
    finally:
        if early is not None:
            session.watchers.remove(early)
            early.close()
    n = len(r_all)
    state = method.state_plan(target.level, target.multiplicity)
    ref_branches = dict(ref.result.branches)
    symmetric = await symmetric_restricted(session, ref_method, species, ref_target, r_all, ref, ref_tally)
    if symmetric is not None:
        ref_branches["restricted"] = symmetric[0]
    tally.merge(ref_tally)

    early_refine: dict = {}

    def on_well(got):
        """The refinement started on the well's restricted points, before the unrestricted branch is in:
        kept only where the finished curve gives the very same coarse minimum (see below)."""
        by_sweep, listed = _level_points(got, ref_branches["restricted"], "restricted", n)
        at = coarse_minimum(assemble.first_well(assemble.flag_outliers(listed, state.outlier_tol_hartree)))
        if at is None:
            return
        partial = protocol.Scan(None, by_sweep, state, target)
        early_refine["at"] = (at[0], at[1].r_bohr)
        task = asyncio.ensure_future(refine_at(session, method, species, target, partial, at[1], at[0], tally))
        task.add_done_callback(lambda f: f.cancelled() or f.exception())  # a dropped one never warns
        early_refine["task"] = task

    async def correlate(branch, indices, urgent=False):
        pts = ref_branches[branch]
        jobs = [(_sweep(pts[i]), pts[i].branch, protocol.raw_point(ref, pts[i])) for i in indices
                if pts[i] is not None and pts[i].trusted]
        return await session.correlate(method, species, target, jobs, parts, tally,
                                       early=early.take if early is not None else None, fine=fitted,
                                       priority=0 if urgent else 1)

    try:
        got = await _correlate_branches(correlate, ref_branches, n, on_well if refine_points else None,
                                        well_only=fitted)
    finally:
        if early is not None:
            early.drop_rest()
    found: dict = {}
    branches: dict = {}
    sweeps: dict = {}
    for branch, pts in ref_branches.items():
        by_sweep, listed = _level_points(got, pts, branch, n)
        found.update(by_sweep)
        for name in {_sweep(p) for p in pts if p is not None}:
            sweeps[name] = [q if q is not None and q.sweep == name else None for q in listed]
        branches[branch] = assemble.flag_outliers(listed, state.outlier_tol_hartree)
    atoms = await atoms_task
    limit, frag_limit, final, notes = correlated_final(species, target, method, atoms, branches, n)
    notes += [f"reference ({ref_level.method}): {note}" for note in ref.result.notes if "above the separated atoms" not in note]
    if symmetric is not None:
        notes.append(symmetric[1])
    result = assemble.ScanResult(
        tuple(final), {k: tuple(v) for k, v in branches.items()}, {k: tuple(v) for k, v in sweeps.items()},
        state.reference[state.primary], ref.result.instability, limit, frag_limit, tally.computed,
        tally.reused, tuple(notes), dict(state.reference), ref.result,
    )
    done = protocol.Scan(result, found, state, target)
    # the refinement and the analysis along the curve side by side: each fills the workers the other leaves
    # idle (a refinement chain is sequential)
    refining = (asyncio.ensure_future(refine(session, method, species, target, done, tally, early_refine))
                if refine_points else None)
    summaries = await protocol.analyse_along(session, method, done, parts) if analyse else ()
    refined = await refining if refining is not None else ()
    return done, refined, summaries


async def refine(session, method, species, target, done, tally: Tally, early: dict | None = None) -> tuple:
    """The refinement at this level: nine reference points 0.01 A apart about this level's coarse minimum
    (a local fit through its well), warm-started from the nearest trusted reference point of the well
    branch, each then computed at this level. ``early``: a refinement already started on the well's
    points alone ("at": (centre, nearest r), "task"); it stands where the finished curve gives the same
    centre and nearest point to the last bit (the fit reads the same points), else it is cancelled and
    the refinement runs here, so the result never depends on which came first."""
    centre = well_minimum(done.result)
    task = (early or {}).get("task")
    if task is not None:
        if centre is not None and early["at"] == (centre[0], centre[1].r_bohr):
            return await task
        task.cancel()
    if centre is None:
        return ()
    return await refine_at(session, method, species, target, done, centre[1], centre[0], tally)


def well_minimum(result):
    """(r_bohr of the coarse minimum by a local fit through the well (:func:`lcao.scan.assemble.well_points`),
    the nearest trusted well point), or None."""
    return coarse_minimum(assemble.well_points(result)[0])


def coarse_minimum(good):
    """(r_bohr of the minimum by a local fit through the trusted well points ``good``, the nearest of them),
    or None."""
    from ..errors import FitError
    from ..fit.local import local_fit

    if len(good) < 3:
        return None
    try:
        re_ = local_fit([p.r_bohr for p in good], [p.energy_hartree for p in good]).re
    except FitError:  # too few points for a quartic, or the lowest at an end: a parabola through the lowest
        low = min(range(len(good)), key=lambda i: good[i].energy_hartree)
        if low in (0, len(good) - 1):
            return None
        re_ = planning.next_centre(good, 0.0)
    return re_, min(good, key=lambda p: abs(p.r_bohr - re_))


async def refine_at(session, method, species, target, done, nearest, centre: float, tally: Tally) -> tuple:
    """Refinement points at this level about ``centre`` (bohr): reference chains warm-started from the
    reference solution behind ``nearest`` (a point of the scan ``done`` at this level, which keeps its
    reference's warm start), then this level's energy at each. CurvePoints, increasing r."""
    from . import protocol

    ref_point = protocol.raw_point(done, nearest)
    ref_level = method.reference_level(target.level)
    ref_target = Target(target.atoms, target.charge, target.multiplicity, ref_level)
    ref_method = method_for(ref_level)

    branch = _reference_branch(nearest)  # the symmetry-adapted restricted one where the curve took it

    async def window(centre_, start):
        specs = planning.refinement(branch, centre_, start)
        merged = await session.chains(ref_method, species, ref_target, specs, tally)
        name = specs[0].sweep
        jobs = [(name, branch, merged[i]) for i in sorted(merged) if merged[i].usable]
        got = await session.correlate(method, species, target, jobs, max(1, session.executor.workers), tally)
        by_index = {i: got[(name, round(p.r_bohr, 8))] for i, p in merged.items() if (name, round(p.r_bohr, 8)) in got}
        listed = assemble.curve_points(by_index, len(specs[0].r_all), nearest.branch, name)
        return assemble.flag_outliers([q for q in listed if q is not None]), merged

    from .refine import moving_refinement

    return await moving_refinement(window, centre, ref_point.warm if ref_point is not None else None)


def correlated_final(species, target, method, atoms, branches: dict, n: int):
    """The separated-atom limits, the final curve of a correlated level (one switch from the restricted to
    the unrestricted branch where both exist) and its notes: (limit, fragment limit, final, notes)."""
    limit = separated_atoms(species, atoms)
    frags = fragment_choices(species, target.spin, atoms)
    frag_limit = min((f.energy_hartree for f in frags), default=None)
    notes = []
    if "restricted" in branches and "unrestricted" in branches:
        final, switch = assemble.switch_once(branches, n)
        notes.append(switch)
    else:
        final = assemble.lowest_over_branches(branches, n)
    notes += assemble.curve_notes(final, limit.energy_hartree, frag_limit, target.multiplicity,
                                  method.capabilities.spin_square, any(a.spin > 0 for a in limit.atoms))
    return limit, frag_limit, final, notes
