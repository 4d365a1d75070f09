"""Text summaries printed by the CLI: the curve, the fit with uncertainties and the handbook comparison."""

from __future__ import annotations

import math

from .pipeline import CurveResult


def summary_lines(result: CurveResult) -> list[str]:
    """Short human-readable summary (the CLI prints it)."""
    from .units import HARTREE_EV

    sp, lv = result.species, result.level
    lines = [
        f"{sp.label}  {lv.text}  ({lv.shells_text}{', ' + lv.electrons_text if lv.electrons_text else ''})"
        f"  multiplicity {result.multiplicity} ({result.multiplicity_source})  reference {result.scan.reference}",
    ]
    lines += level_lines(lv)
    if result.well_level is not None:
        wl = result.well_level
        lines.append(f"  well and separated atoms at {wl.text} ({wl.shells_text}"
                     f"{', ' + wl.electrons_text if wl.electrons_text else ''})")
        lines += level_lines(wl)
    if result.candidates:
        lines.append(
            "  multiplicities tried (lowest energy over the probe distances): "
            + ", ".join(
                f"{t.multiplicity}: {t.energy_hartree:.6f} Eh at {t.as_dict()['r_angstrom']:.3f} A"
                if math.isfinite(t.energy_hartree) else f"{t.multiplicity}: failed"
                for t in result.candidates
            )
        )
    n = len(result.points)
    good = result.trusted_points
    lines.append(
        f"  {n} points from {result.grid.r_angstrom[0]:.3f} to {result.grid.r_angstrom[-1]:.3f} A:"
        f" {len(good)} trusted, {n - len(good)} flagged; computed {result.computed}, reused {result.reused} from the store"
    )
    low = result.lowest_point()
    if low is not None:
        de = (result.limit_energy_hartree - low.energy_hartree) * HARTREE_EV
        lines.append(f"  lowest point: {low.r_angstrom:.4f} A, {low.energy_hartree:.8f} Eh ({low.branch})")
        lines.append(f"  separated atoms: {result.limit_energy_hartree:.8f} Eh (lowest point lies {abs(de):.3f} eV"
                     f" {'below' if de >= 0 else 'above'})")
    if result.scan.instability:
        a, b = result.scan.instability
        lines.append(
            f"  restricted solution turns unstable towards unrestricted between {_ang(a):.3f} and {_ang(b):.3f} A"
        )
    if result.verdict is not None:
        lines.append(f"  verdict: {result.verdict.detail}")
    if result.other_branch is not None:
        lines.append("  " + branch_line(result))
    if result.counterpoise is not None:
        worst = max((b for b in result.counterpoise.values() if b == b), default=0.0)
        lines.append(f"  counterpoise correction ({result.counterpoise_reason}): BSSE up to {worst * HARTREE_EV * 1000:.2f} meV;"
                     " the verdict and any fit are of the corrected curve (counterpoise in curve.json)")
    if result.neutral is not None:
        n = result.neutral
        lines.append(f"  {n.species.label} (one electron fewer) computed at the same distances, multiplicity"
                     f" {n.multiplicity}: see neutral_curve in curve.json")
    from .fit.verdict import BOUND, METASTABLE

    if result.fit is not None and (result.verdict is None or result.verdict.kind in (BOUND, METASTABLE)):
        lines.extend(fit_lines(result))
    for note in result.scan.notes + result.warnings:
        lines.append(f"  note: {note}")
    if result.fit_error and result.verdict is None:
        lines.append(f"  no fit: {result.fit_error}")
    lines.append(f"  caution: {result.caution}")
    return lines


BRANCH_WORDS = {"lowest": "lowest (broken-symmetry)", "symmetric": "symmetry-adapted"}


def branch_line(result: CurveResult) -> str:
    """Which branch the curve follows where the lowest solution breaks the spatial symmetry, and the other's fit."""
    from .fit.verdict import BOUND, METASTABLE
    from .units import HARTREE_CM1, HARTREE_EV, bohr_to_angstrom

    o = result.other_branch
    text = f"branch: the curve follows the {BRANCH_WORDS[result.branch]} solution; the {BRANCH_WORDS[o.branch]} one"
    if o.fit is not None and (o.verdict is None or o.verdict.kind in (BOUND, METASTABLE)) and o.fit.de is not None:
        text += (f": r_e {float(bohr_to_angstrom(o.fit.local.re)):.4f} A, omega_e {o.fit.constants['we'] * HARTREE_CM1:.1f}"
                 f" cm-1, D_e {o.fit.de * HARTREE_EV:.3f} eV")
    elif o.verdict is not None:
        text += f": {o.verdict.detail}"
    elif o.fit_error:
        text += f": no fit ({o.fit_error})"
    return text + " (reference tables list the symmetry-adapted solution; fit.other_branch in curve.json)"


def level_lines(level) -> list[str]:
    """What the level computes beyond its name: the functional as evaluated, the grid, an extrapolation."""
    from .methods import method_for

    d = method_for(level).describe(level)
    out = []
    f = d.get("functional")
    if f:
        comps = " + ".join(f"{c['weight']:g} {c['libxc']}" for c in f["libxc_components"]) or "none"
        out.append(f"  functional {f['name']} as PySCF evaluates it: {comps}; exact exchange {f['exact_exchange_fraction']:g}"
                   + (f", range separation omega {f['range_separation']['omega']:g}" if f["range_separation"]["omega"] else "")
                   + f"; grid level {d['grid']['pyscf_grid_level']}")
        if f.get("note"):
            out.append(f"  note: {f['note']}")
    x = d.get("extrapolation")
    if x:
        out.append(f"  basis-set extrapolation {x['bases'][0]} -> {x['bases'][1]}: correlation {x['correlation']};"
                   f" {x['hartree_fock']}")
    return out


