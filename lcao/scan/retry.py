"""Second attempts at the points of a curve that a warm-started sweep could not trust (a method's
``StatePlan.retry_flagged``, used by the multiconfigurational levels): a flagged point computed again from
its neighbour on the other side, and a point that converged off the curve through its neighbours computed
again from the method's own fresh start."""

from __future__ import annotations

from . import plan as planning


def raw_of(found: dict, point):
    """The computed point behind a curve point (its sweep's record at its distance)."""
    for p in found.get(point.sweep, {}).values():
        if abs(p.r_bohr - point.r_bohr) < 1e-9:
            return p
    return None


async def retry_flagged(session, method, species, target, r_all, i0, points, found, tally):
    """Each point of the sweep from equilibrium that came back flagged, computed again from its neighbour
    on the other side (the outer one for the outward half, the inner one for the inward half) where that
    one is trusted; stored under ``<branch>/retry``. Returns the retry's spec (None where nothing needed it);
    its points are in ``found``."""
    todo = []
    for i, p in enumerate(points):
        if p is None or p.converged:
            continue
        j = i + 1 if i >= i0 else i - 1
        if 0 <= j < len(points) and points[j] is not None and points[j].trusted:
            raw = raw_of(found, points[j])
            if raw is not None:
                todo.append((i, raw.warm))
    if not todo:
        return None
    branch = points[todo[0][0]].branch
    specs = [planning.SweepSpec(f"{branch}/retry", branch, tuple(r_all), (i,), warm) for i, warm in todo]
    return await _single_points(session, method, species, target, specs, found, tally)


async def fresh_outliers(session, method, species, target, r_all, points, found, tally):
    """Points that converged but lie off the curve through their neighbours (a higher solution that every
    warm start led to), each computed again from the method's own fresh start; stored under
    ``<branch>/fresh``. Returns the spec (None where no point needed it); its points are in ``found``."""
    todo = [i for i, p in enumerate(points) if p is not None and p.converged and not p.trusted]
    if not todo:
        return None
    branch = points[todo[0]].branch
    specs = [planning.SweepSpec(f"{branch}/fresh", branch, tuple(r_all), (i,), None) for i in todo]
    return await _single_points(session, method, species, target, specs, found, tally)


async def _single_points(session, method, species, target, specs, found, tally):
    """Run one-point chains of one sweep name side by side; their points go to ``found`` under that name."""
    found[specs[0].sweep] = await session.chains(method, species, target, specs, tally)
    return specs[0]
