"""From a curve to spectroscopic constants: local fit, Morse fit, vibrational levels, D_e.

:func:`fit_curve` takes a :class:`FitInput` (arrays in atomic units, built from
a scan by :func:`lcao.scan.assemble.fit_input`) and returns a :class:`CurveFit`
with a fixed set of fields in atomic units; :mod:`lcao.export.fit_fields`
converts them, at the edge, to the fields of ``curve.json`` and the tables.

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
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import FitError
from ..units import HARTREE_CM1, HARTREE_EV, bohr_to_angstrom
from .local import LocalFit, dunham_constants, local_fit
from .morse import MorseFit, derived_morse, fit_morse
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

#: beside every dissociation energy: which of the three it is
DE_NOTE = ("D_e is from the separated atoms at the same level; the Morse asymptote is an extrapolation (a model"
           " value), never to be used as D_e")


@dataclass(frozen=True)
class FitInput:
    """What the fit needs of a curve, as arrays in atomic units (bohr, hartree, electron masses).

    Attributes:
        well_r, well_e: the trusted points of the well branch; well_branch: its name.
        refined_r, refined_e: trusted refinement points about the minimum (may be empty).
        curve_r, curve_e: the lowest trusted point per distance; curve_s2: their <S^2> (NaN where none).
        restricted_e, unrestricted_e: the reference energies of each branch at ``curve_r`` (NaN where
            the branch has none).
        restricted_limit_only: the last trusted point is restricted and no unrestricted branch exists.
        limit_e: the separated-atom limit at the same level.
        mu: reduced mass, electron masses; isotopes: :class:`lcao.masses.Isotopes`; symbols: the atoms.
    """

    well_r: tuple
    well_e: tuple
    well_branch: str
    refined_r: tuple
    refined_e: tuple
    curve_r: tuple
    curve_e: tuple
    curve_s2: tuple
    restricted_e: tuple
    unrestricted_e: tuple
    restricted_limit_only: bool
    limit_e: float
    mu: float
    isotopes: object = None
    symbols: tuple = ("A", "B")


@dataclass(frozen=True)
class CurveFit:
    """Fitted constants of one curve, atomic units (:mod:`lcao.export.fit_fields` converts them).

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
        well_branch: the branch the local fit used; symbols: the atoms.
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
    #: the atomic spin-orbit correction of D_e and D_0 (:class:`lcao.fit.spin_orbit.SpinOrbit`), or None
    spin_orbit: object = None
    #: which level each number came from, where a curve and its well were computed at different levels
    sources: dict = field(default_factory=dict)
    #: the zero-point energy D_0 rests on (hartree) and how it was obtained
    zpe_used: float | None = None
    zpe_source: str = ""

    @property
    def zpe(self) -> float | None:
        return None if self.levels is None else self.levels.zpe


def morse_window(inp: FitInput, e_min: float, de: float):
    """(indices into the curve arrays of the Morse fit's points, the reason the window ends there)."""
    r, e = np.asarray(inp.curve_r), np.asarray(inp.curve_e)
    if len(r) == 0:
        return [], "no trusted points"
    rest, uns = np.asarray(inp.restricted_e), np.asarray(inp.unrestricted_e)
    s2 = [None if not np.isfinite(x) else float(x) for x in inp.curve_s2]
    i_min = int(np.argmin(e))
    end = len(r)
    reason = "end of the grid"
    for j in range(i_min + 1, len(r)):
        if np.isfinite(rest[j]) and np.isfinite(uns[j]) and rest[j] - uns[j] > SPLIT_HARTREE:
            end, reason = j, f"the unrestricted solution splits from the restricted one at {bohr_to_angstrom(r[j]):.3f} A"
            break
        if _s2_jump(s2, j):
            end = j
            reason = f"<S^2> jumps from {s2[j - 1]:.2f} to {s2[j]:.2f} at {bohr_to_angstrom(r[j]):.3f} A (a kink)"
            break
    wall = max(INNER_WALL_DE * de, INNER_WALL_MIN_HARTREE)
    window = [i for i in range(end) if e[i] - e_min <= wall or r[i] >= r[i_min]]
    return window, reason


def _s2_jump(s, j) -> bool:
    """True where <S^2> changes between points j-1 and j by more than S2_JUMP and more than three times
    the change over the neighbouring intervals (a discontinuity, not the steady rise of spin
    contamination)."""
    if s[j] is None or s[j - 1] is None:
        return False
    step = abs(s[j] - s[j - 1])
    if step <= S2_JUMP:
        return False
    around = [abs(s[k] - s[k - 1]) for k in (j - 1, j + 1) if 1 <= k < len(s) and s[k] is not None and s[k - 1] is not None]
    return not around or step > 3.0 * max(around)


