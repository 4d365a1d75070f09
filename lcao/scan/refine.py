"""The refinement about the coarse minimum of a curve's well: nine points 0.01 A apart, warm-started from
the nearest well point, and moved where a local fit finds the minimum outside them (the local fit of
:mod:`lcao.fit.local` then uses them)."""

from __future__ import annotations

from . import assemble, plan as planning, retry
from .session import Tally


async def well_refinement(session, method, species, target, found, branches, well_branch, tally: Tally, final=None) -> tuple:
    """Nine points 0.01 A apart about the coarse minimum of the well (a local fit through its trusted
    points), warm-started from the nearest trusted well point, outward then inward (stored under
    ``<branch>/refine``). Returns CurvePoints, increasing r (untrusted ones flagged), or () when the well
    has too few points or no minimum inside the grid."""
    from ..errors import FitError
    from ..fit.local import local_fit

    pts = branches[well_branch] if well_branch is not None else final
    good = [p for p in pts if p is not None and p.trusted]
    if len(good) < 5:
        return ()
    try:
        lf = local_fit([p.r_bohr for p in good], [p.energy_hartree for p in good])
    except FitError:
        return ()
    nearest = min(good, key=lambda p: abs(p.r_bohr - lf.re))
    raw = retry.raw_of(found, nearest)

    async def window(centre, start):
        specs = planning.refinement(nearest.branch, centre, start)
        merged = await session.chains(method, species, target, specs, tally)
        name = specs[0].sweep
        return assemble.flag_outliers(assemble.curve_points(merged, len(specs[0].r_all), nearest.branch, name)), merged

    return await moving_refinement(window, lf.re, raw.warm if raw is not None else None)


async def moving_refinement(window, centre: float, start) -> tuple:
    """The refinement windows about ``centre``: ``window(centre, start)`` computes nine points (CurvePoints,
    and their computed points by index); where a local fit finds no minimum inside them, the next window is
    centred where the minimum lies (:func:`lcao.scan.plan.next_centre`), started from the lowest point so
    far (at most :data:`lcao.scan.plan.MAX_REFINE_MOVES` moves). Returns every window's points, increasing r."""
    from ..errors import FitError
    from ..fit.local import local_fit
    from ..units import angstrom_to_bohr

    step = float(angstrom_to_bohr(planning.REFINE_STEP_ANGSTROM))
    kept: dict = {}
    for move in range(planning.MAX_REFINE_MOVES + 1):
        points, raws = await window(centre, start)
        for p in points:
            if p is not None:
                kept[round(p.r_bohr, 8)] = p
        good = [p for p in points if p is not None and p.trusted]
        if len(good) < 5 or move == planning.MAX_REFINE_MOVES:
            break
        try:
            local_fit([p.r_bohr for p in good], [p.energy_hartree for p in good])
            break
        except FitError:
            centre = planning.next_centre(good, step)
            lowest = min(good, key=lambda p: p.energy_hartree)
            start = next((q.warm for q in raws.values() if abs(q.r_bohr - lowest.r_bohr) < 1e-9), start)
    return tuple(kept[k] for k in sorted(kept))