def _ang(r_bohr: float) -> float:
    from .units import bohr_to_angstrom

    return float(bohr_to_angstrom(r_bohr)) if math.isfinite(r_bohr) else float("nan")


def fit_lines(result: CurveResult) -> list[str]:
    """Fitted constants with uncertainties and units, and the handbook comparison where known."""
    from .data import handbook_row

    from .export.fit_fields import fit_document

    d = fit_document(result.fit, result.caution)
    ref = handbook_row(result.species.label) if result.multiplicity == _handbook_mult(result) else None

    def cmp(key, value, fmt):
        if ref is None or ref.get(key) is None or value is None:
            return ""
        return f"  (handbook {ref[key]:{fmt}}, error {value - ref[key]:+{fmt}})"

    iso = d["reduced_mass"]
    lines = [
        f"  fit of the {d['well_branch']} well ({d['local_points']} points about the minimum; {iso['isotopes']},"
        f" reduced mass {iso['reduced_mass_dalton']:.6f} Da):",
        f"    r_e        {d['re_angstrom']:.5f} +- {d['re_uncertainty_angstrom']:.5f} A" + cmp("re_angstrom", d["re_angstrom"], ".4f"),
        f"    omega_e    {d['we_cm1']:.1f} cm-1" + cmp("we_cm1", d["we_cm1"], ".1f"),
        f"    omega_e x_e {d['wexe_cm1']:.2f} cm-1" + cmp("wexe_cm1", d["wexe_cm1"], ".2f"),
        f"    B_e        {d['be_cm1']:.4f} cm-1   alpha_e {d['alpha_e_cm1']:.5f} cm-1" + cmp("be_cm1", d["be_cm1"], ".4f"),
    ]
    if not d["bound"]:
        lines.append(f"    not bound at this level: the minimum lies {d['minimum_above_limit_ev']:.3f} eV above the separated atoms")
        return lines
    lines.append(f"    D_e (separated atoms, same level) {d['de_ev']:.3f} eV;  D_0 = D_e - ZPE {d['d0_ev']:.3f} eV" + cmp("d0_ev", d["d0_ev"], ".3f"))
    so = d["spin_orbit"]
    if so is not None and so["correction_ev"]:
        lines.append(f"    atomic spin-orbit term {so['correction_ev']:+.4f} eV: D_e {so['de_ev']:.3f} eV, D_0 {so['d0_ev']:.3f} eV"
                     + cmp("d0_ev", so["d0_ev"], ".3f"))
    elif so is not None and so["correction_ev"] is None:
        lines.append("    atomic spin-orbit term not available: " + ", ".join(a["atom"] for a in so["atoms"] if a["shift_cm1"] is None)
                     + " has no fine-structure data shipped")
    if d["zpe_cm1"] is not None:
        vl = d["vibrational_levels"]
        lines.append(f"    ZPE {d['zpe_cm1']:.1f} cm-1 ({d['zpe_source']}); {vl['n_bound'] if vl else '?'} bound vibrational"
                     " levels" + (f" at {d['sources']['vibrational_levels']}" if d["sources"] else ""))
    if d["sources"]:
        lines.append(f"    r_e, omega_e, omega_e x_e, B_e, alpha_e, D_e and ZPE from {d['sources']['re']}; the Morse model"
                     f" and the vibrational levels from {d['sources']['morse']}")
    m = d["morse"]
    if m is not None and m["kind"] == "fitted":
        lines.append(
            f"    Morse (model): D_e {m['de_ev']:.3f} {_pm(m['de_uncertainty_ev'], '.3f')} eV, a {m['a_per_angstrom']:.4f}"
            f" {_pm(m['a_uncertainty_per_angstrom'], '.4f')} 1/A, r_e {m['re_angstrom']:.4f} A;"
            f" window {m['window_angstrom'][0]:.3f}-{m['window_angstrom'][1]:.3f} A ({m['window_points']} points, ends at {m['window_end']});"
            f" residual RMS {m['rms_residual_hartree']:.1e} Eh"
        )
    elif m is not None:
        lines.append(
            f"    Morse (derived from the local constants, not fitted): D_e {m['de_ev']:.3f} eV (separated atoms),"
            f" a {m['a_per_angstrom']:.4f} {_pm(m['a_uncertainty_per_angstrom'], '.4f')} 1/A = omega_e sqrt(mu/(2 D_e)),"
            f" r_e {m['re_angstrom']:.4f} A; not fitted because {d['morse_error']}"
        )
    elif d["morse_error"]:
        lines.append(f"    no Morse fit: {d['morse_error']}")
    lines.append(f"    {d['de_note']}")
    for w in d["warnings"]:
        lines.append(f"    warning: {w}")
    return lines


def _pm(x, fmt) -> str:
    """'+- x', or a word where the uncertainty is not available."""
    return "(uncertainty not available)" if x is None else f"+- {x:{fmt}}"


def _handbook_mult(result: CurveResult):
    from .data import handbook_row

    row = handbook_row(result.species.label)
    return None if row is None else row.get("multiplicity")
