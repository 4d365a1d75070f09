"""Second attempts at the points of a curve that a warm-started sweep could not trust (a method's
``StatePlan.retry_flagged``, used by the multiconfigurational levels): a flagged point computed again from
the nearest trusted point on the other side (a chain through a run of such points), and a point that
converged off the curve through its neighbours computed again from the method's own fresh start."""

from __future__ import annotations

from . import plan as planning


def raw_of(found: dict, point):
    """The computed point behind a curve point (its sweep's record at its distance)."""
    for p in found.get(point.sweep, {}).values():
        if abs(p.r_bohr - point.r_bohr) < 1e-9:
            return p
    return None


async def retry_flagged(session, method, species, target, r_all, i0, points, found, tally, best=None):
    """Each run of points of the sweep from equilibrium that came back flagged, computed again as one chain
    from the nearest trusted point beyond it on the other side (the outer side for the outward half, the
    inner side for the inward half), that point taken from ``best`` (the lowest trusted point per distance
    over the sweeps so far; default ``points``); stored under ``<branch>/retry``. A chain rather than
    single points, because near a crossing of states several neighbours in a row can fail, and each retried
    point is the best start for the next. Returns the retry's spec (None where nothing needed it); its
    points are in ``found``."""
    best = points if best is None else best
    n = len(points)
    bad = [p is not None and not p.converged for p in points]
    specs = []
    i = 0
    while i < n:
        if not bad[i]:
            i += 1
            continue
        j = i
        while j + 1 < n and bad[j + 1] and (j + 1 >= i0) == (i >= i0):
            j += 1
        if i >= i0:  # outward half: from beyond the run, inwards
            k = next((m for m in range(j + 1, n) if best[m] is not None and best[m].trusted), None)
            order = tuple(range(k - 1, i - 1, -1)) if k is not None else ()
        else:  # inward half: from inside the run, outwards
            k = next((m for m in range(i - 1, -1, -1) if best[m] is not None and best[m].trusted), None)
            order = tuple(range(k + 1, j + 1)) if k is not None else ()
        raw = raw_of(found, best[k]) if k is not None else None
        if raw is not None and order:
            specs.append((order, raw.warm))
        i = j + 1
    if not specs:
        return None
    branch = points[specs[0][0][-1]].branch
    specs = [planning.SweepSpec(f"{branch}/retry", branch, tuple(r_all), order, warm) for order, warm in specs]
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
    """Run the chains of one sweep name side by side; their points go to ``found`` under that name."""
    found[specs[0].sweep] = await session.chains(method, species, target, specs, tally)
    return specs[0]
