"""Cp(T) and S(T): statistical values as open circles, the fitted polynomial as lines, the common temperature dashed."""

from __future__ import annotations

import numpy as np


def plot_thermo(sheet, ax=None):
    from matplotlib.figure import Figure

    if ax is None:
        fig = Figure(figsize=(7.2, 4.4), dpi=110)
        ax = fig.add_subplot(1, 1, 1)
    t = sheet.thermo["t_k"]
    step = max(1, len(t) // 40)
    tt = np.linspace(t.min(), t.max(), 600)
    ax.plot(t[::step], sheet.thermo["cp_j_per_mol_k"][::step], "o", mfc="white", mec="black", ms=4, label="Cp, statistical")
    ax.plot(tt, sheet.nasa.cp(tt), "-", color="black", lw=1.2, label=f"Cp, {sheet.nasa.form} polynomial")
    ax.set_xlabel("T / K")
    ax.set_ylabel("Cp / J mol-1 K-1")
    ax2 = ax.twinx()
    ax2.plot(t[::step], sheet.thermo["s_j_per_mol_k"][::step], "s", mfc="white", mec="0.45", ms=4, label="S, statistical")
    ax2.plot(tt, sheet.nasa.s(tt), "--", color="0.45", lw=1.2, label="S, polynomial")
    ax2.set_ylabel("S / J mol-1 K-1")
    ax.axvline(sheet.nasa.t_common, color="0.7", ls=":", lw=0.8)
    h1, l1 = ax.get_legend_handles_labels()
    h2, l2 = ax2.get_legend_handles_labels()
    ax.legend(h1 + h2, l1 + l2, fontsize=7, frameon=False, loc="lower right")
    ax.set_title(f"{sheet.record['species']}  ({sheet.provenance['source']} constants)  1 bar", fontsize=9)
    return ax


def plot_dissociation(sheet, ax=None):
    """log10 K_p against 1000/T (left) and the degree of dissociation against T (right), at 1 bar and at
    the chosen pressure."""
    from matplotlib.figure import Figure

    d = sheet.dissociation
    if ax is None:
        fig = Figure(figsize=(9.0, 3.9), dpi=110)
        ax, ax2 = fig.add_subplot(1, 2, 1), fig.add_subplot(1, 2, 2)
    else:
        ax2 = ax.figure.add_subplot(1, 2, 2)
    keep = d.t_k >= 500.0
    ax.plot(1000.0 / d.t_k[keep], d.log10_kp[keep], "-", color="black", lw=1.2)
    ax.set_xlabel("1000 K / T")
    ax.set_ylabel("log10 (K_p / bar)")
    ax.axhline(0.0, color="0.7", ls=":", lw=0.8)
    hp = sheet.handoff
    ax.set_title(f"{hp['species']} <=> {hp['products']}   D_0 {d.d0_j_per_mol / 1000:.1f} kJ/mol", fontsize=9)
    ax2.plot(d.t_k, d.alpha_1bar, "-", color="black", lw=1.2, label="1 bar")
    if d.pressure_bar != 1.0:
        ax2.plot(d.t_k, d.alpha, "--", color="0.45", lw=1.2, label=f"{d.pressure_bar:g} bar")
    ax2.set_xlabel("T / K")
    ax2.set_ylabel("degree of dissociation")
    ax2.set_ylim(-0.02, 1.02)
    ax2.legend(fontsize=7, frameon=False, loc="upper left")
    ax.figure.tight_layout()
    return ax
