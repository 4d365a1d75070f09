"""Orbital analysis at one distance: ``lcao.orbitals('N2', 'HF/6-31G', 1.10)``.

The distance is computed with the protocol of a curve (a one-point grid: the lowest of the sweeps,
stability-followed), or taken from a curve's fitted minimum, and the chosen solution analysed (characters,
bond orders, spin, overlaps) in a task like any other.
"""

from __future__ import annotations

import asyncio
from dataclasses import dataclass

from .errors import InputError
from .levels import Level
from .methods import method_for
from .methods.base import Target
from .pipeline import CurveResult, basis_size, curve_async, resolve_inputs
from .points import CurvePoint
from .scan.grid import Grid, default_grid
from .scan.session import open_session, run_sync
from .species import Species


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


BRANCH_CHOICES = ("well", "lowest", "restricted", "unrestricted", "symmetric")


def orbitals(species, level, r_angstrom: float | None = None, *, at_minimum: bool = False, branch: str = "well",
             multiplicity: int | None = None, charge: int | None = None, grid: Grid | None = None, store=None,
             base: CurveResult | None = None, progress=None, workers: int | None = None, executor=None) -> OrbitalsResult:
    """Orbital characters, bond orders and spin at one distance.

    Args:
        species, level: as for :func:`curve`.
        r_angstrom: the distance; or ``at_minimum=True`` for the fitted r_e of a curve over ``grid``
            (default grid when None).
        branch: 'well' (the restricted solution where a curve has both branches, as the curve fit
            uses it; the symmetry-adapted one where ``base`` follows it; otherwise the lowest), 'lowest',
            'restricted', 'unrestricted' or 'symmetric' (the symmetry-adapted solution where the lowest breaks
            the molecule's spatial symmetry).
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
    from .methods.base import is_symmetric
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
    symmetric = next((k for k in cands if is_symmetric(k)), None)
    if branch == "well" and base is not None and base.branch == "symmetric":
        branch = "symmetric"
    if branch == "symmetric":
        if symmetric is None:
            chosen, why = lowest, "lowest solution (it keeps the molecule's spatial symmetry)"
        else:
            chosen, why = cands[symmetric], f"symmetry-adapted solution ({res.references.get(symmetric, symmetric)})"
    elif branch == "lowest":
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
