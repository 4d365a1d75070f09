"""Default grids that reach the separated atoms.

The default grid ends at three times the sum of covalent radii: short of the atoms for weakly bound pairs,
anions, rare-gas ions and long bonds. When the curve's last trusted point lies more than
:data:`REACH_HARTREE` above its separated atoms and is still falling by more than
:data:`FLAT_HARTREE_PER_TENTH` per 0.1 A, the grid grows outward (the tail's geometric spacing continued,
:data:`STEP_POINTS` points at a time) and the curve is computed again over it (the points already
computed come from the store), up to :data:`CAP_ANGSTROM`. A curve that cannot reach its atoms (a
restricted determinant that dissociates to the wrong limit) is not extended.
"""

from __future__ import annotations

from ..units import angstrom_to_bohr, bohr_to_angstrom
from .grid import MAX_DISTANCE_ANGSTROM, Grid

REACH_HARTREE = 1e-3
FLAT_HARTREE_PER_TENTH = 1e-5
STEP_POINTS = 4
CAP_ANGSTROM = 10.0


def reaches(result) -> bool | None:
    """True when the curve reaches its atoms (or is flat), False when it does not yet, None when it cannot:
    its last point is restricted and no unrestricted branch exists."""
    good = [p for p in result.points if p.trusted]
    if len(good) < 2:
        return True
    last, prev = good[-1], good[-2]
    if last.branch == "restricted" and "unrestricted" not in result.branches and any(
            a.spin > 0 for a in result.limit.atoms):
        return None  # a restricted determinant cannot separate into open-shell atoms
    if abs(last.energy_hartree - result.limit.energy_hartree) <= REACH_HARTREE:
        return True
    tenth = float(angstrom_to_bohr(0.1))
    slope = abs(last.energy_hartree - prev.energy_hartree) / (last.r_bohr - prev.r_bohr) * tenth
    return slope <= FLAT_HARTREE_PER_TENTH


def extended(grid: Grid, cap_angstrom: float = CAP_ANGSTROM) -> Grid | None:
    """The grid with :data:`STEP_POINTS` more points outward (at most to the cap), or None at the cap."""
    r = list(grid.r_bohr)
    cap = float(angstrom_to_bohr(min(cap_angstrom, MAX_DISTANCE_ANGSTROM)))
    if r[-1] >= cap * (1 - 1e-9):
        return None
    ratio = max(r[-1] / r[-2], 1.05) if len(r) > 1 else 1.2
    for _ in range(STEP_POINTS):
        r.append(min(r[-1] * ratio, cap))
        if r[-1] >= cap:
            break
    origin = grid.origin.split(", extended")[0] + f", extended to {bohr_to_angstrom(r[-1]):.2f} A to reach the atoms"
    return Grid(tuple(r), origin)
