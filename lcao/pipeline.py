"""The pipeline without the CLI: species -> method -> scan -> analysis -> fit.

``lcao.curve('NO', 'HF/6-31G')`` returns a :class:`CurveResult`; ``lcao.orbitals(...)`` an
:class:`OrbitalsResult`. Both run their tasks on an executor (:mod:`lcao.execute`) through a
:class:`lcao.scan.session.Session`, which alone writes the store. The coroutines
:func:`curve_async` and :func:`orbitals_async` are the same work for callers that run several curves
on one session (a series). Text summaries live in :mod:`lcao.report`.
"""

from __future__ import annotations

import asyncio
import logging
from dataclasses import dataclass, field, replace

from .errors import InputError
from .levels import Level, check_basis_covers, parse_level
from .methods import method_for
from .methods.base import Target
from .points import CurvePoint
from .scan.assemble import ScanResult
from .scan.grid import Grid, default_grid
from .scan.session import Tally, open_session, run_sync
from .species import Species, parse_species

log = logging.getLogger(__name__)

def caution_for(level) -> str:
    """The caution for numbers at ``level`` (each method words its own, see :meth:`lcao.methods.Method.caution`)."""
    return method_for(level).caution(level)


@dataclass(frozen=True)
class CurveResult:
    """A potential-energy curve of one species, multiplicity and level.

    Attributes:
        species, level, grid: the inputs.
        multiplicity: the spin multiplicity used (given or chosen).
        multiplicity_source: 'given' or 'lowest of candidates'.
        candidates: energies of the candidate multiplicities tried (empty when given).
        scan: the assembled protocol outcome (points, branches, sweeps, limit).
        fit: the curve fit (:class:`lcao.fit.CurveFit`) or None; fit_error: why there is none.
        isotopes: the isotopes used for the fit (:class:`lcao.masses.Isotopes`).
        computed, reused: points computed in this run and taken from the store (probes included).
        along: per point, a dict with bond orders, unpaired electrons and the frontier orbitals of the
            lowest trusted solution (None where the point is flagged), or empty when not asked for.
        refined: the refinement points about the minimum used by the local fit.
        execution: what ran the work (executor, workers, the processes that computed points).
    """

    species: Species
    level: Level
    grid: Grid
    multiplicity: int
    multiplicity_source: str
    candidates: tuple
    scan: ScanResult
    fit: object = None
    fit_error: str | None = None
    isotopes: object = None
    computed: int = 0
    reused: int = 0
    along: tuple = ()
    refined: tuple = ()
    warnings: tuple[str, ...] = field(default=())
    execution: dict = field(default_factory=dict)
    #: the higher level of the well and separated atoms, with its scan about the minimum (or None)
    well_level: Level | None = None
    well_scan: ScanResult | None = None

    @property
    def points(self) -> tuple[CurvePoint, ...]:
        return self.scan.points

    @property
    def limit_energy_hartree(self) -> float:
        return self.scan.limit.energy_hartree

    @property
    def trusted_points(self) -> tuple[CurvePoint, ...]:
        return tuple(p for p in self.scan.points if p.trusted)

    def lowest_point(self) -> CurvePoint | None:
        good = self.trusted_points
        return min(good, key=lambda p: p.energy_hartree) if good else None

    @property
    def caution(self) -> str:
        return caution_for(self.level)


def resolve_inputs(species, level, grid=None, multiplicity=None, charge=None, points=None):
    """Validate and convert the inputs of a curve (no computation).

    Accepts text or objects for species and level; ``grid`` None means the default grid from covalent
    radii (``points`` points). The level's method refuses a state it cannot do here.
    """
    sp = species if isinstance(species, Species) else parse_species(species, charge)
    if isinstance(species, Species) and charge is not None and charge != sp.charge:
        raise InputError(f"species {sp.label} has charge {sp.charge:+d} but charge {charge:+d} was given")
    lv = level if isinstance(level, Level) else parse_level(level)
    check_basis_covers(lv, sp.atoms)
    if multiplicity is not None:
        sp.check_multiplicity(multiplicity)
    method_for(lv).check(lv, sp, multiplicity)
    gr = grid if grid is not None else default_grid(*sp.z, **({"points": points} if points else {}))
    _check_electrons_fit(sp, lv)
    return sp, lv, gr


