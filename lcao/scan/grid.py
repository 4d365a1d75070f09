"""Distance grids. Input in angstrom at the boundary, stored in bohr."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GridError
from ..units import angstrom_to_bohr, bohr_to_angstrom

#: Shortest distance accepted, angstrom: below it the nuclei nearly coincide
#: and the basis functions of the two atoms are almost linearly dependent.
MIN_DISTANCE_ANGSTROM = 0.25
#: Longest distance accepted, angstrom.
MAX_DISTANCE_ANGSTROM = 30.0
MAX_POINTS = 2000
DEFAULT_POINTS = 30


@dataclass(frozen=True)
class Grid:
    """Bond distances of a scan, in bohr, strictly increasing.

    Attributes:
        r_bohr: the distances.
        origin: how the grid was made ('default from covalent radii', 'user range', ...).
    """

    r_bohr: tuple[float, ...]
    origin: str = "user"

    def __post_init__(self):
        r = self.r_bohr
        if len(r) < 1:
            raise GridError("a grid needs at least one distance")
        if any(not math.isfinite(x) for x in r):
            raise GridError(f"grid distances must be finite numbers, got {r!r}")
        if any(b <= a for a, b in zip(r, r[1:])):
            raise GridError("grid distances must increase strictly")
        lo = bohr_to_angstrom(r[0])
        hi = bohr_to_angstrom(r[-1])
        if lo < MIN_DISTANCE_ANGSTROM:
            raise GridError(
                f"distance {lo:.4g} A is too short: the nuclei nearly coincide;"
                f" the shortest allowed is {MIN_DISTANCE_ANGSTROM} A"
            )
        if hi > MAX_DISTANCE_ANGSTROM:
            raise GridError(f"distance {hi:.4g} A is longer than the {MAX_DISTANCE_ANGSTROM} A allowed")

    @property
    def r_angstrom(self) -> tuple[float, ...]:
        return tuple(float(bohr_to_angstrom(x)) for x in self.r_bohr)

    def __len__(self):
        return len(self.r_bohr)

    def as_dict(self) -> dict:
        return {
            "origin": self.origin,
            "points": len(self),
            "from_angstrom": self.r_angstrom[0],
            "to_angstrom": self.r_angstrom[-1],
        }


def _number(value, name: str) -> float:
    if isinstance(value, bool):
        raise GridError(f"{name} must be a number of angstrom, got {value!r}")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise GridError(f"{name} must be a number of angstrom, got {value!r}") from None
    if not math.isfinite(x):
        raise GridError(f"{name} must be a finite number of angstrom, got {value!r}")
    return x


def range_grid(r_from, r_to, points) -> Grid:
    """Evenly spaced grid from ``r_from`` to ``r_to`` angstrom with ``points`` points."""
    a = _number(r_from, "--from")
    b = _number(r_to, "--to")
    if isinstance(points, bool):
        raise GridError(f"--points must be a whole number, got {points!r}")
    try:
        n = int(points)
        if n != float(points):
            raise ValueError
    except (TypeError, ValueError):
        raise GridError(f"--points must be a whole number, got {points!r}") from None
    if a <= 0 or b <= 0:
        raise GridError(f"distances must be positive: --from {a:g} A, --to {b:g} A")
    if n < 1 or n > MAX_POINTS:
        raise GridError(f"--points must be between 1 and {MAX_POINTS}, got {n}")
    if n == 1:
        if a != b:
            raise GridError(f"one point needs --from equal to --to, got {a:g} and {b:g} A")
        return Grid((float(angstrom_to_bohr(a)),), "user single point")
    if b <= a:
        raise GridError(f"--to ({b:g} A) must be greater than --from ({a:g} A)")
    r = angstrom_to_bohr(np.linspace(a, b, n))
    return Grid(tuple(float(x) for x in r), "user range")


def expected_bond_length_bohr(z_a: int, z_b: int) -> float:
    """Sum of covalent radii (PySCF's table, bohr): the starting guess for r_e."""
    from pyscf.data import radii

    return float(radii.COVALENT[z_a] + radii.COVALENT[z_b])


def default_grid(z_a: int, z_b: int, points: int = DEFAULT_POINTS, r_from=None, r_to=None) -> Grid:
    """Grid from covalent radii: 60 % of the points from 0.62 to 1.5 times the
    expected bond length (the sum of single-bond covalent radii, which
    overestimates multiple bonds: N2 1.42 A against 1.10 A), the rest spaced
    geometrically out to 3 times it (at least 2.5 times, as a dissociation
    curve needs).

    ``r_to`` (angstrom) moves its far end: points beyond it are dropped, and it is reached with the
    tail's geometric spacing continued (the default grid extended outward); ``r_from`` likewise moves
    its near end, continuing the well's even spacing inward."""
    if points < 6:
        raise GridError(f"the default grid needs at least 6 points, got {points}")
    re_ = expected_bond_length_bohr(z_a, z_b)
    n_well = int(round(0.6 * points))
    well = np.linspace(0.62 * re_, 1.5 * re_, n_well)
    n_tail = points - n_well
    ratio = (3.0 / 1.5) ** (1.0 / n_tail)
    tail = 1.5 * re_ * ratio ** np.arange(1, n_tail + 1)
    r = np.concatenate([well, tail])
    lo = angstrom_to_bohr(MIN_DISTANCE_ANGSTROM)
    r = r[r >= lo]
    origin = "default from covalent radii"
    if r_to is not None:
        end = float(angstrom_to_bohr(_number(r_to, "--to")))
        r = r[r < end * (1 - 1e-9)]
        last = r[-1] if len(r) else end
        while len(r) and last * ratio < end * (1 - 1e-3):
            last *= ratio
            r = np.append(r, last)
        r = np.append(r, end)
        origin += f", to {r_to} A"
    if r_from is not None:
        start = float(angstrom_to_bohr(_number(r_from, "--from")))
        step = well[1] - well[0]
        r = r[r > start * (1 + 1e-9)]
        first = r[0] if len(r) else start
        extra = []
        while first - step > start * (1 + 1e-3):
            first -= step
            extra.append(first)
        r = np.concatenate([[start], sorted(extra), r])
        origin += f", from {r_from} A"
    return Grid(tuple(float(x) for x in r), origin)
