"""The pipeline without the CLI: species -> driver -> points -> analysis -> curve fit.

``lcao.curve('NO', 'HF/6-31G')`` returns a :class:`CurveResult`; ``lcao.pipeline.orbitals(...)``
an :class:`OrbitalsResult`. Text summaries live in :mod:`lcao.report`.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field

from .errors import InputError
from .levels import Level, check_basis_covers, parse_level
from .points import CurvePoint
from .scan.grid import Grid, default_grid, expected_bond_length_bohr
from .scan.protocol import ScanResult, choose_multiplicity, probe_multiplicities, run_protocol
from .species import Species, parse_species
from .threads import budget, limited, threads_for

log = logging.getLogger(__name__)

CAUTION = (
    "Hartree-Fock energies, and minimal-basis ones above all, are qualitative: dissociation energies at this"
    " level can be badly wrong (often a large fraction too small, or no binding at all). Results that feed a"
    " process, kinetics or safety model need validated data (evaluated tables, higher-level calculations)"
    " and the judgement of licensed practice."
)


@dataclass(frozen=True)
class CurveResult:
    """A potential-energy curve of one species, multiplicity and level.

    Attributes:
        species, level, grid: the inputs.
        multiplicity: the spin multiplicity used (given or chosen).
        multiplicity_source: 'given' or 'lowest of candidates'.
        candidates: energies of the candidate multiplicities tried (empty when given).
        scan: the raw protocol outcome (points, branches, sweeps, limit).
        fit: the curve fit (:class:`lcao.fit.CurveFit`) or None.
        fit_error: why there is no fit, or None.
        isotopes: the isotopes used for the fit (:class:`lcao.masses.Isotopes`).
        computed, reused: points computed in this run and taken from the store
            (the multiplicity probes included).
        along: per point, a dict with bond orders, unpaired electrons and the
            frontier orbitals of the lowest trusted solution (None where the
            point is flagged), or empty when not asked for.
        refined: the refinement points about the minimum used by the local fit.
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


def resolve_inputs(species, level, grid=None, multiplicity=None, charge=None, points=None):
    """Validate and convert the inputs of a curve (no computation).

    Accepts text or objects for species and level; ``grid`` None means the
    default grid from covalent radii (``points`` points).
    """
    sp = species if isinstance(species, Species) else parse_species(species, charge)
    if isinstance(species, Species) and charge is not None and charge != sp.charge:
        raise InputError(f"species {sp.label} has charge {sp.charge:+d} but charge {charge:+d} was given")
    lv = level if isinstance(level, Level) else parse_level(level)
    check_basis_covers(lv, sp.atoms)
    if multiplicity is not None:
        sp.check_multiplicity(multiplicity)
        lv.resolved_reference(multiplicity)
    elif lv.reference == "RHF":
        lv.resolved_reference(sp.lowest_multiplicity())  # RHF of an odd electron count is refused here
    gr = grid if grid is not None else default_grid(*sp.z, **({"points": points} if points else {}))
    _check_electrons_fit(sp, lv)
    return sp, lv, gr


def basis_size(sp: Species, lv: Level) -> int:
    """Number of basis functions of the molecule at this level."""
    from .scan.scf import build_molecule

    return int(build_molecule(sp.atoms, 2.0, lv, 0, sp.nuclear_charge % 2).nao)


def _check_electrons_fit(sp: Species, lv: Level) -> None:
    nao = basis_size(sp, lv)
    if sp.n_electrons > 2 * nao:
        raise InputError(
            f"{sp.label} has {sp.n_electrons} electrons but {lv.basis} offers only {nao} orbitals"
            f" ({2 * nao} electrons) on {sp.formula_neutral}"
        )


