"""Atomic spin-orbit corrections to dissociation energies (common thermochemical practice, e.g. the
Gaussian-n and Weizmann-n protocols): a non-relativistic calculation gives each atom the average of its
ground term's J levels; the real atom sits in the lowest level. The correction of one atom is

    dE_SO = E(lowest J) - sum_J (2J+1) E_J / sum_J (2J+1)     (<= 0),

and D_e, D_0 shrink by |dE_SO(A) + dE_SO(B)|. The J levels come from the NIST Atomic Spectra Database
(``lcao/data/atomic_fine_structure.csv``, each row's source and whether it is quoted from memory). The
molecule's own first-order spin-orbit splitting (Pi states) is not included.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..units import HARTREE_CM1


def term_shift_cm1(levels) -> float:
    """dE_SO of a term from its ((J, energy_cm1), ...) levels, cm-1 (0 for a single level)."""
    weights = [2 * j + 1 for j, _ in levels]
    mean = sum(w * e for w, (_, e) in zip(weights, levels)) / sum(weights)
    return min(e for _, e in levels) - mean


@dataclass(frozen=True)
class SpinOrbit:
    """The atomic spin-orbit correction of a dissociation.

    Attributes:
        correction_hartree: dE_SO(A) + dE_SO(B) (negative or zero), hartree; None when an atom has no data.
        atoms: per atom, (label, term, dE_SO in cm-1 or None, source, checked).
    """

    correction_hartree: float | None
    atoms: tuple


def correction(atoms) -> SpinOrbit:
    """The correction for separated atoms given as (symbol, charge) pairs."""
    from ..atoms import charge_text
    from ..data import fine_structure

    table = fine_structure()
    rows, total, missing = [], 0.0, False
    for symbol, charge in atoms:
        row = table.get((symbol, charge))
        label = f"{symbol}{charge_text(charge)}"
        if row is None:
            rows.append((label, None, None, "no fine-structure data shipped", ""))
            missing = True
            continue
        shift = term_shift_cm1(row["levels"])
        total += shift
        rows.append((label, row["term"], shift, row["source"], row["checked"]))
    return SpinOrbit(None if missing else total / HARTREE_CM1, tuple(rows))
