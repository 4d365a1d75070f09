"""Morse fit: V(r) = E_min + D_e (1 - exp(-a (r - r_e)))^2 (Morse, Phys. Rev. 34 (1929) 57).

Fitted with ``scipy.optimize.least_squares`` (analytic Jacobian; Levenberg-
Marquardt, or the bounded trust-region method where that leaves the bounds) from
starting guesses taken from a rough quadratic fit; standard errors from the
covariance (J^T J)^-1 s^2 with the exact Jacobian at the solution.
Atomic units throughout.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import FitError


def morse(r, e_min, de, a, re):
    """The Morse potential (same units as the arguments)."""
    return e_min + de * (1.0 - np.exp(-a * (np.asarray(r) - re))) ** 2


def morse_jacobian(r, e_min, de, a, re) -> np.ndarray:
    """Derivatives of :func:`morse` by (e_min, de, a, re) at each distance, shape (len(r), 4).

    With u = exp(-a (r - re)): dV/de_min = 1, dV/dde = (1 - u)^2, dV/da = 2 de (1 - u) u (r - re),
    dV/dre = -2 de (1 - u) u a.
    """
    r = np.asarray(r, float)
    u = np.exp(-a * (r - re))
    w = 2.0 * de * (1.0 - u) * u
    return np.column_stack([np.ones_like(r), (1.0 - u) ** 2, w * (r - re), -w * a])


def morse_levels(we: float, wexe: float, vmax: int) -> np.ndarray:
    """Analytic Morse term values G(v) = we (v+1/2) - wexe (v+1/2)^2, v = 0..vmax (Morse 1929)."""
    v = np.arange(vmax + 1) + 0.5
    return we * v - wexe * v**2


@dataclass(frozen=True)
class MorseFit:
    """Morse parameters with standard errors (atomic units).

    Attributes:
        e_min, de, a, re: parameters (hartree, hartree, 1/bohr, bohr).
        e_min_err, de_err, a_err, re_err: standard errors from the covariance (None where not estimated:
            a derived model's D_e and E_min come from the atoms and the local fit as they are).
        rms, max_abs: residual RMS and largest absolute residual over the window's points, hartree.
        n_points: points in the window; window: (first, last) distance, bohr.
        window_reason: why the window ends where it does.
        kind: 'fitted' (least squares on the window) or 'derived' (from the local constants and D_e,
            :func:`derived_morse`, where the window is too short to fit).
    """

    e_min: float
    de: float
    a: float
    re: float
    e_min_err: float
    de_err: float
    a_err: float
    re_err: float
    rms: float
    max_abs: float
    n_points: int
    window: tuple[float, float]
    window_reason: str
    kind: str = "fitted"


def fit_morse(r, e, window_reason: str = "given") -> MorseFit:
    """Least-squares Morse fit to the points given (the caller picks the window).

    Raises:
        FitError: fewer than 5 points, or the optimisation fails.
    Warns:
        UserWarning: when the minimum lies at the edge of the points or the
            covariance is singular.
    """
    r = np.asarray(r, float)
    e = np.asarray(e, float)
    n = len(r)
    if n < 5:
        raise FitError(f"a Morse fit needs at least 5 points in its window, got {n}")
    i = int(np.argmin(e))
    if i == 0 or i == n - 1:
        warnings.warn("the lowest point lies at the edge of the Morse window; the fit extrapolates", stacklevel=2)
    # rough quadratic about the lowest point for the starting guesses
    sel = slice(max(0, i - 2), min(n, i + 3))
    c = np.polyfit(r[sel] - r[i], e[sel], 2) if len(r[sel]) >= 3 else np.array([0.1, 0.0, e[i]])
    k0 = max(2.0 * c[0], 1e-3)
    re0 = r[i] - c[1] / (2.0 * c[0]) if c[0] > 0 else r[i]
    de0 = max(float(e.max() - e.min()), 1e-3) * 1.5
    a0 = np.sqrt(k0 / (2.0 * de0))
    scale = max(float(np.ptp(e)), 1e-8)

    def resid(p):
        return (morse(r, *p) - e) / scale

    from scipy.optimize import least_squares

    x0 = np.array([float(e.min()), de0, a0, re0])
    lower = [-np.inf, 1e-8, 1e-4, r.min() * 0.5]
    upper = [np.inf, np.inf, 50.0, r.max() * 2.0]
    x0 = np.clip(x0, np.array(lower) + 1e-12, np.array(upper) - 1e-12)
    jac = lambda p: morse_jacobian(r, *p) / scale  # noqa: E731
    tols = {"xtol": 1e-15, "ftol": 1e-15, "gtol": 1e-15, "max_nfev": 20000}
    # Levenberg-Marquardt (MINPACK) first: 1-5 ms against 9-28 ms for the bounded trust-region
    # method on the same start, with the same optimum; kept only where it ends inside the bounds
    sol = least_squares(resid, x0, jac=jac, method="lm", x_scale="jac", **tols)
    if not (sol.success and np.all(sol.x > lower) and np.all(sol.x < upper)):
        sol = least_squares(resid, x0, jac=jac, bounds=(lower, upper), x_scale="jac", **tols)
    if not sol.success:
        raise FitError(f"the Morse fit did not converge: {sol.message}")
    res = (morse(r, *sol.x) - e)
    dof = max(n - 4, 1)
    s2 = float(np.sum(res**2) / dof)
    J = morse_jacobian(r, *sol.x)  # d(model)/dp in hartree, exact
    jtj = J.T @ J
    try:
        cond = np.linalg.cond(jtj)
        if not np.isfinite(cond) or cond > 1e14:
            raise np.linalg.LinAlgError
        cov = np.linalg.inv(jtj) * s2
        errs = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    except np.linalg.LinAlgError:
        warnings.warn("the Morse covariance is singular; standard errors are not available", stacklevel=2)
        errs = np.full(4, np.nan)
    return MorseFit(
        *map(float, sol.x),
        *map(float, errs),
        rms=float(np.sqrt(np.mean(res**2))),
        max_abs=float(np.max(np.abs(res))),
        n_points=n,
        window=(float(r[0]), float(r[-1])),
        window_reason=window_reason,
    )


def derived_morse(e_min: float, de: float, k: float, re: float, k_err: float, re_err: float, r, e,
                  why: str) -> MorseFit:
    """The Morse potential from the local constants where no window is long enough to fit one: D_e from the
    separated atoms, r_e and the force constant k from the local fit, and the range parameter from
    k = 2 D_e a^2, that is a = omega_e sqrt(mu / (2 D_e)) in atomic units (omega_e = sqrt(k / mu); in
    wavenumbers a = omega_e sqrt(2 pi^2 c mu / (D_e h))). Its uncertainty follows from k's alone:
    a_err = a k_err / (2 k). ``r``, ``e`` are the curve points near the well it is compared with
    (residuals only)."""
    a = float(np.sqrt(k / (2.0 * de)))
    r = np.asarray(r, float)
    e = np.asarray(e, float)
    res = morse(r, e_min, de, a, re) - e if len(r) else np.zeros(1)
    return MorseFit(float(e_min), float(de), a, float(re), None, None, float(a * k_err / (2.0 * k)), float(re_err),
                    float(np.sqrt(np.mean(res**2))), float(np.max(np.abs(res))), int(len(r)),
                    (float(r.min()), float(r.max())) if len(r) else (float(re), float(re)),
                    f"derived from the local constants: {why}", "derived")
