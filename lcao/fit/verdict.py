"""Does the molecule exist at this level? A verdict on every curve, from arrays (pure functions).

* ``bound``: a minimum inside the grid below the separated atoms (with D_e);
* ``repulsive``: no minimum inside the grid: the energy falls towards the separated atoms;
* ``unbound``: a minimum exists but lies above the separated atoms;
* ``superposition-limited``: a well that the counterpoise correction (Boys & Bernardi, Mol. Phys. 19, 553
  (1970)) removes: it is basis-set superposition error, not binding;
* ``metastable to electron loss``: an anion whose energy lies above the neutral's at the same distance over
  its well (it holds its extra electron only as a resonance there).

A repulsive or unbound curve is a result, not a failure; it carries no fitted constants.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

BOUND, REPULSIVE, UNBOUND, SUPERPOSITION, METASTABLE = (
    "bound", "repulsive", "unbound", "superposition-limited", "metastable to electron loss")
VERDICTS = (BOUND, REPULSIVE, UNBOUND, SUPERPOSITION, METASTABLE)
#: an energy rise smaller than this between neighbouring points does not make a minimum (SCF noise)
NOISE_HARTREE = 1e-7
#: a local minimum must rise by this much (0.03 meV) on both sides before a lower point to count (a bend
#: where two branches meet, or convergence noise, is no well)
MIN_PROMINENCE_HARTREE = 1e-6


@dataclass(frozen=True)
class Verdict:
    """What a curve says about the molecule.

    Attributes:
        kind: one of :data:`VERDICTS`.
        detail: one sentence for the summary.
        de_hartree: the well depth against the separated atoms (bound and metastable), else None.
        distances_bohr: for ``metastable to electron loss``, where the neutral lies below.
    """

    kind: str
    detail: str
    de_hartree: float | None = None
    distances_bohr: tuple = ()


def interior_minimum(r, e) -> int | None:
    """Index of the lowest point when it lies inside the points and rises on both sides by more than the
    noise, else None (no minimum inside the grid)."""
    e = np.asarray(e, float)
    if len(e) < 3:
        return None
    i = int(np.argmin(e))
    if i == 0 or i == len(e) - 1:
        return None
    if e[i - 1] - e[i] < NOISE_HARTREE or e[i + 1] - e[i] < NOISE_HARTREE:
        return None
    return i


def local_minima(e) -> list[int]:
    """Indices of the interior minima of ``e`` whose prominence (how far the energy rises before a lower
    point is reached, on the lower of its two sides) exceeds :data:`MIN_PROMINENCE_HARTREE` (SciPy's
    ``find_peaks`` on -e, which takes a flat bottom once), lowest first."""
    from scipy.signal import find_peaks

    e = np.asarray(e, float)
    if len(e) < 3 or not np.all(np.isfinite(e)):
        return []
    idx, _ = find_peaks(-e, prominence=MIN_PROMINENCE_HARTREE)
    return sorted((int(i) for i in idx), key=lambda k: e[k])


def _minima(r, e):
    """(energy, distance) of each local minimum of one curve (its finite points), lowest first."""
    r, e = np.asarray(r, float), np.asarray(e, float)
    keep = np.isfinite(e)
    r, e = r[keep], e[keep]
    return [(float(e[k]), float(r[k])) for k in local_minima(e)]


def classify(r, e, limit: float, corrected_e=None, neutral_e=None, others=()) -> Verdict | None:
    """The verdict of a curve.

    The counterpoise-corrected energies decide where they were computed. Every local minimum counts, on
    the curve and on the branches in ``others`` (the restricted well of a closed-shell molecule is one even
    where the lowest curve follows the unrestricted branch): the deepest below the separated atoms makes the
    curve bound; otherwise any minimum makes it unbound; a well below the atoms that only the uncorrected
    energies have is superposition error.

    Args:
        r, e: the trusted points, bohr (increasing) and hartree.
        limit: the separated atoms at the same level, hartree.
        corrected_e: the counterpoise-corrected energies at ``r`` (None when not computed).
        neutral_e: for an anion, the neutral's energies at ``r`` (NaN where not computed).
        others: (r, e, corrected_e or None) of other branches whose wells count.

    Returns:
        the Verdict, or None where the points cannot tell (no minimum, and the energy lowest at the shortest
        distance: the grid misses the well).
    """
    from ..units import HARTREE_EV, bohr_to_angstrom

    r = np.asarray(r, float)
    e = np.asarray(e, float)
    judged = e if corrected_e is None else np.asarray(corrected_e, float)
    raw, mins = _minima(r, e), _minima(r, judged)
    for ro, eo, co in others:
        ro, eo = np.asarray(ro, float), np.asarray(eo, float)
        raw += _minima(ro, eo)
        mins += _minima(ro, eo if co is None else np.asarray(co, float))
    raw.sort()
    mins.sort()
    raw_below = [m for m in raw if m[0] < limit]
    below = [m for m in mins if m[0] < limit]
    if corrected_e is not None and raw_below and not below:
        depth = float(limit - raw_below[0][0])
        well = f"the well of {depth * HARTREE_EV * 1000:.2f} meV below the atoms goes with the counterpoise correction"
        if not mins:
            return Verdict(SUPERPOSITION, f"superposition-limited: {well}; it is basis-set superposition error, not"
                                          " binding", depth)
        ek, rk = mins[0]
        return Verdict(UNBOUND, f"unbound at this level: {well} (basis-set superposition error), and the corrected"
                                f" minimum at {bohr_to_angstrom(rk):.3f} A lies {(ek - limit) * HARTREE_EV:.3f} eV"
                                " above the separated atoms", depth)
    if not mins:
        if int(np.argmin(judged)) != len(judged) - 1:
            return None  # lowest at the short end: the grid misses the minimum, no verdict on these points
        return Verdict(REPULSIVE, "repulsive at this level: the energy falls all the way to the separated atoms;"
                                  " no well")
    if not below:
        ek, rk = mins[0]
        return Verdict(UNBOUND, f"unbound at this level: a minimum at {bohr_to_angstrom(rk):.3f} A lies"
                                f" {(ek - limit) * HARTREE_EV:.3f} eV above the separated atoms")
    depth = float(limit - below[0][0])
    if neutral_e is not None:
        n = np.asarray(neutral_e, float)
        over = judged < limit  # the distances over the anion's well
        hit = [k for k in range(len(r)) if over[k] and np.isfinite(n[k]) and n[k] < e[k]]
        if hit:
            lo, hi = bohr_to_angstrom(r[hit[0]]), bohr_to_angstrom(r[hit[-1]])
            return Verdict(METASTABLE, f"metastable to electron loss: the neutral lies below the anion from {lo:.3f}"
                                       f" to {hi:.3f} A over its well; the extra electron is not bound there", depth,
                           tuple(float(r[k]) for k in hit))
    return Verdict(BOUND, f"bound: D_e {depth * HARTREE_EV:.3f} eV against the separated atoms", depth)
