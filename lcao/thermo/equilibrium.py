"""Dissociation equilibrium AB <=> A + B from the partition functions (pure functions on arrays).

With every species' energy counted from its lowest level, Delta_r H(0 K) is
the dissociation energy D_0, and

    Delta_r H(T) = D_0 + [H(T) - H(0)]_A + [H(T) - H(0)]_B - [H(T) - H(0)]_AB
    Delta_r S(T) = S_A + S_B - S_AB          (standard states at 1 bar)
    K_p(T)       = exp(-Delta_r G(T) / RT)   (bar units: the standard pressure is 1 bar)

The degree of dissociation alpha is the fraction of the molecules dissociated
at equilibrium, starting from the pure molecule at total pressure p:
K_p = alpha^2 (p/p0) / (1 - alpha^2) for A + B, and 4 alpha^2 (p/p0) / (1 - alpha^2)
for 2 A (ideal gases).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .statistical import R, functions_of


@dataclass(frozen=True)
class Dissociation:
    """K_p, Delta_r H, Delta_r G and the degree of dissociation on a temperature grid (SI units)."""

    t_k: np.ndarray
    kp_bar: np.ndarray
    drh_j_per_mol: np.ndarray
    drg_j_per_mol: np.ndarray
    alpha: np.ndarray  # at ``pressure_bar``
    alpha_1bar: np.ndarray
    pressure_bar: float
    d0_j_per_mol: float
    same_products: bool

    @property
    def log10_kp(self) -> np.ndarray:
        return np.log10(self.kp_bar)


def degree_of_dissociation(kp_bar, pressure_bar: float, same_products: bool):
    """alpha from K_p (bar) at total pressure ``pressure_bar`` (see the module docstring)."""
    kp = np.asarray(kp_bar, float)
    p = pressure_bar * (4.0 if same_products else 1.0)
    return np.sqrt(kp / (kp + p))


def dissociation(molecule, fragments, d0_j_per_mol: float, t, pressure_bar: float = 1.0) -> Dissociation:
    """The equilibrium AB <=> A + B.

    Args:
        molecule: :class:`lcao.thermo.MoleculeConstants`; fragments: the two atoms' constants
            (:class:`lcao.thermo.atoms.AtomConstants`).
        d0_j_per_mol: the dissociation energy from the molecule's lowest level to the atoms' lowest levels.
        t: temperatures (K); pressure_bar: total pressure for ``alpha``.
    """
    t = np.atleast_1d(np.asarray(t, float))
    fm = functions_of(molecule)(molecule, t)
    fa = [functions_of(a)(a, t) for a in fragments]
    drh = d0_j_per_mol + sum(f["h_thermal_j_per_mol"] for f in fa) - fm["h_thermal_j_per_mol"]
    drs = sum(f["s_j_per_mol_k"] for f in fa) - fm["s_j_per_mol_k"]
    drg = drh - t * drs
    kp = np.exp(-drg / (R * t))
    same = fragments[0] == fragments[1]
    return Dissociation(t, kp, drh, drg, degree_of_dissociation(kp, pressure_bar, same),
                        degree_of_dissociation(kp, 1.0, same), float(pressure_bar), float(d0_j_per_mol), same)
