"""Ideal-gas thermochemistry of the separated atoms, atomic ions and the free electron (pure functions).

Translation (Sackur-Tetrode at the standard pressure) and the electronic
partition function summed over the fine-structure levels of the ground term
(degeneracy 2J+1, energies from the shipped NIST Atomic Spectra Database
rows). Excited terms are left out: the lowest ones of the first-row atoms lie
above 15 000 cm-1 (N 2D, O 1D) and add under 0.01 to log10 K_p of a
dissociation at 5000 K. Same units and conventions as
:mod:`lcao.thermo.statistical` (J, mol, K; energies from the lowest level).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as c

from ..errors import InputError
from .statistical import CM1_J, P_STANDARD, R

#: the free electron's name in the kinetics files (the electron convention: Delta_f H = 0 at every T)
ELECTRON = "E"


@dataclass(frozen=True)
class AtomConstants:
    """What an atom's partition functions need.

    Attributes:
        symbol, charge: the atom (``"E"``, charge -1, for the free electron).
        mass_dalton: its mass (electrons removed or added for an ion).
        levels: ((J, energy_cm1), ...) of the ground term's fine-structure levels.
        source: where the levels come from, and how far they were checked.
    """

    symbol: str
    charge: int
    mass_dalton: float
    levels: tuple
    source: str = ""

    @property
    def name(self) -> str:
        if self.symbol == ELECTRON:
            return ELECTRON
        return self.symbol + ("+" * self.charge if self.charge > 0 else "-" * -self.charge)


def atom_constants(symbol: str, charge: int = 0, mass_number: int | None = None) -> AtomConstants:
    """The shipped fine-structure levels and the isotope's mass (most abundant unless given)."""
    from ..data import fine_structure
    from ..masses import isotope_mass, most_abundant

    row = fine_structure().get((symbol, charge))
    if row is None:
        raise InputError(f"no fine-structure levels are shipped for {symbol}{'+' * max(charge, 0)}{'-' * max(-charge, 0)}:"
                         " its thermochemistry cannot be tabulated")
    mass = isotope_mass(symbol, mass_number or most_abundant(symbol)) - charge * c.m_e / c.atomic_mass
    return AtomConstants(symbol, charge, float(mass), tuple(row["levels"]), f"{row['source']} ({row['checked']})")


def electron_constants() -> AtomConstants:
    """The free electron: mass m_e, spin degeneracy 2."""
    return AtomConstants(ELECTRON, -1, c.m_e / c.atomic_mass, ((0.5, 0.0),), "CODATA (scipy.constants)")


def atom_functions(atom: AtomConstants, t) -> dict:
    """Cp, S and H - H(0) of the atom per mole at temperatures ``t`` (K), 1 bar; the same keys as
    :func:`lcao.thermo.statistical.thermo_functions`."""
    t = np.atleast_1d(np.asarray(t, float))
    m = atom.mass_dalton * c.atomic_mass
    lam = (2 * np.pi * m * c.k * t / c.h**2) ** 1.5 * c.k * t / P_STANDARD
    s_tr = R * (np.log(lam) + 2.5)
    e = np.array([lv[1] for lv in atom.levels], float) * CM1_J
    e = e - e.min()
    g = np.array([2 * lv[0] + 1 for lv in atom.levels], float)
    w = g[None, :] * np.exp(-e[None, :] / (c.k * t[:, None]))
    q = w.sum(axis=1)
    mean = (w * e).sum(axis=1) / q
    var = (w * e**2).sum(axis=1) / q - mean**2
    u_el = c.N_A * mean
    s_el = R * np.log(q) + u_el / t
    cv_el = c.N_A * var / (c.k * t**2)
    return {
        "t_k": t,
        "cp_j_per_mol_k": 2.5 * R + cv_el,
        "s_j_per_mol_k": s_tr + s_el,
        "h_thermal_j_per_mol": 2.5 * R * t + u_el,
        "parts": {"translation_s": s_tr, "electronic_s": s_el},
    }
