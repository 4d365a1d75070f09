"""The state-following scan protocol, stage by stage (asks the method, never compares its names).

For a state whose primary branch is checked for an instability (a closed-shell singlet under ``HF``:
restricted, checked towards unrestricted), one sweep from equilibrium follows the primary branch, with
the separated atoms computed beside it; from the first unstable point outward the secondary branch is
computed too (a sweep outward from the instability and one inward from the atoms). Both branches are
kept and labelled.

Otherwise the separated atoms come first, then a sweep from equilibrium and one from the atoms per
charge placement run side by side. At each distance the lower converged energy is kept and the gap
between the sweeps recorded (:mod:`lcao.scan.assemble`).

Where the method's plan says ``atoms_sweep_if_needed`` (Hartree-Fock, DFT, the active-space levels), the
sweeps from the atoms run only after the sweep that heads for them (from the instability, or from
equilibrium) and only where it leaves a point untrusted or ends more than 1 mEh above the separated atoms:
on the twelve curves of ``benchmarks/numbers.py`` the curves, refined points and r_e are the same with or
without them, and they cost a sixth of a Hartree-Fock curve's work.

Refinement points about the coarse minimum and the orbital analysis along the curve come last, side
by side. Each stage's sweeps are independent and go to the executor together.
"""

from __future__ import annotations

import asyncio
import math
from dataclasses import dataclass, replace

from ..atoms import fragment_choices, needed_states, separated_atoms
from ..methods.base import Target
from ..units import bohr_to_angstrom
from . import assemble, plan as planning, refine, retry
from .grid import expected_bond_length_bohr
from .session import Tally


@dataclass(frozen=True)
class MultiplicityTrial:
    """Energy of one candidate multiplicity at the probe distances (the lowest of them)."""

    multiplicity: int
    energy_hartree: float
    converged: bool
    reference: str
    r_bohr: float

    def as_dict(self) -> dict:
        return {
            "multiplicity": self.multiplicity,
            "energy_hartree": self.energy_hartree if math.isfinite(self.energy_hartree) else None,
            "converged": self.converged,
            "reference": self.reference,
            "r_angstrom": float(bohr_to_angstrom(self.r_bohr)),
        }


@dataclass(frozen=True)
class Scan:
    """A finished scan: the assembled curve and the points as computed (with their warm starts and
    the orbitals kept from this run), for the analysis that follows."""

    result: assemble.ScanResult
    found: dict  # sweep name -> {index: PointResult}
    plan: object
    target: Target


async def probe_multiplicities(session, method, species, level, candidates, tally: Tally) -> tuple:
    """Lowest energy of each candidate multiplicity over the probe distances (one task per distance)."""
    r_guess = expected_bond_length_bohr(*species.z)
    distances = planning.probe_distances(r_guess)

    async def one(mult):
        target = Target(species.atoms, species.charge, mult, level)
        state = method.state_plan(level, mult)
        got = await asyncio.gather(*(session.probe(method, species, target, r, state, tally) for r in distances))
        best = None
        for r, (p, q) in zip(distances, got):
            e, conv, ref = p.energy, p.usable, state.reference[state.primary]
            if q is not None and q.usable and (not conv or q.energy < e):
                e, conv, ref = q.energy, True, state.reference[state.secondary]
            trial = MultiplicityTrial(mult, e, conv, ref, r)
            if conv and (best is None or not best.converged or e < best.energy_hartree):
                best = trial
            elif best is None:
                best = trial
        return best

    return tuple(await asyncio.gather(*(one(m) for m in candidates)))


def choose_multiplicity(trials) -> int:
    good = [t for t in trials if t.converged and math.isfinite(t.energy_hartree)]
    if not good:
        from ..errors import CalculationError

        raise CalculationError("no candidate multiplicity converged at the probe distances")
    return min(good, key=lambda t: t.energy_hartree).multiplicity