def curve(
    species,
    level,
    grid: Grid | None = None,
    *,
    multiplicity: int | None = None,
    charge: int | None = None,
    points: int | None = None,
    store=None,
    fit: bool = True,
    isotopes: str | None = None,
    analyse_points: bool = True,
    refine: bool = True,
    progress=None,
    threads: int | None = None,
) -> CurveResult:
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
        progress: optional callable(sweep, r_bohr) after each point.
        threads: threads for PySCF and BLAS (default :func:`lcao.threads.threads_for`: one
            up to cc-pVTZ size, else this process's share of the cores).

    Returns:
        CurveResult

    Examples:
        >>> res = curve('H2', 'HF/STO-3G')     # doctest: +SKIP
        >>> round(res.lowest_point().r_angstrom, 2)   # doctest: +SKIP
        0.71
    """
    from .store import MemoryStore

    from .masses import resolve_isotopes

    sp, lv, gr = resolve_inputs(species, level, grid, multiplicity, charge, points)
    if multiplicity is None and lv.reference == "RHF":
        multiplicity = sp.lowest_multiplicity()  # RHF has one choice; resolve_inputs refused odd counts
    iso = resolve_isotopes(sp.atoms, isotopes)
    own = store is None
    st = MemoryStore() if own else store
    n_threads = threads if threads is not None else threads_for(basis_size(sp, lv))
    # one thread per process: independent sweeps go to forked processes instead
    sweep_workers = budget() if n_threads == 1 else 1
    try:
        from .scan.scf import kept_basis_files

        with limited(n_threads), kept_basis_files():
            scan, along, refined, trials, mult, source, counts = _compute(
                sp, lv, gr, multiplicity, st, analyse_points, fit and refine, progress, sweep_workers)
    finally:
        if own:
            st.close()
    p_comp, p_reuse, r_comp, r_reuse = counts
    result = CurveResult(
        sp, lv, gr, mult, source, trials, scan, isotopes=iso,
        computed=scan.computed + p_comp + r_comp, reused=scan.reused + p_reuse + r_reuse, along=along,
        refined=refined,
    )
    if fit:
        result = _with_fit(result)
    return result


def clear_caches() -> None:
    """Forget what this process has cached between curves: integrals, orbitals, built molecules, AO labels,
    parsed basis files, symmetry-adapted bases and atom states (benchmarks start each case cold; results never depend on
    these caches)."""
    from . import atoms
    from .analysis import symmetry
    from .scan import scf

    scf.INTEGRALS.clear()
    scf.ORBITALS.clear()
    symmetry._CACHE.clear()
    scf._TEMPLATES.clear()
    scf._LABELS.clear()
    scf._BASIS_FILES.clear()
    atoms._COMPUTED.clear()


def _compute(sp, lv, gr, multiplicity, st, analyse_points, refine, progress, workers=1):
    """Probes, protocol, analysis along the curve and refinement (see :func:`curve`)."""
    if multiplicity is None:
        cands = sp.multiplicity_candidates()
        trials, p_comp, p_reuse = probe_multiplicities(sp, lv, cands, st, expected_bond_length_bohr(*sp.z), progress)
        mult = choose_multiplicity(trials)
        source = "lowest of candidates"
    else:
        trials, p_comp, p_reuse = (), 0, 0
        mult = multiplicity
        source = "given"
    scan = run_protocol(sp, mult, lv, gr, st, progress, workers)
    analysis = None
    if analyse_points:
        jobs = summary_jobs(sp, mult, lv, scan, st)
        analysis = (lambda job: _summary(sp, mult, lv, scan, job), jobs)
    refined, r_comp, r_reuse, along = (), 0, 0, None
    if refine:
        # the analysis along the curve runs beside the refinement, in the same processes
        refined, r_comp, r_reuse, along = _refine(sp, mult, lv, scan, st, progress, workers, analysis)
    if analysis is not None and along is None:
        from .scan.workers import split_map

        along = split_map(analysis[0], analysis[1], workers)
    return scan, tuple(along or ()), refined, trials, mult, source, (p_comp, p_reuse, r_comp, r_reuse)


def _refine(sp, mult, lv, scan, st, progress, workers=1, beside=None):
    """Refinement points about the coarse minimum of the well (empty when there is none inside the
    grid), with the ``beside`` jobs (see :func:`lcao.scan.protocol.refine_minimum`); the jobs'
    results are None when no refinement ran."""
    from .errors import FitError
    from .fit import well_points
    from .fit.local import local_fit
    from .scan.protocol import refine_minimum

    well, branch = well_points(scan)
    if len(well) < 5:
        return (), 0, 0, None
    try:
        lf = local_fit([p.r_bohr for p in well], [p.energy_hartree for p in well])
    except FitError:
        return (), 0, 0, None
    return refine_minimum(sp, mult, lv, scan, st, branch, lf.re, progress, workers, beside)


def point_reference(scan, point) -> str:
    """SCF reference of a curve point's branch."""
    if point.branch == "unrestricted":
        return "UHF"
    return "ROHF" if scan.reference == "ROHF" else "RHF"


def stored_density(store, species, multiplicity, level, point):
    got = store.get_point(species, multiplicity, level, point.sweep, point.r_bohr)
    if got is None:  # pragma: no cover - every point of a scan is stored
        from .errors import StoreError

        raise StoreError(f"point {point.r_angstrom:.4f} A of sweep {point.sweep} is not in the store")
    return got.dm


def summary_jobs(species, multiplicity, level, scan, store) -> list:
    """Per curve point, what :func:`_summary` needs: (point, density, kept orbitals), or None for a
    flagged point."""
    from .scan.scf import ORBITALS
    from .store import point_key

    return [(p, stored_density(store, species, multiplicity, level, p),
             ORBITALS.get(point_key(species, multiplicity, level, p.sweep, p.r_bohr))) if p.trusted else None
            for p in scan.points]


def point_summaries(species, multiplicity, level, scan, store, workers: int = 1) -> tuple:
    """Bond orders and frontier orbitals of every trusted point (None for flagged ones), the
    points split over ``workers`` processes where a fork is possible (:mod:`lcao.scan.workers`)."""
    from .scan.workers import split_map

    jobs = summary_jobs(species, multiplicity, level, scan, store)
    return tuple(split_map(lambda job: _summary(species, multiplicity, level, scan, job), jobs, workers))


def _summary(species, multiplicity, level, scan, job):
    from .analysis.orbitals import analyse_stored
    from .errors import CalculationError

    if job is None:
        return None
    p, dm, orbitals = job
    try:
        a = analyse_stored(species, multiplicity, level, point_reference(scan, p), p.r_bohr, dm, orbitals)
    except CalculationError as exc:
        log.warning("no orbital analysis at %.4f A: %s", p.r_angstrom, exc)
        return None
    return {
        "r_angstrom": p.r_angstrom,
        "branch": p.branch,
        "bond_orders": a.bond_orders(),
        "unpaired_electrons": a.unpaired_electrons,
        "s2": a.s2,
        "frontier": a.frontier(),
        "overlaps": {k: v for k, v in a.overlaps.items() if k != "functions"},
    }


@dataclass(frozen=True)
class OrbitalsResult:
    """Orbital analysis of one point.

    Attributes:
        species, level, multiplicity: as computed; candidates: multiplicities tried.
        point: the analysed curve point (distance, energy, branch, sweep).
        analysis: :class:`lcao.analysis.OrbitalAnalysis`.
        branch_choice: how the branch was chosen.
        other_branches: {branch: energy_hartree} of the other solutions at this distance.
        atom_levels: per atom, a list of (shell label, spin, energy, occupation).
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


def orbitals(
    species,
    level,
    r_angstrom: float | None = None,
    *,
    at_minimum: bool = False,
    branch: str = "well",
    multiplicity: int | None = None,
    charge: int | None = None,
    grid: Grid | None = None,
    store=None,
    base: CurveResult | None = None,
) -> OrbitalsResult:
    """Orbital characters, bond orders and spin at one distance.

    Args:
        species, level: as for :func:`curve`.
        r_angstrom: the distance; or ``at_minimum=True`` for the fitted r_e of a
            curve over ``grid`` (default grid when None).
        branch: 'well' (the restricted solution for a closed-shell singlet under
            HF, as the curve fit uses it; otherwise the lowest), 'lowest',
            'restricted' or 'unrestricted'.
        base: with ``at_minimum``, a curve already computed for this species and
            level (its fit gives r_e); otherwise the curve is computed here.
    """
    from .errors import FitError
    from .store import MemoryStore
    from .units import angstrom_to_bohr

    if branch not in ("well", "lowest", "restricted", "unrestricted"):
        raise InputError(f"branch {branch!r} is not one of well, lowest, restricted, unrestricted")
    if (r_angstrom is None) == (not at_minimum):
        raise InputError("give a distance or ask for the curve minimum, not both or neither")
    sp, lv, _ = resolve_inputs(species, level, grid or Grid((2.0,)), multiplicity, charge)
    own = store is None
    st = MemoryStore() if own else store
    try:
        if at_minimum:
            if base is None:
                base = curve(sp, lv, grid, multiplicity=multiplicity, store=st, analyse_points=False)
            if base.fit is None:
                raise FitError(f"no curve minimum to analyse: {base.fit_error}")
            r_bohr = base.fit.local.re
            multiplicity = base.multiplicity
        else:
            base = None
            r_bohr = float(angstrom_to_bohr(r_angstrom))
        one = curve(sp, lv, Grid((r_bohr,), "single point"), multiplicity=multiplicity, store=st, fit=False, analyse_points=False)
        scan = one.scan
        cands = {name: pts[0] for name, pts in scan.branches.items() if pts and pts[0] is not None and pts[0].trusted}
        lowest = scan.points[0]
        if branch == "lowest":
            chosen, why = lowest, "lowest solution"
        elif branch in ("restricted", "unrestricted"):
            if branch not in cands:
                raise InputError(f"there is no trusted {branch} solution at this distance; computed: {', '.join(cands) or 'none'}")
            chosen, why = cands[branch], f"{branch} branch, as asked"
        else:
            if "restricted" in cands and "unrestricted" in cands:
                chosen, why = cands["restricted"], "restricted branch (the well of a closed-shell singlet)"
            else:
                chosen, why = lowest, "lowest solution"
        if not chosen.trusted:
            from .errors import CalculationError

            raise CalculationError(f"the solution at {chosen.r_angstrom:.4f} A is flagged: {chosen.flag}")
        from .analysis.orbitals import analyse_stored
        from .scan.scf import ORBITALS
        from .store import point_key

        mult = one.multiplicity
        analysis = analyse_stored(sp, mult, lv, point_reference(scan, chosen), chosen.r_bohr,
                                  stored_density(st, sp, mult, lv, chosen),
                                  ORBITALS.get(point_key(sp, mult, lv, chosen.sweep, chosen.r_bohr)))
        others = {k: v.energy_hartree for k, v in cands.items() if v is not chosen}
        atoms = atom_levels(scan.limit, lv)
    finally:
        if own:
            st.close()
    return OrbitalsResult(sp, lv, mult, base.candidates if base else one.candidates, chosen, analysis, why, others, atoms,
                          scan.limit.energy_hartree, base)


def atom_levels(limit, level) -> tuple:
    """Orbital energies of the separated atoms: per atom [(shell, spin, energy, occupation)]."""
    import numpy as np

    from .scan.scf import build_atom, make_scf

    out = []
    for st in limit.atoms:
        mol = build_atom(st.symbol, level, st.charge, st.spin)
        if mol.nelectron == 0:
            out.append(())
            continue
        mf = make_scf(mol, "UHF")
        dm = np.asarray(st.dm)
        fock = mf.get_fock(dm=dm)
        s = mol.intor("int1e_ovlp")
        from scipy.linalg import eigh

        labels = mol.ao_labels(fmt=False)
        rows = []
        for k, spin in enumerate(("alpha", "beta")):
            e, c = eigh(fock[k], s)
            occ_n = int(round(float(np.trace(dm[k] @ s))))
            for j in range(len(e)):
                w = c[:, j] * (s @ c[:, j])
                shell = labels[int(np.argmax(np.abs(w)))][2]
                rows.append((shell, spin, float(e[j]), 1.0 if j < occ_n else 0.0))
        out.append(tuple(rows))
    return tuple(out)


def _with_fit(result: CurveResult) -> CurveResult:
    from dataclasses import replace

    from .fit import fit_curve

    from .errors import FitError

    try:
        f = fit_curve(result)
    except FitError as exc:
        return replace(result, fit_error=str(exc))
    return replace(result, fit=f)
