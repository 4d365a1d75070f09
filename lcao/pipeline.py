"""The pipeline without the CLI: species -> method -> scan -> analysis -> fit.

``lcao.curve('NO', 'HF/6-31G')`` returns a :class:`CurveResult` (``lcao.orbitals(...)``, in
:mod:`lcao.single_point`, an :class:`lcao.single_point.OrbitalsResult`). Both run their tasks on an
executor (:mod:`lcao.execute`) through a :class:`lcao.scan.session.Session`, which alone writes the store.
The coroutine :func:`curve_async` is the same work for callers that run several curves on one session (a
series). What a computed curve says (counterpoise, verdict, fit) is worked out in :mod:`lcao.outcome`;
text summaries live in :mod:`lcao.report`.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field, replace

from .errors import InputError
from .levels import Level, check_basis_covers, parse_level
from .methods import method_for
from .methods.base import Target
from .points import CurvePoint
from .scan.assemble import ScanResult
from .scan.grid import Grid, default_grid
from .outcome import branch_fit, counterpoise_errors, with_fit
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
    #: the basis-set superposition error per distance (round(r_bohr, 8) -> hartree) when the counterpoise
    #: correction was computed, and why (asked, or turned on by itself)
    counterpoise: dict | None = None
    counterpoise_reason: str | None = None
    #: for an anion, the curve of the species with one electron fewer at the same distances
    neutral: "CurveResult | None" = None
    #: what the curve says about the molecule (:class:`lcao.fit.verdict.Verdict`)
    verdict: object = None
    #: which solution the curve follows where the lowest one breaks the molecule's spatial symmetry:
    #: 'lowest' (the broken-symmetry solution) or 'symmetric' (the symmetry-adapted branch), see
    #: :class:`lcao.scan.assemble.SpatialBreaking`; the other one's fit is ``other_branch``
    #: (:class:`lcao.outcome.BranchFit`)
    branch: str = "lowest"
    other_branch: object = None

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
          executor=None, well_level=None, counterpoise: bool = False, branch: str = "lowest") -> CurveResult:
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
        counterpoise: compute the counterpoise correction and fit the corrected curve
            (:mod:`lcao.scan.counterpoise`); it is turned on by itself for rare-gas pairs and for wells
            shallower than :data:`lcao.outcome.AUTO_COUNTERPOISE_EV`.
        branch: 'lowest' (default) or 'symmetric': where the lowest solution breaks the molecule's
            spatial symmetry, the curve follows it or the symmetry-adapted branch; the other is fitted too.

    Returns:
        CurveResult

    Examples:
        >>> res = curve('H2', 'HF/STO-3G')     # doctest: +SKIP
        >>> round(res.lowest_point().r_angstrom, 2)   # doctest: +SKIP
        0.71
    """
    from .masses import resolve_isotopes

    sp, lv, gr = resolve_inputs(species, level, grid, multiplicity, charge, points)
    check_branch(branch)
    wl = None
    if well_level is not None:
        _, wl, _ = resolve_inputs(sp, well_level, gr, multiplicity)
    iso = resolve_isotopes(sp.atoms, isotopes)
    size = max(basis_size(sp, lv), basis_size(sp, wl) if wl is not None else 0)
    with open_session(store, workers, size, progress, executor) as session:
        return run_sync(curve_async(session, sp, lv, gr, multiplicity, iso, fit=fit, analyse_points=analyse_points,
                                    refine=refine, well_level=wl, counterpoise=counterpoise, branch=branch))


#: the choices of ``branch`` (see :func:`curve`)
BRANCH_CHOICES = ("lowest", "symmetric")


def check_branch(branch: str) -> None:
    if branch not in BRANCH_CHOICES:
        raise InputError(f"unknown branch {branch!r}; choose one of {', '.join(BRANCH_CHOICES)}")


async def curve_async(session, sp, lv, gr, multiplicity, iso, *, fit=True, analyse_points=True, refine=True,
                      well_level=None, counterpoise=False, branch="lowest") -> CurveResult:
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
    notes = []

    async def over(grid):
        return await protocol.scan(session, method, sp, target, grid.r_bohr, tally, refine_points=fit and refine,
                                   analyse=analyse_points and method.capabilities.orbitals,
                                   parts=max(1, session.executor.workers))

    sc, refined, summaries = await over(gr)
    if gr.origin.startswith("default") and len(gr) > 1:
        from .scan import reach

        while reach.reaches(sc.result) is False:
            longer = reach.extended(gr)
            if longer is None:
                notes.append(f"the default grid was extended to its cap of {reach.CAP_ANGSTROM:g} A and the curve"
                             " still lies above its separated atoms there")
                break
            gr = longer
            sc, refined, summaries = await over(gr)
        if gr.origin.endswith("to reach the atoms"):
            notes.append(f"the default grid was {gr.origin.split(', ', 1)[1]}")
    well = None
    if well_level is not None and fit:
        from .scan.on_reference import well_minimum
        from .scan.well import well_scan

        centre = well_minimum(sc.result)
        if centre is not None:
            good = [p for p in refined if p.trusted]
            if len(good) >= 5:
                from .errors import FitError
                from .fit.local import local_fit

                try:
                    centre = (local_fit([p.r_bohr for p in good], [p.energy_hartree for p in good]).re, centre[1])
                except FitError:  # the refinement missed the minimum: the coarse one stands
                    pass
            well = await well_scan(session, sp, well_level, mult, centre[0], tally)
    scanned, other = sc.result, None
    spatial = scanned.spatial
    if spatial is not None:
        views = {"lowest": (scanned, tuple(refined)), "symmetric": (spatial.view(scanned), spatial.refined)}
        (scanned, refined), other = views[branch], views["symmetric" if branch == "lowest" else "lowest"]
    elif branch == "symmetric":
        notes.append("the lowest solution keeps the molecule's spatial symmetry: it is the symmetric branch")
    errors, why, neutral = None, None, None
    if fit:
        both = tuple(refined) + (tuple(other[1]) if other else ())
        errors, why = await counterpoise_errors(session, method, sp, target, scanned, both, counterpoise, tally)
        if why is not None and errors is None:
            notes.append(why)
        if sp.charge < 0:
            neutral = await curve_async(session, Species(sp.atoms, sp.charge + 1), lv, gr, None, iso, fit=False,
                                        analyse_points=False, refine=False)
    execution = {**session.executor.describe(), "processes_used": len(tally.pids | probes.pids)}
    result = CurveResult(sp, lv, gr, mult, source, trials, scanned, isotopes=iso,
                         computed=tally.computed + probes.computed, reused=tally.reused + probes.reused,
                         along=tuple(summaries), refined=tuple(refined), execution=execution,
                         well_level=well_level, well_scan=well[0] if well else None, warnings=tuple(notes),
                         counterpoise=errors, counterpoise_reason=why if errors is not None else None, neutral=neutral,
                         branch=branch if spatial is not None else "lowest")
    if not fit:
        return result
    done = with_fit(result, well[1] if well else None)
    if other is not None:
        done = replace(done, other_branch=branch_fit(result, *other))
    return done
