"""Figures of a series: r_e and bond orders member by member, and the valence levels side by side."""

from __future__ import annotations

import numpy as np


def _new_axes(w=7.2, h=4.4):
    from matplotlib.figure import Figure

    return Figure(figsize=(w, h), dpi=110).add_subplot(1, 1, 1)


def _ok(rows):
    return [r for r in rows if r.status == "ok"]


def _names(rows):
    levels = {r.level for r in rows}
    return [r.species if len(levels) == 1 else f"{r.species}\n{r.level}" for r in rows]


def plot_re(rows, ax=None):
    """Computed r_e (filled squares, with uncertainty) against the handbook value (open circles)."""
    ax = ax or _new_axes()
    rows = _ok(rows)
    x = np.arange(len(rows))
    from ..export.series_files import member_values

    vals = [member_values(r) for r in rows]
    # a member with no well (repulsive, unbound, superposition-limited) has no r_e: a gap in the line
    y = [np.nan if v.get("re_angstrom") is None else v["re_angstrom"] for v in vals]
    err = [v.get("re_uncertainty_angstrom") or 0.0 for v in vals]
    hb = [r.handbook.get("re_angstrom") if r.handbook else None for r in rows]
    ax.errorbar(x, y, yerr=err, fmt="s-", color="black", ms=5, lw=1, label="computed")
    hx = [i for i, v in enumerate(hb) if v is not None]
    if hx:
        ax.plot(hx, [hb[i] for i in hx], "o", mfc="white", mec="0.3", ms=7, label="handbook (experiment)")
    ax.set_xticks(x, _names(rows), fontsize=8)
    ax.set_ylabel("r_e / angstrom")
    ax.legend(fontsize=7, frameon=False)
    return ax


def plot_bond_orders(rows, ax=None):
    ax = ax or _new_axes()
    rows = _ok(rows)
    x = np.arange(len(rows))
    summaries = [r.orbitals for r in rows]
    for key, label, style in (
        ("bond_order_mo_count", "MO counting", dict(color="black", marker="s", ls="-")),
        ("bond_order_mayer", "Mayer", dict(color="0.35", marker="o", ls="--")),
        ("bond_order_mulliken", "Mulliken overlap population", dict(color="0.6", marker="^", ls=":")),
    ):
        ys = [np.nan if o is None or getattr(o, key) is None else getattr(o, key) for o in summaries]
        ax.plot(x, ys, label=label, **style)
    ax.set_xticks(x, _names(rows), fontsize=8)
    ax.set_ylabel("bond order")
    ax.legend(fontsize=7, frameon=False)
    return ax


def plot_valence_levels(rows, ax=None):
    """Valence MO energies member by member: sigma solid, pi dashed, occupied thick, empty thin;
    the same label joined between neighbouring members so reordering of sigma and pi levels shows."""
    ax = ax or _new_axes(7.6, 5.2)
    rows = _ok(rows)
    prev = {}
    for i, r in enumerate(rows):
        seen = {}
        occ_top = max((lv["energy_hartree"] for lv in r.valence_levels if lv["occupation"] > 0), default=0.0)
        for lv in r.valence_levels:
            if lv["energy_hartree"] > occ_top + 0.6 or lv["label"] is None:
                continue
            key = (lv["label"], lv["spin"])
            if key in seen:
                continue
            seen[key] = lv["energy_hartree"]
            pi = lv["kind"] and lv["kind"].startswith("pi")
            ax.plot([i - 0.3, i + 0.3], [lv["energy_hartree"]] * 2, color="black" if lv["occupation"] > 0 else "0.55",
                    lw=2.0 if lv["occupation"] > 0 else 1.0, ls="--" if pi else "-")
            if lv["spin"] != "beta":
                ax.annotate(lv["label"].replace("sigma", "σ").replace("pi", "π").replace("_", ""), (i + 0.32, lv["energy_hartree"]),
                            fontsize=6, va="center", color="0.3")
        for key, e in seen.items():
            if key in prev and prev[key][0] == i - 1:
                ax.plot([i - 0.7, i - 0.3], [prev[key][1], e], color="0.8", lw=0.6, zorder=0)
        prev.update({k: (i, e) for k, e in seen.items()})
    ax.set_xticks(np.arange(len(rows)), _names(rows), fontsize=8)
    ax.set_ylabel("orbital energy / hartree (at r_e)")
    from matplotlib.lines import Line2D

    ax.legend(handles=[Line2D([], [], color="black", lw=2, label="sigma, occupied"),
                       Line2D([], [], color="black", lw=2, ls="--", label="pi, occupied"),
                       Line2D([], [], color="0.55", lw=1, label="empty")], fontsize=7, frameon=False, loc="lower right")
    return ax


SERIES_FIGURES = {"series-re": plot_re, "series-bond-orders": plot_bond_orders, "series-levels": plot_valence_levels}
