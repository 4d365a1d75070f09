"""Which points to compute, as plain values (pure functions, no computation).

A curve is computed as sweeps: chains of warm-started points over the grid. :class:`SweepSpec` says
which distances a chain visits in which order and where it starts from; the driver
(:mod:`lcao.scan.protocol`) turns specs into tasks, stage by stage:

* ``from-equilibrium``: from the grid point nearest the expected bond length (the method's own first
  guess) outward to the last point, and, as a second chain seeded with that first point, inward;
* ``from-atoms``: from the last point inward, starting from the separated atoms (one per charge
  placement for ions);
* ``from-instability``: the secondary branch from the first point where the primary one is unstable
  towards it, outward;
* ``refine``: nine points 0.01 A apart about the coarse minimum, outward and inward from the middle.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..units import angstrom_to_bohr

#: probe distances for the multiplicity choice, as fractions of the expected bond length: the sum of
#: covalent radii overestimates multiple and ionic bonds (N2 1.42 A against 1.10 A, LiF 1.85 against 1.56)
PROBE_FACTORS = (0.8, 0.9, 1.0)
#: refinement about the coarse minimum: points at k * REFINE_STEP_ANGSTROM, k = -REFINE_HALF..REFINE_HALF
REFINE_STEP_ANGSTROM = 0.01
REFINE_HALF = 4


@dataclass(frozen=True)
class SweepSpec:
    """One chain of a sweep over the distances ``r_all``.

    Attributes:
        sweep: the sweep's name ('restricted/from-equilibrium', ...); its points are stored under it.
        branch: the branch it follows.
        r_all: the distances of the curve (bohr); indices: the chain's visiting order.
        start: the warm start of the first point (None: the method's own guess).
        seed: an index whose point starts the chain without belonging to it.
        check_instability: check every point for an instability towards the other branch.
    """

    sweep: str
    branch: str
    r_all: tuple
    indices: tuple
    start: dict | None = field(default=None, repr=False, compare=False)
    seed: int | None = None
    check_instability: bool = False


def equilibrium_index(r_all, r_expected: float) -> int:
    """The grid index nearest the expected bond length."""
    return min(range(len(r_all)), key=lambda i: abs(r_all[i] - r_expected))


def from_equilibrium(branch: str, r_all, i0: int, check_instability: bool = False) -> list[SweepSpec]:
    """The sweep from equilibrium: outward from ``i0``, and inward seeded with the point at ``i0``."""
    name = f"{branch}/from-equilibrium"
    n = len(r_all)
    out = [SweepSpec(name, branch, tuple(r_all), tuple(range(i0, n)), None, None, check_instability)]
    if i0 > 0:
        out.append(SweepSpec(name, branch, tuple(r_all), tuple(range(i0 - 1, -1, -1)), None, i0, check_instability))
    return out


def from_atoms(branch: str, r_all, label: str, start, down_to: int = 0) -> SweepSpec:
    """A sweep from the separated atoms: the last point inward to index ``down_to``."""
    n = len(r_all)
    return SweepSpec(f"{branch}/{label}", branch, tuple(r_all), tuple(range(n - 1, down_to - 1, -1)), start)


def from_instability(branch: str, r_all, k: int, start) -> SweepSpec:
    """The secondary branch from the first unstable index ``k`` outward."""
    return SweepSpec(f"{branch}/from-instability", branch, tuple(r_all), tuple(range(k, len(r_all))), start)


def probe_distances(r_expected: float) -> tuple[float, ...]:
    return tuple(r_expected * f for f in PROBE_FACTORS)


def refinement(branch: str, r_centre: float, start) -> list[SweepSpec]:
    """The refinement chains about ``r_centre`` (bohr), outward and inward from the middle point."""
    step = float(angstrom_to_bohr(REFINE_STEP_ANGSTROM))
    r_new = tuple(r_centre + k * step for k in range(-REFINE_HALF, REFINE_HALF + 1))
    name = f"{branch}/refine"
    mid = REFINE_HALF
    return [SweepSpec(name, branch, r_new, tuple(range(mid, len(r_new))), start),
            SweepSpec(name, branch, r_new, tuple(range(mid - 1, -1, -1)), start, mid)]


def next_centre(points, step: float) -> float:
    """Where the minimum lies when it is outside the points (bohr): the vertex of a parabola through the
    three lowest (at most two windows beyond the lowest point), or one window beyond the lowest point
    where the three are not convex."""
    import numpy as np

    low = min(range(len(points)), key=lambda i: points[i].energy_hartree)
    pick = sorted(range(len(points)), key=lambda i: abs(i - low))[:3]
    r = np.array([points[i].r_bohr for i in pick])
    e = np.array([points[i].energy_hartree for i in pick])
    a, b, _ = np.polyfit(r, e, 2)
    r_low = points[low].r_bohr
    if a > 0:
        return float(np.clip(-b / (2 * a), r_low - 4 * REFINE_HALF * step, r_low + 4 * REFINE_HALF * step))
    return r_low + (REFINE_HALF * step if low == len(points) - 1 else -REFINE_HALF * step)


#: where the refinement's fit finds no minimum inside its nine points, they move this many times at most
MAX_REFINE_MOVES = 2


def expected_points(n: int, plan, placements: int = 1, probes: int = 0) -> int:
    """About how many points a curve of ``n`` grid points computes (for an estimate of its time): the sweeps
    of the plan (the secondary branch over about two thirds of the grid), the refinement and the probes."""
    if plan.instability_check:
        sweeps = n + (int(2 * n / 3) * (1 + placements) if plan.secondary else 0)
    else:
        sweeps = n * (1 + (placements if plan.from_atoms else 0))
    return sweeps + 2 * REFINE_HALF + 1 + 3 * probes


def pieces(indices, size: int) -> list[tuple]:
    """``indices`` in consecutive pieces of at most ``size`` (a long chain split over several tasks)."""
    size = max(1, int(size))
    return [tuple(indices[k:k + size]) for k in range(0, len(indices), size)]
