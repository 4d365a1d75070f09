"""The fit block of ``curve.json`` and the tables: a :class:`lcao.fit.CurveFit` (atomic units) converted
to the published field names, units in each name (the conversions happen here, at the edge)."""

from __future__ import annotations

import math

from ..fit import DE_NOTE, N_LEVELS_REPORTED
from ..fit.morse import morse_levels
from ..units import HARTREE_CM1, HARTREE_EV, bohr_to_angstrom


def _ev(x):
    return None if x is None else x * HARTREE_EV


def _finite(x, scale):
    """``x * scale``, or None where ``x`` is None or not finite (JSON has no NaN)."""
    return None if x is None or not math.isfinite(x) else float(x * scale)


def morse_wavenumbers(fit) -> tuple[float, float]:
    """(omega_e, omega_e x_e) of the Morse model, hartree."""
    m = fit.morse
    return m.a * math.sqrt(2.0 * m.de / fit.mu), m.a**2 / (2.0 * fit.mu)


def spin_orbit_block(fit) -> dict | None:
    """The atomic spin-orbit correction of D_e and D_0, a separate labelled term."""
    so = fit.spin_orbit
    if so is None:
        return None
    corr = so.correction_hartree
    return {
        "correction_ev": None if corr is None else corr * HARTREE_EV,
        "correction_cm1": None if corr is None else corr * HARTREE_CM1,
        "de_ev": None if (corr is None or fit.de is None) else (fit.de + corr) * HARTREE_EV,
        "d0_ev": None if (corr is None or fit.d0 is None) else (fit.d0 + corr) * HARTREE_EV,
        "atoms": [{"atom": label, "term": term, "shift_cm1": shift, "source": source, "checked": checked}
                  for label, term, shift, source, checked in so.atoms],
        "method": "each atom's lowest J level against the (2J+1)-weighted mean of its ground term",
        "note": "the molecule's own first-order spin-orbit splitting (Pi states) is not included",
    }


#: the fields of the fit block (all null where a curve has no well to give them)
FIT_FIELDS = ("well_branch", "re_angstrom", "re_uncertainty_angstrom", "emin_hartree", "k_hartree_per_bohr2",
              "k_uncertainty_hartree_per_bohr2", "we_cm1", "wexe_cm1", "be_cm1", "alpha_e_cm1", "local_window_angstrom",
              "local_points", "local_rms_hartree", "reduced_mass", "bound", "de_ev", "de_source", "d0_ev",
              "minimum_above_limit_ev", "zpe_cm1", "zpe_source", "sources", "spin_orbit", "morse", "morse_error",
              "vibrational_levels", "warnings", "de_note")


def verdict_fields(verdict) -> dict:
    from ..units import bohr_to_angstrom as a

    if verdict is None:
        return {"verdict": None, "verdict_detail": None}
    out = {"verdict": verdict.kind, "verdict_detail": verdict.detail}
    if verdict.distances_bohr:
        out["electron_loss_distances_angstrom"] = [float(a(r)) for r in verdict.distances_bohr]
    return out


def fit_document(fit, caution: str | None = None, verdict=None) -> dict:
    """The ``fit`` block of ``curve.json`` (field names documented in the README); ``caution`` is the
    level's (:func:`lcao.pipeline.caution_for`). A curve judged repulsive, unbound or superposition-limited
    (``verdict``) keeps only where its minimum lies: no constants that would invite misuse."""
    from ..fit.verdict import BOUND, METASTABLE

    if fit is None or (verdict is not None and verdict.kind not in (BOUND, METASTABLE)):
        out = {key: None for key in FIT_FIELDS}
        out.update(bound=False, warnings=list(fit.warnings) if fit is not None else [], caution=caution)
        if fit is not None:
            out["minimum_r_angstrom"] = float(bohr_to_angstrom(fit.local.re))
            out["minimum_above_limit_ev"] = _ev(fit.minimum_above_limit)
        out.update(verdict_fields(verdict))
        return out
    a = bohr_to_angstrom
    cm = HARTREE_CM1
    c = fit.constants
    lf = fit.local
    out = {
        "well_branch": fit.well_branch,
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
        "reduced_mass": fit.isotopes.as_dict(fit.symbols) if fit.isotopes is not None else None,
        "bound": fit.bound,
        "de_ev": _ev(fit.de),
        "de_source": "separated atoms at the same level",
        "d0_ev": _ev(fit.d0),
        "minimum_above_limit_ev": _ev(fit.minimum_above_limit),
        "zpe_cm1": None if fit.zpe_used is None else fit.zpe_used * cm,
        "zpe_source": fit.zpe_source or None,
        "sources": dict(fit.sources) or None,
        "spin_orbit": spin_orbit_block(fit),
        "morse": None,
        "morse_error": fit.morse_error,
        "vibrational_levels": None,
        "warnings": list(fit.warnings),
        "de_note": DE_NOTE,
        "caution": caution,
        **verdict_fields(verdict),
    }
    if not fit.bound:
        out["binding"] = "not bound at this level"
    m = fit.morse
    if m is not None:
        we_m, wexe_m = morse_wavenumbers(fit)
        derived = m.kind == "derived"
        out["morse"] = {
            "kind": "derived from the local constants (not fitted)" if derived else "fitted",
            "de_ev": m.de * HARTREE_EV,
            "de_uncertainty_ev": _finite(m.de_err, HARTREE_EV),
            "de_note": ("D_e from the separated atoms at the same level" if derived
                        else "model value: the Morse asymptote, an extrapolation"),
            "a_per_angstrom": m.a / a(1.0),
            "a_uncertainty_per_angstrom": _finite(m.a_err, 1.0 / a(1.0)),
            "re_angstrom": float(a(m.re)),
            "re_uncertainty_angstrom": _finite(m.re_err, a(1.0)),
            "emin_hartree": m.e_min,
            "we_cm1": we_m * cm,
            "wexe_cm1": wexe_m * cm,
            "window_angstrom": [float(a(m.window[0])), float(a(m.window[1]))],
            "window_points": m.n_points,
            "window_end": m.window_reason,
            "rms_residual_hartree": m.rms,
            "max_residual_hartree": m.max_abs,
        }
        if derived:
            out["morse"]["derivation"] = ("a = omega_e sqrt(mu / (2 D_e)) in atomic units, that is"
                                          " a = omega_e sqrt(2 pi^2 c mu / (D_e h)) with omega_e and D_e in cm-1;"
                                          " r_e and omega_e from the local fit, D_e from the separated atoms; the"
                                          " residuals compare it with the curve's points near the well")
    lv = fit.levels
    if lv is not None:
        k = min(N_LEVELS_REPORTED, lv.n_bound)
        morse_g = None
        if m is not None:
            we_m, wexe_m = morse_wavenumbers(fit)
            morse_g = morse_levels(we_m, wexe_m, k - 1) if k else []
        out["vibrational_levels"] = {
            "method": "sinc DVR (Colbert & Miller 1992) on a cubic spline of the lowest trusted points",
            "zpe_of_these_levels_cm1": lv.zpe * cm,
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