async def scan(session, method, species, target: Target, r_all, tally: Tally, *, refine_points: bool = True,
               analyse: bool = True, parts: int = 1, spatial: bool = True, fitted: bool = False) -> tuple:
    """Run the protocol over the distances ``r_all`` (bohr) and assemble the curve; with
    ``refine_points`` the refinement points about the well's minimum and with ``analyse`` the orbital
    analysis along the curve as well. With ``spatial``, where the lowest solution breaks the molecule's
    spatial symmetry, its symmetry-adapted branch is computed too (:func:`symmetric_branch`). With
    ``fitted``, the grid's own points feed a fit (the window of a well level): a level on a reference
    converges them as tightly as refinement points (:meth:`lcao.methods.Method.on_reference`).

    Each piece of work starts as soon as what it needs is there: the secondary branch's sweeps once the
    first unstable point is known (the inward half of the primary sweep usually finds it first), the
    refinement once the well branch is complete (before the secondary branch's sweeps end), the
    analysis once the curve is assembled.

    Returns:
        (Scan, refinement CurvePoints, per-point analysis summaries)
    """
    if target.level.cbs is not None:
        from . import cbs

        return await cbs.scan(session, method, species, target, r_all, tally, refine_points=refine_points,
                              analyse=analyse, parts=parts, fitted=fitted)
    if method.reference_level(target.level) is not None:
        from . import on_reference

        return await on_reference.scan(session, method, species, target, r_all, tally, refine_points=refine_points,
                                       analyse=analyse, parts=parts, fitted=fitted)
    n = len(r_all)
    state = method.state_plan(target.level, target.multiplicity)
    i0 = planning.equilibrium_index(r_all, expected_bond_length_bohr(*species.z))
    states = needed_states(species, target.spin)
    found: dict = {}
    notes: list[str] = []
    instability = None
    branches: dict = {}
    sweeps: dict = {}
    later: list = []  # the secondary branch's sweeps, running

    def start(spec):
        async def go():
            got = await session.chain(method, species, target, spec, tally)
            found.setdefault(spec.sweep, {}).update(got)
            return got
        return asyncio.ensure_future(go())

    def record(name, branch):
        sweeps[name] = assemble.curve_points(found.get(name, {}), n, branch, name)
        return sweeps[name]

    primary = state.primary
    refining = None
    if state.instability_check:
        eq = planning.from_equilibrium(primary, r_all, i0, check_instability=True)
        running = [start(s) for s in eq]
        towards = state.secondary or ("unrestricted" if primary == "restricted" else "restricted")
        k = None
        for t in reversed(running):  # the inward half first: an unstable point there comes first
            got = await t
            k = min((i for i, p in got.items() if p.converged and p.unstable_towards == towards), default=k)
            if k is not None:
                break
        if k is not None:
            instability = (r_all[k - 1] if k > 0 else float("nan"), r_all[k])
            if state.secondary:
                second = state.secondary
                point_k = found[eq[0].sweep][k]
                begin = await _instability_start(session, method, species, target, point_k, second, r_all[k])
                later.append((second, planning.from_instability(second, r_all, k, begin)))
                later[-1] += (start(later[-1][1]),)
            else:
                notes.append(assemble.instability_note(state, instability[1]))
        # the atoms after the sweep from the instability: a worker that took them first would hold that sweep
        # back, and where the sweeps from the atoms run only if needed, nothing waits for them before the end
        atoms_task = asyncio.ensure_future(session.atoms(method, target.level, states))

        def sweeps_from_atoms(atoms):
            if k is None or not state.secondary:
                return []
            return [planning.from_atoms(state.secondary, r_all, f.label,
                                        method.fragment_start(target, f.a, f.b, f.flip), k)
                    for f in fragment_choices(species, target.spin, atoms)]

        if not state.atoms_sweep_if_needed:
            later += [(state.secondary, spec, start(spec)) for spec in sweeps_from_atoms(await atoms_task)]
        await asyncio.gather(*running)
        name = eq[0].sweep
        branches[primary] = assemble.flag_outliers(record(name, primary))
        if k is not None and state.secondary and refine_points:  # the well is the primary branch, complete now
            refining = asyncio.ensure_future(refine.well_refinement(session, method, species, target, found, branches,
                                                                    primary, tally))
        atoms = await atoms_task
        frags = fragment_choices(species, target.spin, atoms)
        from_atoms = sweeps_from_atoms(atoms) if state.atoms_sweep_if_needed else []
        if later or from_atoms:
            await asyncio.gather(*(t for _, _, t in later))
            if from_atoms and (not later or _atoms_sweep_needed(
                    record(later[0][1].sweep, state.secondary)[k:], separated_atoms(species, atoms).energy_hartree,
                    state.outlier_tol_hartree)):
                more = [(state.secondary, spec, start(spec)) for spec in from_atoms]
                await asyncio.gather(*(t for _, _, t in more))
                later += more
            lists = [record(spec.sweep, br) for br, spec, _ in later]
            branches[state.secondary] = assemble.flag_outliers(assemble.lowest(lists, n))
    else:
        atoms_task = asyncio.ensure_future(session.atoms(method, target.level, states))
        specs = planning.from_equilibrium(primary, r_all, i0)
        running = [start(s) for s in specs]
        atoms = await atoms_task
        frags = fragment_choices(species, target.spin, atoms)

        def from_atoms():
            more = [planning.from_atoms(primary, r_all, f.label, method.fragment_start(target, f.a, f.b, f.flip))
                    for f in frags]
            specs.extend(more)
            return [start(s) for s in more]

        if state.from_atoms and not state.atoms_sweep_if_needed:
            running += from_atoms()
        await asyncio.gather(*running)
        if state.from_atoms and state.atoms_sweep_if_needed and _atoms_sweep_needed(
                record(specs[0].sweep, primary), separated_atoms(species, atoms).energy_hartree,
                state.outlier_tol_hartree):
            await asyncio.gather(*from_atoms())
        names = list(dict.fromkeys(s.sweep for s in specs))
        if state.retry_flagged:
            so_far = assemble.lowest([record(nm, primary) for nm in names], n)
            retried = await retry.retry_flagged(session, method, species, target, r_all, i0, record(names[0], primary),
                                                found, tally, so_far)
            if retried is not None:
                found.setdefault(retried.sweep, {})
                names.append(retried.sweep)
        tol = state.outlier_tol_hartree
        branches[primary] = assemble.flag_outliers(assemble.lowest([record(nm, primary) for nm in names], n), tol)
        if state.retry_flagged:
            fresh = await retry.fresh_outliers(session, method, species, target, r_all, branches[primary], found, tally)
            if fresh is not None:
                found.setdefault(fresh.sweep, {})
                names.append(fresh.sweep)
                branches[primary] = assemble.flag_outliers(assemble.lowest([record(nm, primary) for nm in names], n),
                                                           tol)

    limit = separated_atoms(species, atoms)
    frag_limit = min((f.energy_hartree for f in frags), default=None)
    final = assemble.lowest_over_branches(branches, n)
    notes += assemble.curve_notes(final, limit.energy_hartree, frag_limit, target.multiplicity,
                                  method.capabilities.spin_square, any(a.spin > 0 for a in limit.atoms))
    result = assemble.ScanResult(
        tuple(final), {k: tuple(v) for k, v in branches.items()}, {k: tuple(v) for k, v in sweeps.items()},
        state.reference[primary], instability, limit, frag_limit, tally.computed, tally.reused, tuple(notes),
        dict(state.reference),
    )
    done = Scan(result, found, state, target)
    if refining is None and refine_points:
        well_branch = "restricted" if ("restricted" in branches and "unrestricted" in branches) else None
        refining = asyncio.ensure_future(refine.well_refinement(session, method, species, target, found, branches,
                                                                well_branch, tally, final))
    along = asyncio.ensure_future(analyse_along(session, method, done, parts)) if analyse else None
    if spatial:
        found_sym = await symmetric_branch(session, method, species, target, r_all, i0, final, found, tally,
                                           refine_points)
        if found_sym is not None:
            sp, pts, sweep = found_sym
            refs = {**result.references, sp.symmetric_branch:
                    f"{result.references.get(sp.broken_branch, sp.broken_branch)} ({sp.point_group})"}
            result = replace(result, branches={**result.branches, sp.symmetric_branch: tuple(pts)},
                             sweeps={**result.sweeps, sweep: tuple(pts)}, references=refs, spatial=sp,
                             notes=result.notes + (assemble.spatial_note(sp, refs),))
            done = replace(done, result=result)
    refined = await refining if refining is not None else ()
    summaries = await along if along is not None else ()
    return done, refined, summaries


