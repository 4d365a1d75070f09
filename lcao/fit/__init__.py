"""From a curve to spectroscopic constants: local fit, Morse fit, vibrational levels, D_e.

:func:`fit_curve` takes a :class:`lcao.pipeline.CurveResult` and returns a
:class:`CurveFit` with a fixed set of fields, units in the field names of
:meth:`CurveFit.as_dict`.

Which points are fitted:

* the local fit (r_e, k, omega_e, omega_e x_e, B_e, alpha_e) uses the
  refinement points about the minimum (nine points 0.01 A apart, computed by
  the pipeline) when there are at least seven trusted ones, else the grid
  points of the well branch: for a closed-shell singlet under ``HF`` the restricted branch (the
  state Hartree-Fock tables report), otherwise the lowest trusted points;
* the Morse fit uses the lowest trusted points from the inner wall (up to
  max(2 D_e, 0.05 Eh) above the minimum) outward, and stops before a kink: the first point
  where the unrestricted branch lies more than ``SPLIT_HARTREE`` below the
  restricted one, or where <S^2> jumps between neighbouring points (by more
  than ``S2_JUMP`` and three times the change over the adjacent intervals);
* the vibrational levels are solved on a cubic spline through all lowest
  trusted points, which reach the separated-atom limit.

Three dissociation energies, never mixed: ``de`` from the separated atoms at
the same level (primary), ``morse.de`` (a model extrapolation), and
``d0 = de - zpe``.
"""

from __future__ import annotations

import logging
import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import FitError
from ..units import HARTREE_CM1, HARTREE_EV, bohr_to_angstrom
from .local import LocalFit, dunham_constants, local_fit
from .morse import MorseFit, fit_morse, morse_levels
from .vibration import VibrationalLevels, solve_levels

log = logging.getLogger(__name__)

SPLIT_HARTREE = 1e-3
#: the Morse window takes inner-wall points up to max(INNER_WALL_DE * D_e, INNER_WALL_MIN_HARTREE) above the minimum
INNER_WALL_DE = 2.0
INNER_WALL_MIN_HARTREE = 0.05
#: a Morse fit whose residual RMS exceeds this fraction of its D_e is reported as a poor model
MORSE_POOR_FRACTION = 0.02
S2_JUMP = 0.2
#: levels listed in the outputs
N_LEVELS_REPORTED = 10

DE_CAUTION = (
    "Hartree-Fock dissociation energies are poor (typically a large fraction too small, or unbound) and the"
    " Morse asymptote is an extrapolation; do not use either in a kinetics, process or safety model without"
    " validated data."
)


