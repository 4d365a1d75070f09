"""The potential-energy curve figure: energy relative to the separated atoms (eV) against r (angstrom).

Drawn to read in grey scale: trusted points as filled discs, flagged points as
open diamonds, the restricted branch dashed and the unrestricted branch solid,
a symmetry-adapted branch dash-dotted, the counterpoise-corrected curve as open
squares, an anion's neutral (one electron fewer) as crosses, the Morse model
dotted over a shaded band that marks its fitted window (no band for a model
derived from the local constants), the separated-atom limit as a thin line at
zero and the solved vibrational levels as short strokes between their
classical turning points. The verdict is written in the corner.
"""

from __future__ import annotations

import os

import numpy as np

from ..units import HARTREE_EV, bohr_to_angstrom


def _new_axes():
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.0, 4.6), dpi=110)
    return fig.add_subplot(1, 1, 1)


def plot_curve(result, ax=None):
    """Draw a :class:`lcao.pipeline.CurveResult`; returns the Axes."""
    ax = ax or _new_axes()
    e0 = result.limit_energy_hartree

    def rel(e):
        return (np.asarray(e, float) - e0) * HARTREE_EV

    styles = {"restricted": dict(ls="--", color="0.45", lw=1.2), "unrestricted": dict(ls="-", color="0.15", lw=1.4)}
    symmetric = dict(ls="-.", color="0.35", lw=1.2)
    for name, pts in result.scan.branches.items():
        pts = [p for p in pts if p is not None and p.trusted]
        if pts:
            ax.plot([p.r_angstrom for p in pts], rel([p.energy_hartree for p in pts]), label=f"{name} branch",
                    **styles.get(name, symmetric))
    if result.counterpoise is not None:
        cp = result.counterpoise
        fixed = [(p.r_angstrom, p.energy_hartree + cp[k]) for p in result.points
                 if p.trusted and (k := round(p.r_bohr, 8)) in cp and np.isfinite(cp[k])]
        if fixed:
            ax.plot([r for r, _ in fixed], rel([e for _, e in fixed]), "s", ms=3.5, mfc="white", mec="0.3",
                    label="counterpoise-corrected")
    if result.neutral is not None:
        npts = [p for p in result.neutral.points if p.trusted]
        if npts:
            ax.plot([p.r_angstrom for p in npts], rel([p.energy_hartree for p in npts]), "x", ms=4, color="0.4",
                    label=f"{result.neutral.species.label} (neutral)")
    good = [p for p in result.points if p.trusted]
    bad = [p for p in result.points if not p.trusted and np.isfinite(p.energy_hartree)]
    if good:
        ax.plot([p.r_angstrom for p in good], rel([p.energy_hartree for p in good]), "o", ms=3.5, color="black", label="lowest trusted point")
    if bad:
        ax.plot([p.r_angstrom for p in bad], rel([p.energy_hartree for p in bad]), "D", ms=5, mfc="white", mec="black", label="flagged point")
    ax.axhline(0.0, color="0.6", lw=0.8)
    ax.annotate("separated atoms", xy=(1.0, 0.0), xycoords=("axes fraction", "data"), ha="right", va="bottom", fontsize=8, color="0.35")
    fit = result.fit
    if fit is not None and fit.morse is not None:
        from ..fit.morse import morse

        m = fit.morse
        if m.kind == "fitted":
            lo, hi = (float(bohr_to_angstrom(x)) for x in m.window)
            ax.axvspan(lo, hi, color="0.92", zorder=0, label="Morse window")
        rr = np.linspace(min(p.r_bohr for p in good), max(p.r_bohr for p in good), 300)
        ax.plot(bohr_to_angstrom(rr), rel(morse(rr, m.e_min, m.de, m.a, m.re)), ":", color="0.3", lw=1.3,
                label="Morse model" + (" (derived)" if m.kind == "derived" else ""))
    if fit is not None and fit.levels is not None and good:
        from scipy.interpolate import CubicSpline

        r = np.array([p.r_bohr for p in good])
        e = np.array([p.energy_hartree for p in good])
        spline = CubicSpline(r, e)
        rr = np.linspace(r[0], r[-1], 2000)
        vv = spline(rr)
        vmin = min(float(vv.min()), fit.local.e_min)
        for g in fit.levels.energies[:15]:
            level = vmin + g
            inside = rr[vv <= level]
            if inside.size:
                ax.plot(bohr_to_angstrom(np.array([inside[0], inside[-1]])), rel([level, level]), color="0.55", lw=0.7)
    ax.set_xlabel("bond distance r / angstrom")
    ax.set_ylabel("E - E(separated atoms) / eV")
    ax.set_title(f"{result.species.label}  {result.level.text}  multiplicity {result.multiplicity}", fontsize=10)
    if good:
        shown = [p.energy_hartree for p in good]
        if result.neutral is not None:  # the anion's neutral must show where it lies below
            shown += [p.energy_hartree for p in result.neutral.points if p.trusted]
        lo = float(rel(shown).min())
        span = max(-lo, 0.5)
        ax.set_ylim(lo - 0.15 * span, max(0.0, lo) + 1.2 * span)
    if result.verdict is not None:
        ax.text(0.98, 0.97, f"verdict: {result.verdict.kind}", transform=ax.transAxes, ha="right", va="top", fontsize=8)
    ax.legend(fontsize=7, frameon=False, loc="lower right")
    return ax


def save_figure(ax, path_stem: str) -> list[str]:
    """Write ``path_stem.png`` and ``path_stem.svg`` atomically; returns the paths."""
    import io

    from ..export.io import atomic_write_bytes, ensure_dir

    ensure_dir(os.path.dirname(os.path.abspath(path_stem)))
    fig = ax.figure
    fig.tight_layout()
    out = []
    for ext in ("png", "svg"):
        buf = io.BytesIO()
        fig.savefig(buf, format=ext)
        path = f"{path_stem}.{ext}"
        atomic_write_bytes(path, buf.getvalue())
        out.append(os.fspath(path))
    return out


def save_figures(figures: dict, result, out_dir) -> list[str]:
    """Draw each registered figure (file stem -> plot function) of ``result`` and save it as PNG and SVG."""
    paths = []
    for stem, fn in figures.items():
        paths += save_figure(fn(result), os.path.join(os.fspath(out_dir), stem))
    return paths