def fit_curve(inp: FitInput) -> CurveFit:
    """Fit a curve (see the module docstring).

    Raises:
        FitError: too few trusted points or no minimum inside the grid.
    """
    mu = inp.mu
    lf = None
    if len(inp.refined_r) >= 7:
        try:
            lf = local_fit(inp.refined_r, inp.refined_e)
        except FitError as exc:
            log.info("refinement points not used: %s", exc)
    if lf is None:
        if len(inp.well_r) < 5:
            raise FitError(f"only {len(inp.well_r)} trusted points in the well; a fit needs at least 5")
        lf = local_fit(inp.well_r, inp.well_e)
    consts = dunham_constants(lf.re, lf.k, lf.c3, lf.c4, mu)
    notes = []
    gap = inp.limit_e - lf.e_min
    if gap <= 0:
        notes.append(
            f"not bound at this level: the minimum lies {-gap * HARTREE_EV:.3f} eV above the separated atoms;"
            " no Morse parameters or vibrational levels are given"
        )
        return CurveFit(lf, consts, mu, inp.isotopes, False, None, None, "not bound at this level", None, None, -gap,
                        inp.well_branch, inp.symbols, tuple(notes))
    morse_fit, morse_err = None, None
    win, reason = morse_window(inp, lf.e_min, gap)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            morse_fit = fit_morse([inp.curve_r[i] for i in win], [inp.curve_e[i] for i in win], reason)
        for w in caught:  # said once, in the fit's warnings (the summary prints them)
            notes.append(f"Morse fit: {w.message}")
    except FitError as exc:
        morse_err = str(exc)
        wr = [inp.curve_r[i] for i in win]
        we_ = [inp.curve_e[i] for i in win]
        morse_fit = derived_morse(lf.e_min, gap, lf.k, lf.re, lf.k_err, lf.re_err, wr, we_, morse_err)
    if morse_fit is not None and morse_fit.kind == "fitted" and morse_fit.rms > MORSE_POOR_FRACTION * morse_fit.de:
        notes.append(
            f"the Morse form describes this curve poorly (residual RMS {morse_fit.rms:.2e} Eh,"
            f" {100 * morse_fit.rms / morse_fit.de:.0f} % of its D_e); use the local constants and solved levels"
        )
    levels = None
    try:
        levels = _levels(inp.curve_r, inp.curve_e, mu, inp.limit_e, lf.e_min)
    except (ValueError, np.linalg.LinAlgError) as exc:
        notes.append(f"vibrational levels not solved: {exc}")
    if levels is not None and levels.n_bound:
        zpe, zpe_source = levels.zpe, "the lowest solved vibrational level"
    else:
        zpe, zpe_source = 0.5 * consts["we"] - 0.25 * consts["wexe"], "omega_e/2 - omega_e x_e/4"
        notes.append("ZPE from omega_e and omega_e x_e (no solved levels)")
    if inp.restricted_limit_only and len(inp.curve_e) and inp.curve_e[-1] - inp.limit_e > 1e-2:
        notes.append("this restricted curve dissociates to the wrong limit; D_e from the separated atoms stands,"
                     " the Morse asymptote does not")
    return CurveFit(lf, consts, mu, inp.isotopes, True, gap, morse_fit, morse_err, levels, gap - zpe, None,
                    inp.well_branch, inp.symbols, tuple(notes), zpe_used=zpe, zpe_source=zpe_source)


def with_well_level(fit: CurveFit, well_r, well_e, well_limit: float, well_text: str, curve_text: str) -> CurveFit:
    """The fit of a curve whose well (points about the minimum) and separated atoms were computed at a
    higher level: r_e, k, omega_e, omega_e x_e, B_e, alpha_e and D_e from the well level (a local fit
    through its points, its atoms), D_0 = D_e - ZPE with ZPE = omega_e/2 - omega_e x_e/4 of the well
    level; the Morse model and the solved vibrational levels stay those of the curve level.

    Raises:
        FitError: the well-level points have no minimum inside them.
    """
    from dataclasses import replace

    lf = local_fit(well_r, well_e)
    consts = dunham_constants(lf.re, lf.k, lf.c3, lf.c4, fit.mu)
    de = well_limit - lf.e_min
    zpe = 0.5 * consts["we"] - 0.25 * consts["wexe"]
    sources = {key: well_text for key in ("re", "k", "we", "wexe", "be", "alpha_e", "de", "d0", "zpe")}
    sources.update({"morse": curve_text, "vibrational_levels": curve_text})
    notes = list(fit.warnings)
    bound = de > 0
    if not bound:
        notes.append(f"not bound at {well_text}: the minimum lies {-de * HARTREE_EV:.3f} eV above its separated atoms")
    return replace(fit, local=lf, constants=consts, bound=bound, de=de if bound else None,
                   d0=(de - zpe) if bound else None, minimum_above_limit=None if bound else -de,
                   warnings=tuple(notes), sources=sources, zpe_used=zpe,
                   zpe_source=f"omega_e/2 - omega_e x_e/4 at {well_text}")


def _levels(r, e, mu, limit, e_min):
    from scipy.interpolate import CubicSpline

    if len(r) < 5:
        raise ValueError("fewer than 5 trusted points")
    r = np.asarray(r, float)
    e = np.asarray(e, float)
    spline = CubicSpline(r, e)
    e_cut = min(limit, float(e[-1]))
    # the spline may dip below every point between two of them (a rough curve): the levels count from its floor
    v_min = float(min(e.min(), e_min, spline(np.linspace(r[0], r[-1], 4000)).min()))
    levels = solve_levels(spline, mu, float(r[0]), float(r[-1]), e_cut, v_min)
    if levels.n_bound == 0:
        raise ValueError(f"no level lies below {'the separated atoms' if e_cut == limit else 'the last trusted point'}:"
                         f" the curve rises only {(e_cut - v_min) * HARTREE_CM1:.0f} cm-1 above its minimum there,"
                         " less than the zero-point energy")
    return levels
