"""Ideal-gas thermochemistry of a diatomic from its constants (pure functions on arrays).

Translation (Sackur-Tetrode at the standard pressure), rotation as a rigid
rotor summed explicitly over the levels E_J = B J(J+1) with the symmetry
number (which matters for H2 at room temperature, where the high-temperature
limit kT/(sigma B) is about 10 % off), vibration either harmonic from omega_e
or summed over given levels G(v), and the ground-state electronic degeneracy.
Energies of the internal levels are counted from the ground level, so
H(T) - H(0) is the thermal enthalpy. SI units (J, mol, K) throughout;
constants from ``scipy.constants``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as c

R = c.R
P_STANDARD = 1e5  # Pa (1 bar)
T_REF = 298.15
CM1_J = c.h * c.c * 100.0  # one cm-1 in J


@dataclass(frozen=True)
class MoleculeConstants:
    """What the partition functions need.

    Attributes:
        mass_dalton: molecular mass.
        symmetry_number: 2 for a homonuclear molecule of one isotope, else 1.
        b_cm1: rotational constant (B_0 when known, else B_e).
        we_cm1: harmonic wavenumber; wexe_cm1 anharmonicity (used only with ``levels_cm1`` None and anharmonic).
        levels_cm1: vibrational term values G(v) - G(0) to sum over (None for harmonic).
        electronic_degeneracy: 2S+1, times 2 for Pi and higher states.
        nuclear_spin: spin I of the identical nuclei of a homonuclear molecule whose
            ortho and para forms are treated as a frozen "normal" mixture (H2, D2,
            T2, as the standard tables do); None sums all J with the symmetry number.
    """

    mass_dalton: float
    symmetry_number: int
    b_cm1: float
    we_cm1: float
    electronic_degeneracy: int
    levels_cm1: tuple | None = None
    nuclear_spin: float | None = None


def _moments(energies_j, degeneracies, t):
    """ln q, <E>, <E^2> - <E>^2 for level energies (J, counted from the lowest) at temperatures t (K)."""
    e = np.asarray(energies_j, float)[None, :]
    g = np.asarray(degeneracies, float)[None, :]
    beta = 1.0 / (c.k * np.asarray(t, float)[:, None])
    w = g * np.exp(-beta * e)
    q = w.sum(axis=1)
    mean = (w * e).sum(axis=1) / q
    var = (w * e**2).sum(axis=1) / q - mean**2
    return np.log(q), mean, var


def rotational_levels(b_cm1: float, t_max: float):
    """Rigid-rotor energies (J) and degeneracies up to well above kT_max."""
    kt = c.k * t_max / CM1_J
    j_max = int(np.sqrt(40.0 * kt / b_cm1)) + 10
    j = np.arange(j_max + 1)
    return b_cm1 * CM1_J * j * (j + 1), 2 * j + 1


def _frozen_spin_isomers(e_rot, g_rot, t, spin):
    """Rotational S, U, Cv of a frozen ortho/para mixture (conventional: nuclear spin entropy left out).

    Mole fractions follow the nuclear-spin weights: for fermions (half-integer I) odd J carry
    (I+1)(2I+1) and even J I(2I+1); for bosons the other way round. Each form is its own ideal
    gas; the mixing and spin-degeneracy entropies add up to R ln (2I+1)^2 and are left out,
    so S tends to the symmetry-number value at high temperature.
    """
    j = np.arange(len(e_rot))
    heavy, light = (spin + 1) * (2 * spin + 1), spin * (2 * spin + 1)
    fermion = abs(spin * 2 % 2 - 1) < 1e-9
    w_odd, w_even = (heavy, light) if fermion else (light, heavy)
    s_tot = np.zeros_like(t)
    u_tot = np.zeros_like(t)
    cv_tot = np.zeros_like(t)
    for parity, w in ((1, w_odd), (0, w_even)):
        if w == 0:
            continue
        x = w / (w_odd + w_even)
        sel = j % 2 == parity
        lnq, mean, var = _moments(e_rot[sel], g_rot[sel], t)
        u = c.N_A * mean
        s_tot += x * (R * lnq + u / t)
        u_tot += x * u
        cv_tot += x * c.N_A * var / (c.k * t**2)
    return s_tot, u_tot, cv_tot


def thermo_functions(mol: MoleculeConstants, t) -> dict:
    """Cp, S, H - H(0), and their parts, per mole, at temperatures ``t`` (K), 1 bar.

    Returns:
        dict of arrays (J/(mol K) for cp and s, J/mol for h_thermal).
    """
    t = np.atleast_1d(np.asarray(t, float))
    m = mol.mass_dalton * c.atomic_mass
    # translation
    lam = (2 * np.pi * m * c.k * t / c.h**2) ** 1.5 * c.k * t / P_STANDARD
    s_tr = R * (np.log(lam) + 2.5)
    cp_tr = np.full_like(t, 2.5 * R)
    h_tr = 2.5 * R * t
    # rotation, explicit sum
    e_rot, g_rot = rotational_levels(mol.b_cm1, float(t.max()))
    if mol.nuclear_spin is not None and mol.symmetry_number == 2:
        s_rot, u_rot, cv_rot = _frozen_spin_isomers(e_rot, g_rot, t, mol.nuclear_spin)
    else:
        lnq, mean, var = _moments(e_rot, g_rot, t)
        lnq = lnq - np.log(mol.symmetry_number)
        u_rot = c.N_A * mean
        s_rot = R * lnq + u_rot / t
        cv_rot = c.N_A * var / (c.k * t**2)
    # vibration
    if mol.levels_cm1 is None:
        x = mol.we_cm1 * CM1_J / (c.k * t)
        u_vib = R * t * x / np.expm1(x)
        s_vib = R * (x / np.expm1(x) - np.log1p(-np.exp(-x)))
        cv_vib = R * x**2 * np.exp(x) / np.expm1(x) ** 2
    else:
        ev = (np.asarray(mol.levels_cm1, float) - mol.levels_cm1[0]) * CM1_J
        lnq_v, mean_v, var_v = _moments(ev, np.ones_like(ev), t)
        u_vib = c.N_A * mean_v
        s_vib = R * lnq_v + u_vib / t
        cv_vib = c.N_A * var_v / (c.k * t**2)
    s_el = np.full_like(t, R * np.log(mol.electronic_degeneracy))
    return {
        "t_k": t,
        "cp_j_per_mol_k": cp_tr + cv_rot + cv_vib,
        "s_j_per_mol_k": s_tr + s_rot + s_vib + s_el,
        "h_thermal_j_per_mol": h_tr + u_rot + u_vib,
        "parts": {"translation_s": s_tr, "rotation_s": s_rot, "vibration_s": s_vib, "electronic_s": s_el},
    }


def functions_of(constants):
    """The partition-function routine for a molecule's or an atom's constants."""
    from .atoms import AtomConstants, atom_functions

    return atom_functions if isinstance(constants, AtomConstants) else thermo_functions


def thermo_table(mol, t) -> dict:
    """Cp, S, H(T) - H(298.15 K) and the Gibbs energy function -(G - H(298.15))/T of a molecule
    (:class:`MoleculeConstants`) or an atom (:class:`lcao.thermo.atoms.AtomConstants`)."""
    fn = functions_of(mol)
    f = fn(mol, t)
    h298 = float(fn(mol, [T_REF])["h_thermal_j_per_mol"][0])
    dh = f["h_thermal_j_per_mol"] - h298
    gef = f["s_j_per_mol_k"] - dh / f["t_k"]
    return {
        "t_k": f["t_k"],
        "cp_j_per_mol_k": f["cp_j_per_mol_k"],
        "s_j_per_mol_k": f["s_j_per_mol_k"],
        "h_minus_h298_kj_per_mol": dh / 1000.0,
        "gef_j_per_mol_k": gef,
        "h298_minus_h0_kj_per_mol": h298 / 1000.0,
    }