def basis_size(sp: Species, lv: Level) -> int:
    """Number of basis functions of the molecule at this level."""
    return method_for(lv).basis_size(Target(sp.atoms, sp.charge, sp.lowest_multiplicity(), lv))


def _check_electrons_fit(sp: Species, lv: Level) -> None:
    nao = basis_size(sp, lv)
    if sp.n_electrons > 2 * nao:
        raise InputError(
            f"{sp.label} has {sp.n_electrons} electrons but {lv.basis} offers only {nao} orbitals"
            f" ({2 * nao} electrons) on {sp.formula_neutral}"
        )


def curve(species, level, grid: Grid | None = None, *, multiplicity: int | None = None, charge: int | None = None,
          points: int | None = None, store=None, fit: bool = True, isotopes: str | None = None,
          analyse_points: bool = True, refine: bool = True, progress=None, workers: int | None = None,
          executor=None, well_level=None) -> CurveResult:
    """Compute a potential-energy curve with the state-following protocol.

    Args:
        species: text such as ``'NO+'`` or a :class:`Species`.
        level: text such as ``'HF/6-31G'`` or a :class:`Level`.
        grid: a :class:`Grid` (default: from covalent radii).
        multiplicity: 2S+1; None chooses the lowest-energy candidate near equilibrium.
        charge: net charge (alternative to a suffix in ``species``).
        points: number of points of the default grid.
        store: a :class:`lcao.store.Store`; None uses a throw-away in-memory store.
        fit: fit the curve (local polynomial and Morse) when possible.
        isotopes: mass numbers per atom for the fit, e.g. ``'13,16'`` (default most abundant).
        analyse_points: bond orders and frontier orbitals at every trusted point.
        refine: add nine points 0.01 A apart about the coarse minimum for the local fit.
        progress: optional callable(label, points) after each finished task.
        workers: processes (default: this process's share of the cores; 1 keeps everything here).
        executor: an :class:`lcao.execute.Executor` to run on (it stays open), instead of ``workers``.
        well_level: a higher level (text or :class:`Level`) for the well and the separated atoms: r_e,
            the vibrational and rotational constants and D_e come from it (:mod:`lcao.scan.well`).

    Returns:
        CurveResult

    Examples:
        >>> res = curve('H2', 'HF/STO-3G')     # doctest: +SKIP
        >>> round(res.lowest_point().r_angstrom, 2)   # doctest: +SKIP
        0.71
    """
    from .masses import resolve_isotopes

    sp, lv, gr = resolve_inputs(species, level, grid, multiplicity, charge, points)
    wl = None
    if well_level is not None:
        _, wl, _ = resolve_inputs(sp, well_level, gr, multiplicity)
    iso = resolve_isotopes(sp.atoms, isotopes)
    size = max(basis_size(sp, lv), basis_size(sp, wl) if wl is not None else 0)
    with open_session(store, workers, size, progress, executor) as session:
        return run_sync(curve_async(session, sp, lv, gr, multiplicity, iso, fit=fit, analyse_points=analyse_points,
                                    refine=refine, well_level=wl))