@dataclass(frozen=True)
class CurveFit:
    """Fitted constants of one curve (atomic units inside; see :meth:`as_dict`).

    Attributes:
        local: the quartic fit about the minimum.
        constants: we, wexe, be, alpha_e (hartree).
        mu: reduced mass (electron masses); isotopes: :class:`lcao.masses.Isotopes`.
        bound: False when the minimum lies above the separated atoms.
        de: D_e from the separated atoms (hartree), None when unbound.
        morse: the Morse fit, None when unbound or not possible; morse_error: why not.
        levels: vibrational levels, None when unbound.
        d0: D_0 = D_e - ZPE (hartree).
        minimum_above_limit: hartree, when unbound.
        warnings: messages from the fits.
    """

    local: LocalFit
    constants: dict
    mu: float
    isotopes: object
    bound: bool
    de: float | None
    morse: MorseFit | None
    morse_error: str | None
    levels: VibrationalLevels | None
    d0: float | None
    minimum_above_limit: float | None
    well_branch: str
    symbols: tuple[str, str] = ("A", "B")
    warnings: tuple[str, ...] = field(default=())

    def as_dict(self) -> dict:
        a = bohr_to_angstrom
        cm = HARTREE_CM1
        c = self.constants
        lf = self.local
        out = {
            "well_branch": self.well_branch,
            "re_angstrom": float(a(lf.re)),
            "re_uncertainty_angstrom": float(a(lf.re_err)),
            "emin_hartree": lf.e_min,
            "k_hartree_per_bohr2": lf.k,
            "k_uncertainty_hartree_per_bohr2": lf.k_err,
            "we_cm1": c["we"] * cm,
            "wexe_cm1": c["wexe"] * cm,
            "be_cm1": c["be"] * cm,
            "alpha_e_cm1": c["alpha_e"] * cm,
            "local_window_angstrom": [float(a(lf.r_window[0])), float(a(lf.r_window[1]))],
            "local_points": lf.n_points,
            "local_rms_hartree": lf.rms,
            "reduced_mass": self.isotopes.as_dict(self.symbols) if self.isotopes is not None else None,
            "bound": self.bound,
            "de_ev": None if self.de is None else self.de * HARTREE_EV,
            "de_source": "separated atoms at the same level",
            "d0_ev": None if self.d0 is None else self.d0 * HARTREE_EV,
            "minimum_above_limit_ev": None if self.minimum_above_limit is None else self.minimum_above_limit * HARTREE_EV,
            "zpe_cm1": None if self.levels is None else self.levels.zpe * cm,
            "morse": None,
            "morse_error": self.morse_error,
            "vibrational_levels": None,
            "warnings": list(self.warnings),
            "caution": DE_CAUTION,
        }
        if not self.bound:
            out["binding"] = "not bound at this level"
        m = self.morse
        if m is not None:
            we_m = m.a * math.sqrt(2.0 * m.de / self.mu)
            out["morse"] = {
                "de_ev": m.de * HARTREE_EV,
                "de_uncertainty_ev": m.de_err * HARTREE_EV,
                "de_note": "model value: the Morse asymptote, an extrapolation",
                "a_per_angstrom": m.a / a(1.0),
                "a_uncertainty_per_angstrom": m.a_err / a(1.0),
                "re_angstrom": float(a(m.re)),
                "re_uncertainty_angstrom": float(a(m.re_err)),
                "emin_hartree": m.e_min,
                "we_cm1": we_m * cm,
                "wexe_cm1": (m.a**2 / (2.0 * self.mu)) * cm,
                "window_angstrom": [float(a(m.window[0])), float(a(m.window[1]))],
                "window_points": m.n_points,
                "window_end": m.window_reason,
                "rms_residual_hartree": m.rms,
                "max_residual_hartree": m.max_abs,
            }
        lv = self.levels
        if lv is not None:
            k = min(N_LEVELS_REPORTED, lv.n_bound)
            morse_g = None
            if m is not None:
                we_m = m.a * math.sqrt(2.0 * m.de / self.mu)
                morse_g = morse_levels(we_m, m.a**2 / (2.0 * self.mu), k - 1) if k else []
            out["vibrational_levels"] = {
                "method": "sinc DVR (Colbert & Miller 1992) on a cubic spline of the lowest trusted points",
                "n_bound": lv.n_bound,
                "levels": [
                    {
                        "v": v,
                        "g_cm1": lv.energies[v] * cm,
                        "bv_cm1": None if not math.isfinite(lv.bv[v]) else lv.bv[v] * cm,
                        "morse_g_cm1": None if morse_g is None else float(morse_g[v]) * cm,
                    }
                    for v in range(k)
                ],
                "dvr_grid_points": lv.grid_points,
            }
        return out


def well_points(scan):
    """(trusted points of the well branch, branch name); see the module docstring."""
    branches = scan.branches
    if "restricted" in branches and "unrestricted" in branches:
        pts = [p for p in branches["restricted"] if p is not None and p.trusted]
        return pts, "restricted"
    pts = [p for p in scan.points if p.trusted]
    return pts, (pts[0].branch if pts else "none")


def morse_window(result, e_min: float, de: float):
    """The points of the Morse fit and the reason the window ends there."""
    pts = [p for p in result.scan.points if p.trusted]
    if not pts:
        return [], "no trusted points"
    rest = {p.r_bohr: p.energy_hartree for p in result.scan.branches.get("restricted", ()) if p is not None and p.trusted}
    uns = {p.r_bohr: p.energy_hartree for p in result.scan.branches.get("unrestricted", ()) if p is not None and p.trusted}
    i_min = int(np.argmin([p.energy_hartree for p in pts]))
    end = len(pts)
    reason = "end of the grid"
    for j in range(i_min + 1, len(pts)):
        r = pts[j].r_bohr
        if r in rest and r in uns and rest[r] - uns[r] > SPLIT_HARTREE:
            end, reason = j, f"the unrestricted solution splits from the restricted one at {bohr_to_angstrom(r):.3f} A"
            break
        if _s2_jump(pts, j):
            end = j
            reason = f"<S^2> jumps from {pts[j - 1].s2:.2f} to {pts[j].s2:.2f} at {bohr_to_angstrom(r):.3f} A (a kink)"
            break
    wall = max(INNER_WALL_DE * de, INNER_WALL_MIN_HARTREE)
    window = [p for p in pts[:end] if p.energy_hartree - e_min <= wall or p.r_bohr >= pts[i_min].r_bohr]
    return window, reason