async def symmetric_branch(session, method, species, target, r_all, i0, final, found, tally, refine_points):
    """Where a trusted point of the curve breaks the molecule's spatial symmetry (its total density off the
    symmetry blocks by more than :data:`lcao.scan.assemble.SPATIAL_BREAK_ELECTRONS`), the symmetry-adapted
    copy of that point's branch over the whole grid, from equilibrium, and its refinement.

    Returns:
        (:class:`lcao.scan.assemble.SpatialBreaking`, the symmetric branch's points, its sweep's name), or
        None where nothing breaks the symmetry, where breaking it lowers the energy by less than
        :data:`lcao.scan.assemble.SPATIAL_MATTERS_HARTREE`, or where the method has no symmetry-adapted branch.
    """
    from ..methods.molecule import point_group

    first = next((p for p in final if p is not None and p.trusted), None)
    if first is None or method.symmetric_branch(target.level, first.branch) is None:
        return None
    off = await off_symmetry(session, method, target, final, found)
    broken = [i for i, x in enumerate(off) if x is not None and x > assemble.SPATIAL_BREAK_ELECTRONS]
    if not broken:
        return None
    base = final[min(broken, key=lambda i: final[i].energy_hartree)].branch
    name = method.symmetric_branch(target.level, base)
    if name is None:
        return None
    sweep, pts = await symmetric_sweep(session, method, species, target, r_all, i0, name, found, tally)
    homonuclear = species.atoms[0] == species.atoms[1]
    what = ("inversion symmetry (g/u): the two atoms no longer carry the same density" if homonuclear
            else "cylindrical symmetry (sigma/pi separation)")
    sp = assemble.spatial_breaking(final, pts, off, base, name, point_group(species.atoms), what)
    if sp.largest_gap_hartree < assemble.SPATIAL_MATTERS_HARTREE:
        return None
    if refine_points:
        refined = await refine.well_refinement(session, method, species, target, found, {name: pts}, name, tally)
        sp = replace(sp, refined=refined)
    return sp, pts, sweep