async def curve_async(session, sp, lv, gr, multiplicity, iso, *, fit=True, analyse_points=True, refine=True,
                      well_level=None) -> CurveResult:
    """The work of :func:`curve` on a session (inputs already resolved)."""
    from .scan import protocol

    method = method_for(lv)
    probes = Tally()
    if multiplicity is None:
        multiplicity = method.fixed_multiplicity(lv, sp)
    if multiplicity is None:
        trials = await protocol.probe_multiplicities(session, method, sp, lv, sp.multiplicity_candidates(), probes)
        mult, source = protocol.choose_multiplicity(trials), "lowest of candidates"
    else:
        trials, mult, source = (), multiplicity, "given"
    target = Target(sp.atoms, sp.charge, mult, lv)
    tally = Tally()
    sc, refined, summaries = await protocol.scan(
        session, method, sp, target, gr.r_bohr, tally, refine_points=fit and refine,
        analyse=analyse_points and method.capabilities.orbitals, parts=max(1, session.executor.workers))
    well = None
    if well_level is not None and fit:
        from .scan.on_reference import well_minimum
        from .scan.well import well_scan

        centre = well_minimum(sc.result)
        if centre is not None:
            if refined:
                from .fit.local import local_fit

                good = [p for p in refined if p.trusted]
                if len(good) >= 5:
                    centre = (local_fit([p.r_bohr for p in good], [p.energy_hartree for p in good]).re, centre[1])
            well = await well_scan(session, sp, well_level, mult, centre[0], tally)
    execution = {**session.executor.describe(), "processes_used": len(tally.pids | probes.pids)}
    result = CurveResult(sp, lv, gr, mult, source, trials, sc.result, isotopes=iso,
                         computed=tally.computed + probes.computed, reused=tally.reused + probes.reused,
                         along=tuple(summaries), refined=tuple(refined), execution=execution,
                         well_level=well_level, well_scan=well[0] if well else None)
    return _with_fit(result, well[1] if well else None) if fit else result


def _with_fit(result: CurveResult, well_points=None) -> CurveResult:
    from .errors import FitError
    from .fit import fit_curve, with_well_level
    from .fit.spin_orbit import correction
    from .scan.assemble import fit_input

    try:
        f = fit_curve(fit_input(result.scan, result.refined, result.isotopes, result.species.atoms))
    except FitError as exc:
        return replace(result, fit_error=str(exc))
    if result.well_level is not None:
        if not well_points:
            return replace(result, fit_error=f"no trusted points of the well at {result.well_level.text}")
        try:
            f = with_well_level(f, [p.r_bohr for p in well_points], [p.energy_hartree for p in well_points],
                                result.well_scan.limit.energy_hartree, result.well_level.text, result.level.text)
        except FitError as exc:
            return replace(result, fit_error=f"the well at {result.well_level.text}: {exc}")
    limit = result.well_scan.limit if result.well_scan is not None else result.scan.limit
    return replace(result, fit=replace(f, spin_orbit=correction([(a.symbol, a.charge) for a in limit.atoms])))


@dataclass(frozen=True)
class OrbitalsResult:
    """Orbital analysis of one point.

    Attributes:
        species, level, multiplicity: as computed; candidates: multiplicities tried.
        point: the analysed curve point (distance, energy, branch, sweep).
        analysis: :class:`lcao.analysis.OrbitalAnalysis`.
        branch_choice: how the branch was chosen.
        other_branches: {branch: energy_hartree} of the other solutions at this distance.
        atom_levels: per atom, a tuple of (shell label, spin, energy, occupation).
        curve: the curve the equilibrium distance came from (``at_minimum``), else None.
    """

    species: Species
    level: Level
    multiplicity: int
    candidates: tuple
    point: CurvePoint
    analysis: object
    branch_choice: str
    other_branches: dict
    atom_levels: tuple
    limit_energy_hartree: float
    curve: CurveResult | None = None


BRANCH_CHOICES = ("well", "lowest", "restricted", "unrestricted")


def orbitals(species, level, r_angstrom: float | None = None, *, at_minimum: bool = False, branch: str = "well",
             multiplicity: int | None = None, charge: int | None = None, grid: Grid | None = None, store=None,
             base: CurveResult | None = None, progress=None, workers: int | None = None, executor=None) -> OrbitalsResult:
    """Orbital characters, bond orders and spin at one distance.

    Args:
        species, level: as for :func:`curve`.
        r_angstrom: the distance; or ``at_minimum=True`` for the fitted r_e of a curve over ``grid``
            (default grid when None).
        branch: 'well' (the restricted solution where a curve has both branches, as the curve fit
            uses it; otherwise the lowest), 'lowest', 'restricted' or 'unrestricted'.
        base: with ``at_minimum``, a curve already computed for this species and level (its fit gives
            r_e); otherwise the curve is computed here.
    """
    if branch not in BRANCH_CHOICES:
        raise InputError(f"branch {branch!r} is not one of {', '.join(BRANCH_CHOICES)}")
    if (r_angstrom is None) == (not at_minimum):
        raise InputError("give a distance or ask for the curve minimum, not both or neither")
    sp, lv, _ = resolve_inputs(species, level, grid or Grid((2.0,)), multiplicity, charge)
    if not method_for(lv).capabilities.orbitals:
        raise InputError(f"{lv.method} gives no orbitals for an analysis")
    with open_session(store, workers, basis_size(sp, lv), progress, executor) as session:
        return run_sync(orbitals_async(session, sp, lv, r_angstrom, at_minimum=at_minimum, branch=branch,
                                       multiplicity=multiplicity, grid=grid, base=base))


