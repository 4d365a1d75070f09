"""The kinetics hand-off of a sheet: the species of the kinetics files (the molecule, its separated atoms,
the electron for an ion) with polynomials at the chosen reference pressure, and the dissociation
equilibrium AB <=> A + B on the sheet's temperatures."""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ..units import ENERGY_UNITS


REFERENCE_PRESSURES = {"1bar": 1e5, "1atm": 101325.0}


def check_handoff(reference_pressure: str, pressure_bar: float) -> None:
    if reference_pressure not in REFERENCE_PRESSURES:
        raise InputError(f"reference pressure {reference_pressure!r} is not one of {', '.join(REFERENCE_PRESSURES)}")
    if not (isinstance(pressure_bar, (int, float)) and math.isfinite(pressure_bar) and pressure_bar > 0):
        raise InputError(f"the pressure for the degree of dissociation must be a positive number of bar, got {pressure_bar!r}")


def kinetics_handoff(sp, molc, table, nasa, fragments, vals, t_range, polynomial, reference_pressure, name_suffix,
                     pressure_bar, note):
    """The species of the kinetics files (polynomials at the chosen reference pressure) and the
    dissociation equilibrium on the table's temperatures."""
    from .atoms import electron_constants
    from .equilibrium import dissociation
    from .nasa import at_reference_pressure
    from .species_set import ThermoEntry, atom_entry, composition

    p_ref = REFERENCE_PRESSURES[reference_pressure]
    lo, mid, hi = t_range
    nasa7 = nasa if nasa.form == "nasa7" else fit_nasa_like(nasa, table, "nasa7", t_range)
    entries = [ThermoEntry(sp.label + name_suffix, composition(sp.atoms, sp.charge), nasa7, table, "molecule", note,
                           sp.charge)]
    atoms = list(dict.fromkeys(fragments))
    if sp.charge:
        atoms.append(electron_constants())
    entries += [atom_entry(a, t_range, "nasa7") for a in atoms]
    nine = {}
    if polynomial == "nasa9":
        nine = {entries[0].name: nasa}
        nine.update({e.name: fit_nasa_like(e.nasa, e.table, "nasa9", t_range) for e in entries[1:]})
    from dataclasses import replace

    entries = [replace(e, nasa=at_reference_pressure(e.nasa, p_ref)) for e in entries]
    nine = {k: at_reference_pressure(v, p_ref) for k, v in nine.items()}
    d0 = vals.get("d0")
    dissoc = None
    if d0 is not None and d0 > 0:
        dissoc = dissociation(molc, fragments, d0 * ENERGY_UNITS["kj_per_mol"] * 1000.0, table["t_k"], pressure_bar)
    handoff = {
        "reference_pressure": reference_pressure,
        "reference_pressure_pa": p_ref,
        "polynomial": polynomial,
        "nasa9": nine,
        "temperature_range_k": list(t_range),
        "d0_kj_per_mol": None if d0 is None else d0 * ENERGY_UNITS["kj_per_mol"],
        "pressure_bar": pressure_bar,
        "species": entries[0].name,
        "products": " + ".join(a.name for a in fragments),
    }
    return tuple(entries), dissoc, handoff


def fit_nasa_like(fit, table, form, t_range):
    """The same table fitted in the other polynomial form, with the same Delta_f H(298.15 K) and S(298.15 K)."""
    from .nasa import fit_nasa
    from .statistical import T_REF

    s298 = float(np.interp(T_REF, table["t_k"], table["s_j_per_mol_k"]))
    return fit_nasa(table["t_k"], table["cp_j_per_mol_k"], s298, fit.dhf298_kj_per_mol, *t_range, form=form)