async def off_symmetry(session, method, target, points, found) -> list:
    """Per curve point of ``points`` (None allowed), the electrons its solution carries off the molecule's
    spatial symmetry (one :class:`lcao.scan.tasks.SpatialCheckTask` for all; the computed points behind them
    in ``found``); None where a point is not trusted or not measured."""
    from .tasks import SpatialCheckTask

    items = [(i, retry.raw_of(found, p)) for i, p in enumerate(points) if p is not None and p.trusted]
    items = [(i, raw) for i, raw in items if raw is not None]
    off = [None] * len(points)
    if items:
        measured = (await session.run(SpatialCheckTask(method, target, tuple(raw for _, raw in items)))).value
        for (i, _), x in zip(items, measured):
            off[i] = x
    return off


async def symmetric_sweep(session, method, species, target, r_all, i0, name, found, tally, inward=True):
    """The symmetry-adapted branch ``name``'s sweep from equilibrium (outward, and inward with ``inward``), its
    points recorded in ``found`` (the analysis finds them there): (the sweep's name, its CurvePoints per index,
    outliers flagged)."""
    specs = planning.from_equilibrium(name, r_all, i0)
    if not inward:
        specs = specs[:1]
    got: dict = {}
    for part in await asyncio.gather(*(session.chain(method, species, target, s, tally) for s in specs)):
        got.update(part)
    sweep = specs[0].sweep
    found[sweep] = got
    return sweep, assemble.flag_outliers(assemble.curve_points(got, len(r_all), name, sweep))


async def _instability_start(session, method, species, target, point, branch, r_bohr):
    """The warm start along the instability at the first unstable point: the one found when the point
    was computed in this run, else recomputed from its stored warm start (only when the secondary
    sweep's first point is not stored already)."""
    from .tasks import InstabilityStartTask

    if point.branch_start is not None:
        return point.branch_start
    name = f"{branch}/from-instability"
    if session.stored_point(species, target.multiplicity, target.level, name, r_bohr) is not None:
        return None
    return (await session.run(InstabilityStartTask(method, target, point, branch))).value


def raw_point(scan: Scan, point):
    """The computed :class:`lcao.methods.PointResult` behind a curve point."""
    return retry.raw_of(scan.found, point)


def _atoms_sweep_needed(points, limit_hartree: float, tol: float) -> bool:
    """Whether a sweep from equilibrium needs the sweep from the atoms beside it
    (``StatePlan.atoms_sweep_if_needed``): a point missing or untrusted, or the longest distance more than
    :data:`lcao.methods.base.ATOMS_GAP_HARTREE` above the separated atoms."""
    from ..methods.base import ATOMS_GAP_HARTREE

    flagged = assemble.flag_outliers(points, tol)
    if any(p is None or not p.trusted for p in flagged):
        return True
    return not flagged[-1].energy_hartree - limit_hartree <= ATOMS_GAP_HARTREE


async def analyse_along(session, method, scan_: Scan, parts: int) -> tuple:
    """Bond orders, unpaired electrons, <S^2>, frontier orbitals and overlaps of every trusted point
    (None for flagged ones), in ``parts`` tasks."""
    from .tasks import AnalysisTask

    items = []
    for p in scan_.result.points:
        raw = raw_point(scan_, p) if p.trusted else None
        items.append(None if raw is None else (raw, p.branch))
    todo = [(i, it) for i, it in enumerate(items) if it is not None]
    if not todo:
        return tuple(None for _ in items)
    size = -(-len(todo) // max(1, parts))
    chunks = [todo[k:k + size] for k in range(0, len(todo), size)]
    done = await asyncio.gather(*(session.run(AnalysisTask(method, scan_.target, tuple(it for _, it in c)))
                                  for c in chunks))
    out: list = [None] * len(items)
    for c, d in zip(chunks, done):
        for (i, _), summary in zip(c, d.value):
            out[i] = summary
    return tuple(out)
