"""Local polynomial fit near the minimum and Dunham's relations.

The energy near the minimum is fitted with a quartic polynomial in the
displacement, ``V = V0 + k/2 x^2 + c3 x^3 + c4 x^4`` with ``x = r - r_e``.
Spectroscopic constants follow from Dunham (Phys. Rev. 41 (1932) 721), in
Herzberg's conventions (Spectra of Diatomic Molecules, 1950): with
``a0 = k r_e^2 / 2``, ``a1 = 2 c3 r_e / k`` and ``a2 = 2 c4 r_e^2 / k``,

* omega_e = sqrt(k / mu)
* B_e = hbar^2 / (2 mu r_e^2)
* omega_e x_e = -(3 B_e / 2) (a2 - 5 a1^2 / 4)
* alpha_e = -(6 B_e^2 / omega_e) (1 + a1)

Everything here is in atomic units (hartree, bohr, electron masses); the
callers convert at the edges.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import FitError
from ..units import bohr_to_angstrom

#: Points nearest the minimum used by the local fit, and by the alternative
#: fit whose spread estimates the truncation error.
LOCAL_POINTS = 7
ALT_POINTS = 9


@dataclass(frozen=True)
class LocalFit:
    """Quartic fit about the minimum (atomic units).

    Attributes:
        re: equilibrium distance, bohr; re_err its uncertainty.
        e_min: energy at re, hartree.
        k: force constant V''(re), hartree/bohr^2; k_err its uncertainty.
        c3, c4: cubic and quartic coefficients, hartree/bohr^3 and /bohr^4.
        n_points: points used; r_window: (first, last) distance used, bohr.
        rms: RMS residual, hartree.
    """

    re: float
    re_err: float
    e_min: float
    k: float
    k_err: float
    c3: float
    c4: float
    n_points: int
    r_window: tuple[float, float]
    rms: float


def _quartic_about_min(r, e, guess):
    """Fit and re-expand about the stationary point nearest ``guess``."""
    x = r - guess
    deg = min(4, len(r) - 1)
    coef = np.polyfit(x, e, deg)
    d1 = np.polyder(coef)
    roots = np.roots(d1)
    roots = roots[np.abs(roots.imag) < 1e-12].real
    d2 = np.polyder(d1)
    roots = [t for t in roots if np.polyval(d2, t) > 0]
    if not roots:
        raise FitError("the points near the lowest one have no minimum (the curve is not convex there)")
    t = min(roots, key=abs)
    if not (x.min() <= t <= x.max()):
        raise FitError("the fitted minimum lies outside the points used for it")
    # Taylor coefficients about the minimum
    taylor = []
    c = coef
    fact = 1.0
    for n in range(5):
        taylor.append(np.polyval(c, t) / fact if len(c) else 0.0)
        c = np.polyder(c) if len(c) > 1 else np.array([0.0])
        fact *= n + 1
    resid = e - np.polyval(coef, x)
    return guess + t, taylor, float(np.sqrt(np.mean(resid**2)))


def local_fit(r, e) -> LocalFit:
    """Quartic fit over the ``LOCAL_POINTS`` points nearest the lowest one.

    Args:
        r, e: trusted distances (bohr, increasing) and energies (hartree).

    Raises:
        FitError: fewer than 5 points, or the lowest point at an end of the
            range (the grid misses the minimum).
    """
    r = np.asarray(r, float)
    e = np.asarray(e, float)
    if len(r) < 5:
        raise FitError(f"a local fit needs at least 5 trusted points, got {len(r)}")
    i = int(np.argmin(e))
    if i == 0 or i == len(r) - 1:
        side = "shortest" if i == 0 else "longest"
        raise FitError(
            f"the lowest energy is at the {side} distance ({float(bohr_to_angstrom(r[i])):.3f} A): the grid misses the minimum"
        )
    fits = []
    for npts in (LOCAL_POINTS, ALT_POINTS):
        order = np.argsort(np.abs(np.arange(len(r)) - i), kind="stable")[: min(npts, len(r))]
        sel = np.sort(order)
        re_, taylor, rms = _quartic_about_min(r[sel], e[sel], r[i])
        fits.append((re_, taylor, rms, sel))
    (re_, taylor, rms, sel), (re2, taylor2, _, _) = fits
    k = 2.0 * taylor[2]
    k2 = 2.0 * taylor2[2]
    return LocalFit(
        re=float(re_),
        re_err=float(abs(re_ - re2)),
        e_min=float(taylor[0]),
        k=float(k),
        k_err=float(abs(k - k2)),
        c3=float(taylor[3]),
        c4=float(taylor[4]) if len(taylor) > 4 else 0.0,
        n_points=int(len(sel)),
        r_window=(float(r[sel][0]), float(r[sel][-1])),
        rms=rms,
    )


def dunham_constants(re: float, k: float, c3: float, c4: float, mu: float) -> dict:
    """Spectroscopic constants (hartree) from the Taylor coefficients (atomic units).

    Returns:
        dict with we, wexe, be, alpha_e (all hartree; convert to cm-1 at the edge).
    """
    if k <= 0:
        raise FitError(f"the force constant is not positive ({k:.3g} Eh/bohr^2)")
    we = np.sqrt(k / mu)
    be = 1.0 / (2.0 * mu * re**2)
    a1 = 2.0 * c3 * re / k
    a2 = 2.0 * c4 * re**2 / k
    wexe = -(1.5 * be) * (a2 - 1.25 * a1**2)
    alpha = -(6.0 * be**2 / we) * (1.0 + a1)
    return {"we": float(we), "wexe": float(wexe), "be": float(be), "alpha_e": float(alpha)}
