"""One internal unit system: hartree and bohr (atomic units).

Every conversion factor comes from ``scipy.constants`` (CODATA, the version
SciPy ships); none is typed by hand. Conversions happen at the edges: input
parsing, export and display.
"""

from __future__ import annotations

from scipy import constants as _c

CODATA_SOURCE = "scipy.constants (the CODATA release SciPy ships; 2022 for SciPy >= 1.15)"

#: 1 bohr in angstrom.
BOHR_ANGSTROM: float = _c.physical_constants["Bohr radius"][0] / _c.angstrom
#: 1 hartree in eV.
HARTREE_EV: float = _c.physical_constants["Hartree energy in eV"][0]
#: 1 hartree in J.
HARTREE_J: float = _c.physical_constants["Hartree energy"][0]
#: 1 hartree in kJ/mol.
HARTREE_KJMOL: float = HARTREE_J * _c.N_A / 1000.0
#: 1 hartree in kcal/mol (thermochemical calorie).
HARTREE_KCALMOL: float = HARTREE_J * _c.N_A / _c.calorie / 1000.0
#: 1 hartree in cm^-1.
HARTREE_CM1: float = _c.physical_constants["hartree-inverse meter relationship"][0] / 100.0
#: 1 atomic mass unit (dalton) in electron masses.
AMU_ME: float = _c.physical_constants["atomic mass constant"][0] / _c.m_e

ENERGY_UNITS = {
    "hartree": 1.0,
    "ev": HARTREE_EV,
    "kj_per_mol": HARTREE_KJMOL,
    "kcal_per_mol": HARTREE_KCALMOL,
    "cm1": HARTREE_CM1,
}
LENGTH_UNITS = {"bohr": 1.0, "angstrom": BOHR_ANGSTROM}


def angstrom_to_bohr(r):
    """Distance(s) in angstrom -> bohr."""
    return r / BOHR_ANGSTROM


def bohr_to_angstrom(r):
    """Distance(s) in bohr -> angstrom."""
    return r * BOHR_ANGSTROM


def hartree_to(value, unit: str):
    """Energy(ies) in hartree -> ``unit`` (one of ``ENERGY_UNITS``)."""
    try:
        return value * ENERGY_UNITS[unit]
    except KeyError:
        raise ValueError(f"unknown energy unit {unit!r}; allowed: {', '.join(ENERGY_UNITS)}") from None


def to_hartree(value, unit: str):
    """Energy(ies) in ``unit`` -> hartree."""
    try:
        return value / ENERGY_UNITS[unit]
    except KeyError:
        raise ValueError(f"unknown energy unit {unit!r}; allowed: {', '.join(ENERGY_UNITS)}") from None
