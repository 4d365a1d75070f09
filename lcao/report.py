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
        lines.append(f"  separated atoms: {result.limit_energy_hartree:.8f} Eh (lowest point lies {de:.3f} eV below)")
    if result.scan.instability:
        a, b = result.scan.instability
        lines.append(
            f"  restricted solution turns unstable towards unrestricted between {_ang(a):.3f} and {_ang(b):.3f} A"
        )
    if result.fit is not None:
        lines.extend(fit_lines(result))
    for note in result.scan.notes + result.warnings:
        lines.append(f"  note: {note}")
    if result.fit_error:
        lines.append(f"  no fit: {result.fit_error}")
    lines.append(f"  caution: {result.caution}")
    return lines


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
    if m is not None:
        lines.append(
            f"    Morse (model): D_e {m['de_ev']:.3f} +- {m['de_uncertainty_ev']:.3f} eV, a {m['a_per_angstrom']:.4f}"
            f" +- {m['a_uncertainty_per_angstrom']:.4f} 1/A, r_e {m['re_angstrom']:.4f} A;"
            f" window {m['window_angstrom'][0]:.3f}-{m['window_angstrom'][1]:.3f} A ({m['window_points']} points, ends at {m['window_end']});"
            f" residual RMS {m['rms_residual_hartree']:.1e} Eh"
        )
    elif d["morse_error"]:
        lines.append(f"    no Morse fit: {d['morse_error']}")
    lines.append(f"    {d['de_note']}")
    return lines


def _handbook_mult(result: CurveResult):
    from .data import handbook_row

    row = handbook_row(result.species.label)
    return None if row is None else row.get("multiplicity")