def _s2_jump(pts, j) -> bool:
    """True where <S^2> changes between points j-1 and j by more than S2_JUMP and
    more than three times the change over the neighbouring intervals (a
    discontinuity, not the steady rise of spin contamination)."""
    s = [p.s2 for p in pts]
    if s[j] is None or s[j - 1] is None:
        return False
    step = abs(s[j] - s[j - 1])
    if step <= S2_JUMP:
        return False
    around = [abs(s[k] - s[k - 1]) for k in (j - 1, j + 1) if 1 <= k < len(s) and s[k] is not None and s[k - 1] is not None]
    return not around or step > 3.0 * max(around)


def fit_curve(result, isotopes=None) -> CurveFit:
    """Fit a curve (see the module docstring).

    Args:
        result: a :class:`lcao.pipeline.CurveResult`.
        isotopes: :class:`lcao.masses.Isotopes` (default: the result's, or most abundant).

    Raises:
        FitError: too few trusted points or no minimum inside the grid.
    """
    from ..masses import resolve_isotopes

    iso = isotopes or getattr(result, "isotopes", None) or resolve_isotopes(result.species.atoms)
    mu = iso.reduced_mass_me
    well, well_branch = well_points(result.scan)
    if len(well) < 5:
        raise FitError(f"only {len(well)} trusted points in the well; a fit needs at least 5")
    r = np.array([p.r_bohr for p in well])
    e = np.array([p.energy_hartree for p in well])
    lf = local_fit(r, e)
    refined = [p for p in getattr(result, "refined", ()) if p is not None and p.trusted]
    if len(refined) >= 7:
        try:
            lf = local_fit([p.r_bohr for p in refined], [p.energy_hartree for p in refined])
        except FitError as exc:
            log.info("refinement points not used: %s", exc)
    consts = dunham_constants(lf.re, lf.k, lf.c3, lf.c4, mu)
    notes = []
    limit = result.limit_energy_hartree
    gap = limit - lf.e_min
    if gap <= 0:
        notes.append(
            f"not bound at this level: the minimum lies {-gap * HARTREE_EV:.3f} eV above the separated atoms;"
            " no Morse parameters or vibrational levels are given"
        )
        return CurveFit(
            lf, consts, mu, iso, False, None, None, "not bound at this level", None, None, -gap, well_branch,
            result.species.atoms, tuple(notes),
        )
    # Morse fit over the automatic window
    morse_fit, morse_err = None, None
    win, reason = morse_window(result, lf.e_min, gap)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            morse_fit = fit_morse([p.r_bohr for p in win], [p.energy_hartree for p in win], reason)
        for w in caught:
            notes.append(f"Morse fit: {w.message}")
            warnings.warn(str(w.message), UserWarning, stacklevel=2)
    except FitError as exc:
        morse_err = str(exc)
    if morse_fit is not None and morse_fit.rms > MORSE_POOR_FRACTION * morse_fit.de:
        notes.append(
            f"the Morse form describes this curve poorly (residual RMS {morse_fit.rms:.2e} Eh,"
            f" {100 * morse_fit.rms / morse_fit.de:.0f} % of its D_e); use the local constants and solved levels"
        )
    # vibrational levels on a spline of the lowest trusted points
    levels = None
    low = [p for p in result.scan.points if p.trusted]
    try:
        levels = _levels(low, mu, limit, lf.e_min)
    except (ValueError, np.linalg.LinAlgError) as exc:
        notes.append(f"vibrational levels not solved: {exc}")
    if levels is not None and levels.n_bound:
        zpe = levels.zpe
    else:
        zpe = 0.5 * consts["we"] - 0.25 * consts["wexe"]
        notes.append("ZPE from omega_e and omega_e x_e (no solved levels)")
    if low and low[-1].branch == "restricted" and "unrestricted" not in result.scan.branches:
        if low[-1].energy_hartree - limit > 1e-2:
            notes.append("this restricted curve dissociates to the wrong limit; D_e from the separated atoms stands, the Morse asymptote does not")
    return CurveFit(
        lf, consts, mu, iso, True, gap, morse_fit, morse_err, levels, gap - zpe, None, well_branch,
        result.species.atoms, tuple(notes),
    )


def _levels(points, mu, limit, e_min):
    from scipy.interpolate import CubicSpline

    if len(points) < 5:
        raise ValueError("fewer than 5 trusted points")
    r = np.array([p.r_bohr for p in points])
    e = np.array([p.energy_hartree for p in points])
    spline = CubicSpline(r, e)
    e_cut = min(limit, float(e[-1]))
    return solve_levels(spline, mu, float(r[0]), float(r[-1]), e_cut, float(min(e.min(), e_min)))
