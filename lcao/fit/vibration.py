"""Vibrational levels from the radial Schrodinger equation.

Solved with the sinc discrete variable representation of Colbert & Miller
(J. Chem. Phys. 96 (1992) 1982) on a uniform grid, with the centrifugal term
J(J+1)/(2 mu r^2) for rotational constants B_v = [E(v, J=1) - E(v, J=0)] / 2.
Atomic units throughout.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAX_GRID = 1600


@dataclass(frozen=True)
class VibrationalLevels:
    """Bound levels of a potential (atomic units).

    Attributes:
        energies: E(v, J=0) - V_min for each bound level, hartree (G(v) with the zero at the minimum).
        bv: B_v for each level, hartree (NaN where J=1 is not bound).
        n_bound: levels below the dissociation limit.
        zpe: zero-point energy G(0), hartree.
        grid_points: DVR grid size; r_range: DVR range (bohr).
    """

    energies: tuple[float, ...]
    bv: tuple[float, ...]
    n_bound: int
    zpe: float
    grid_points: int
    r_range: tuple[float, float]


def dvr_levels(potential, mu: float, r_lo: float, r_hi: float, e_limit: float, v_min: float, j: int = 0, n: int | None = None):
    """Eigenvalues below ``e_limit`` of -1/(2 mu) d2/dr2 + V(r) + J(J+1)/(2 mu r^2).

    Args:
        potential: vectorised callable V(r), hartree, r in bohr.
        mu: reduced mass, electron masses.
        r_lo, r_hi: grid range, bohr (the wavefunctions must vanish there).
        e_limit: dissociation limit, hartree (levels above it are discarded).
        v_min: potential minimum (sets the grid spacing from the largest momentum).
        n: grid size (default from the largest classical momentum, at most MAX_GRID).

    Returns:
        numpy array of eigenvalues (hartree, absolute), increasing.
    """
    from scipy.linalg import eigh

    if n is None:
        p_max = np.sqrt(2.0 * mu * max(e_limit - v_min, 1e-6))
        dx = 0.55 * np.pi / p_max
        n = int(min(MAX_GRID, max(64, np.ceil((r_hi - r_lo) / dx))))
    x = np.linspace(r_lo, r_hi, n)
    dx = x[1] - x[0]
    idx = np.arange(n)
    diff = idx[:, None] - idx[None, :]
    with np.errstate(divide="ignore"):
        t = np.where(diff == 0, np.pi**2 / 3.0, 2.0 / np.where(diff == 0, 1, diff) ** 2)
    t = t * np.where(diff % 2 == 0, 1.0, -1.0) / (2.0 * mu * dx**2)
    v = potential(x) + j * (j + 1) / (2.0 * mu * x**2)
    h = t + np.diag(v)
    w = eigh(h, eigvals_only=True, subset_by_value=(-np.inf, e_limit), driver="evr")
    return np.sort(w), n


def solve_levels(potential, mu: float, r_lo: float, r_hi: float, e_limit: float, v_min: float) -> VibrationalLevels:
    """Bound levels, ZPE and B_v of a potential (see :func:`dvr_levels`)."""
    e0, n = dvr_levels(potential, mu, r_lo, r_hi, e_limit, v_min, 0)
    e1, _ = dvr_levels(potential, mu, r_lo, r_hi, e_limit, v_min, 1, n)
    g = e0 - v_min
    bv = np.full(len(e0), np.nan)
    m = min(len(e0), len(e1))
    bv[:m] = (e1[:m] - e0[:m]) / 2.0
    return VibrationalLevels(
        tuple(float(x) for x in g),
        tuple(float(x) for x in bv),
        int(len(e0)),
        float(g[0]) if len(g) else float("nan"),
        int(n),
        (float(r_lo), float(r_hi)),
    )
