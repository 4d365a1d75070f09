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