async def orbitals_async(session, sp, lv, r_angstrom=None, *, at_minimum=False, branch="well", multiplicity=None,
                         grid=None, base=None) -> OrbitalsResult:
    """The work of :func:`orbitals` on a session (inputs already resolved)."""
    from .errors import CalculationError, FitError
    from .masses import resolve_isotopes
    from .scan import protocol
    from .scan.tasks import AnalysisTask, AtomLevelsTask
    from .units import angstrom_to_bohr

    iso = resolve_isotopes(sp.atoms)
    if at_minimum:
        if base is None:
            gr = grid if grid is not None else default_grid(*sp.z)
            base = await curve_async(session, sp, lv, gr, multiplicity, iso, analyse_points=False)
        if base.fit is None:
            raise FitError(f"no curve minimum to analyse: {base.fit_error}")
        r_bohr, multiplicity = base.fit.local.re, base.multiplicity
    else:
        base = None
        r_bohr = float(angstrom_to_bohr(r_angstrom))
    one = await curve_async(session, sp, lv, Grid((r_bohr,), "single point"), multiplicity, iso, fit=False,
                            analyse_points=False)
    res = one.scan
    cands = {name: pts[0] for name, pts in res.branches.items() if pts and pts[0] is not None and pts[0].trusted}
    lowest = res.points[0]
    if branch == "lowest":
        chosen, why = lowest, "lowest solution"
    elif branch in ("restricted", "unrestricted"):
        if branch not in cands:
            raise InputError(f"there is no trusted {branch} solution at this distance; computed: {', '.join(cands) or 'none'}")
        chosen, why = cands[branch], f"{branch} branch, as asked"
    elif "restricted" in cands and "unrestricted" in cands:
        chosen, why = cands["restricted"], "restricted branch (the well of a closed-shell singlet)"
    else:
        chosen, why = lowest, "lowest solution"
    if not chosen.trusted:
        raise CalculationError(f"the solution at {chosen.r_angstrom:.4f} A is flagged: {chosen.flag}")
    method = method_for(lv)
    target = Target(sp.atoms, sp.charge, one.multiplicity, lv)
    point = session.stored_point(sp, one.multiplicity, lv, chosen.sweep, chosen.r_bohr)
    kept = _kept_point(session, one, chosen)
    analysis_done, levels_done = await asyncio.gather(
        session.run(AnalysisTask(method, target, ((kept or point, chosen.branch),), summary=False)),
        session.run(AtomLevelsTask(method, lv, tuple(res.limit.atoms))),
    )
    analysis = analysis_done.value[0]
    if analysis is None:
        raise CalculationError(f"no orbital analysis at {chosen.r_angstrom:.4f} A")
    others = {k: v.energy_hartree for k, v in cands.items() if v is not chosen}
    return OrbitalsResult(sp, lv, one.multiplicity, base.candidates if base else one.candidates, chosen, analysis, why,
                          others, levels_done.value, res.limit.energy_hartree, base)


def _kept_point(session, one: CurveResult, chosen):
    """The point as computed in this run (with its orbitals), when the session still holds it."""
    from .scan.session import kept_key

    return session.kept.get(kept_key(one.species, one.multiplicity, one.level, chosen.sweep, chosen.r_bohr))
