"""Orbital energy-level diagram of one point.

Layout: the atomic levels of atom A in a column on the left, of atom B on the
right, the molecular levels in the middle (for unrestricted solutions alpha in
the left half and beta in the right half of the middle column). Degenerate
levels are drawn side by side. Thin grey lines join each valence MO to the
atomic levels of the shells that make up at least a fifth of it. Electrons
are small filled triangles, pointing up for alpha and down for beta; empty
levels are drawn dashed. Bonding MOs are black, antibonding dark grey,
nonbonding mid grey. Core levels are left out (they lie far below).
"""

from __future__ import annotations

import numpy as np

LINK_PERCENT = 20.0
SHADES = {"bonding": "black", "antibonding": "0.35", "nonbonding": "0.6"}


def _new_axes():
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.2, 6.0), dpi=110)
    return fig.add_subplot(1, 1, 1)


def _clusters(levels, tol=2e-3):
    """Group (energy, item) by near-equal energy, returning [(energy, [items])]."""
    out = []
    for e, item in sorted(levels, key=lambda t: t[0]):
        if out and abs(out[-1][0] - e) < tol:
            out[-1][1].append(item)
        else:
            out.append((e, [item]))
    return out


def _draw_cluster(ax, x0, width, e, items, style, electrons):
    n = len(items)
    gap = 0.08 * width
    w = (width - gap * (n - 1)) / n
    centres = []
    for k, item in enumerate(items):
        xa = x0 + k * (w + gap)
        ax.plot([xa, xa + w], [e, e], **style(item))
        centres.append(xa + w / 2)
        for j, (up, count) in enumerate(electrons(item)):
            for q in range(count):
                dx = (-0.12 + 0.24 * q) * w if count > 1 else 0.0
                ax.plot(xa + w / 2 + dx, e, marker="^" if up else "v", ms=5, color="black", ls="none")
    return centres


