"""Curve points and the checks that decide which points can be trusted.

The checks are pure functions on arrays so they can be tested alone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .units import bohr_to_angstrom

#: A point lying this far (hartree) above the smooth curve through its
#: neighbours is flagged: it converged, but to a higher state.
OUTLIER_TOL_HARTREE = 5e-3


@dataclass(frozen=True)
class CurvePoint:
    """One distance of a curve (the lowest trusted solution there, or one branch's).

    Attributes:
        r_bohr: distance, bohr.
        energy_hartree: total energy, hartree (NaN if nothing converged).
        converged: the SCF met its criteria.
        flag: why the point is not trusted (None when trusted).
        branch: 'restricted' or 'unrestricted'.
        sweep: the sweep the value came from.
        cycles: SCF iterations spent on it (in that sweep).
        s2: <S^2> for unrestricted solutions.
        sweep_gap_hartree: highest minus lowest converged energy over the sweeps
            at this distance (0 when they agree, None with one sweep).
        rescue: rung of the rescue ladder that converged it.
        stability: outcome of stability following.
        components: the method's energy components, hartree (e.g. reference and correlation).
    """

    r_bohr: float
    energy_hartree: float
    converged: bool
    flag: str | None
    branch: str
    sweep: str
    cycles: int
    s2: float | None = None
    sweep_gap_hartree: float | None = None
    rescue: str = "none"
    stability: str = "not checked"
    components: dict = field(default_factory=dict, compare=False)

    @property
    def r_angstrom(self) -> float:
        return float(bohr_to_angstrom(self.r_bohr))

    @property
    def trusted(self) -> bool:
        return self.converged and self.flag is None and math.isfinite(self.energy_hartree)

    def as_dict(self) -> dict:
        return {
            "r_angstrom": self.r_angstrom,
            "r_bohr": self.r_bohr,
            "energy_hartree": self.energy_hartree if math.isfinite(self.energy_hartree) else None,
            "converged": self.converged,
            "flag": self.flag,
            "branch": self.branch,
            "sweep": self.sweep,
            "scf_cycles": self.cycles,
            "s2": self.s2,
            "sweep_gap_hartree": self.sweep_gap_hartree,
            "rescue": self.rescue,
            "stability": self.stability,
            "energy_components_hartree": {k: (v if v is not None and math.isfinite(v) else None)
                                          for k, v in self.components.items()},
        }


def _interpolated_at(x, y) -> float:
    """Value at 0 of the polynomial through the points (x, y) (Lagrange form; degree len(x) - 1)."""
    total = 0.0
    for j in range(len(x)):
        w = 1.0
        for m in range(len(x)):
            if m != j:
                w *= x[m] / (x[m] - x[j])
        total += w * y[j]
    return total


def outlier_reasons(r, energy, trusted, tol: float = OUTLIER_TOL_HARTREE) -> list[str | None]:
    """Flag points that lie well above the smooth curve through their neighbours.

    For each trusted interior point, two predictions of its energy are made
    from trusted neighbours only (the point itself excluded): a cubic through
    up to two neighbours on each side and a straight line through the nearest
    neighbour on each side. Their difference estimates how well the grid
    resolves the curve there. A point is an outlier (an SCF that converged to a
    higher stationary point) when it lies more than ``tol`` plus twice that
    difference above the cubic prediction. End points, which would need
    extrapolation, are not judged. The worst outlier is removed and the check
    repeated until nothing more is found.

    Args:
        r, energy: arrays of distances (bohr, increasing) and energies (hartree).
        trusted: boolean array; untrusted points are neither judged nor used.

    Returns:
        One reason string or None per point.
    """
    r = np.asarray(r, float)
    e = np.asarray(energy, float)
    ok = np.asarray(trusted, bool).copy()
    reasons: list[str | None] = [None] * len(r)
    while True:
        idx = np.flatnonzero(ok)
        worst = None
        for j in range(1, len(idx) - 1):
            i = idx[j]
            nb = np.concatenate([idx[max(0, j - 2) : j], idx[j + 1 : j + 3]])
            pred = _interpolated_at(r[nb] - r[i], e[nb])
            lo, hi = idx[j - 1], idx[j + 1]
            w = (r[i] - r[lo]) / (r[hi] - r[lo])
            chord = (1 - w) * e[lo] + w * e[hi]
            allowance = tol + 2.0 * abs(pred - chord)
            d = e[i] - pred
            if d > allowance and (worst is None or d - allowance > worst[2]):
                worst = (i, d, d - allowance)
        if worst is None:
            return reasons
        i, d, _ = worst
        reasons[i] = f"lies {d:.4f} Eh above the curve through its neighbours (a higher SCF solution)"
        ok[i] = False