def plot_levels(res, ax=None, window_hartree: float = 1.0):
    """Draw a :class:`lcao.single_point.OrbitalsResult`; returns the Axes.

    Args:
        window_hartree: how far above the highest occupied level to draw virtual levels.
    """
    ax = ax or _new_axes()
    a = res.analysis
    sp = res.species
    val = [m for m in a.orbitals if m.formal_class != "core"]
    occ = [m for m in val if m.occupation > 0]
    top = max((m.energy_hartree for m in occ), default=0.0) + window_hartree
    bottom = min((m.energy_hartree for m in val), default=-1.0) - 0.1
    val = [m for m in val if m.energy_hartree <= top]
    spins = sorted({m.spin for m in val}, key=["both", "alpha", "beta"].index)
    # molecular columns
    mid = {"both": (4.0, 2.0)} if spins == ["both"] else {"alpha": (3.6, 1.3), "beta": (5.1, 1.3)}
    mo_pos = {}

    def mo_style(m):
        cls = m.formal_class if m.formal_class in SHADES else "nonbonding"
        return dict(color=SHADES[cls], lw=1.8, ls="-" if m.occupation > 0 else "--")

    def mo_electrons(m):
        if m.spin == "both":
            return [(True, 1), (False, 1)] if m.occupation >= 2 else ([(True, 1)] if m.occupation > 0 else [])
        return [(m.spin == "alpha", 1)] if m.occupation > 0 else []

    for spin, (x0, w) in mid.items():
        ms = [(m.energy_hartree, m) for m in val if m.spin == spin]
        for e, items in _clusters(ms):
            for m, xc in zip(items, _draw_cluster(ax, x0, w, e, items, mo_style, mo_electrons)):
                mo_pos[id(m)] = (xc, e)
            label = items[0].label or "mixed"
            ax.annotate(label.replace("sigma", "σ").replace("pi", "π").replace("delta", "δ").replace("_", ""),
                        (x0 + w + 0.05, e), fontsize=6.5, va="center", color="0.25")
    # atomic columns
    atom_pos = [{}, {}]
    for side, (x0, levels) in enumerate(((0.6, res.atom_levels[0]), (7.0, res.atom_levels[1]))):
        sym = sp.atoms[side]
        core_cut = bottom
        rows = [r for r in levels if core_cut <= r[2] <= top]
        if not rows:
            continue
        # one column: alpha and beta levels of the same shell drawn together when they coincide
        pairs = [(r[2], r) for r in rows]
        for e, items in _clusters(pairs, tol=5e-3):
            def st(r):
                return dict(color="0.2", lw=1.5, ls="-" if r[3] > 0 else "--")

            def el(r):
                return [(r[1] == "alpha", 1)] if r[3] > 0 else []

            for r, xc in zip(items, _draw_cluster(ax, x0, 1.4, e, items, st, el)):
                atom_pos[side].setdefault(r[0], []).append((xc, e))
        ax.annotate(f"{sym}{'' if side else ''} (atom {side + 1})", (x0 + 0.7, top + 0.02), ha="center", fontsize=8)
    # links from MOs to atomic shells
    for m in val:
        if id(m) not in mo_pos:
            continue
        xm, em = mo_pos[id(m)]
        for group, pct in m.composition.items():
            if pct < LINK_PERCENT:
                continue
            name, shell = group.split(" ")
            side = int("".join(ch for ch in name if ch.isdigit())) - 1
            cands = atom_pos[side].get(shell, [])
            if not cands:
                continue
            xa, ea = min(cands, key=lambda t: abs(t[1] - em))
            xa_edge = xa + (0.35 if side == 0 else -0.35)
            ax.plot([xa_edge, xm], [ea, em], color="0.75", lw=0.6, zorder=0)
    ax.set_xlim(0.3, 8.7)
    ax.set_ylim(bottom, top + 0.1)
    ax.set_xticks([])
    ax.set_ylabel("orbital energy / hartree")
    title = f"{sp.label}  {res.level.text}  r = {res.point.r_angstrom:.4f} A  ({res.point.branch})"
    ax.set_title(title, fontsize=9)
    from matplotlib.lines import Line2D

    handles = [
        Line2D([], [], color="black", lw=1.8, label="bonding (formal)"),
        Line2D([], [], color="0.35", lw=1.8, label="antibonding (formal)"),
        Line2D([], [], color="0.6", lw=1.8, label="nonbonding"),
        Line2D([], [], color="0.4", lw=1.2, ls="--", label="empty level"),
        Line2D([], [], marker="^", color="black", ls="none", label="alpha electron"),
        Line2D([], [], marker="v", color="black", ls="none", label="beta electron"),
    ]
    ax.legend(handles=handles, fontsize=6.5, frameon=False, loc="lower center", ncol=3, bbox_to_anchor=(0.5, -0.12))
    if spins != ["both"]:
        ax.annotate("alpha", (4.25, bottom + 0.02), ha="center", fontsize=7, color="0.3")
        ax.annotate("beta", (5.75, bottom + 0.02), ha="center", fontsize=7, color="0.3")
    return ax


def plot_bond_orders(result, ax=None):
    """Bond orders (MO counting, or the effective bond order of natural orbitals; Mayer; Mulliken overlap
    population) against distance for a curve."""
    ax = ax or _new_axes()
    rows = [a for a in result.along if a is not None]
    if not rows:
        return ax
    r = np.array([a["r_angstrom"] for a in rows])
    first = ("mo_count", "MO counting")
    if "effective" in rows[0]["bond_orders"]:  # natural orbitals: (bonding - antibonding occupations) / 2
        first = ("effective", "effective (natural occupations)")
    series = [(*first, dict(color="black", ls="-", marker="s", ms=3)),
              ("mayer", "Mayer", dict(color="0.3", ls="--", marker="o", ms=3)),
              ("mulliken", "Mulliken overlap population", dict(color="0.55", ls=":", marker="^", ms=3))]
    for key, label, style in series:
        y = np.array([np.nan if a["bond_orders"][key] is None else a["bond_orders"][key] for a in rows], float)
        ax.plot(r, y, label=label, **style)
    ax.set_xlabel("bond distance r / angstrom")
    ax.set_ylabel("bond order")
    ax.set_title(f"{result.species.label}  {result.level.text}", fontsize=10)
    ax.legend(fontsize=7, frameon=False)
    return ax
