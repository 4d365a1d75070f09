"""The species a dissociation equilibrium needs, each with its fitted polynomials: the molecule, its
two atoms (or atomic ion) and, for ions, the free electron (pure functions apart from the shipped tables).

Enthalpies of formation at 298.15 K: the neutral atoms' from the shipped CODATA values; an atomic
ion's from its atom's by the ionisation energy or electron affinity, in the electron convention
(the free electron's Delta_f H is zero at every temperature, as in the NIST-JANAF tables):

    Delta_f H(A+, 298) = Delta_f H(A, 298) + IE + [H298 - H0](A+) - [H298 - H0](A) + [H298 - H0](e-)
    Delta_f H(A-, 298) = Delta_f H(A, 298) - EA + [H298 - H0](A-) - [H298 - H0](A) - [H298 - H0](e-)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .atoms import ELECTRON, AtomConstants, atom_constants, electron_constants
from .nasa import NasaFit, fit_nasa
from .statistical import T_REF, thermo_table

#: the range lcao fits polynomials over: the rigid-rotor, separable partition functions are not
#: trusted outside it (below 200 K the polynomial form, above 6000 K dissociation and excited states)
FIT_LIMITS_K = (200.0, 6000.0)
DEFAULT_RANGE_K = (200.0, 1000.0, 6000.0)


@dataclass(frozen=True)
class ThermoEntry:
    """One species of the kinetics files.

    Attributes:
        name: its name in the files (``N2``, ``NO+``, ``O``, ``E``).
        composition: ((element, count), ...); an ion carries ``("E", -charge)``, as the kinetics codes count
            electrons.
        nasa: the polynomials (Delta_f H(298.15 K) in ``nasa.dhf298_kj_per_mol``), fitted at 1 bar.
        table: the statistical table they were fitted to; kind: 'molecule', 'atom' or 'electron'.
        note: level or source of the constants and of Delta_f H(298.15 K).
    """

    name: str
    composition: tuple
    nasa: NasaFit
    table: dict
    kind: str
    note: str
    charge: int = 0


def composition(symbols, charge: int) -> tuple:
    counts: dict = {}
    for s in symbols:
        counts[s] = counts.get(s, 0) + 1
    out = tuple(counts.items())
    return out + ((ELECTRON, -charge),) if charge else out


def temperature_grid(t_range=DEFAULT_RANGE_K) -> np.ndarray:
    """The grid a fit over (low, common, high) uses: 298.15 K, every 50 K, and the three temperatures."""
    lo, mid, hi = (float(x) for x in t_range)
    inner = np.arange(np.ceil(lo / 50.0) * 50.0, hi, 50.0)
    pts = np.concatenate([[lo, mid, hi], inner, [T_REF] if lo <= T_REF <= hi else []])
    if lo < 250.0 < hi:
        pts = np.concatenate([pts, [250.0]])
    return np.unique(pts)


def check_range(t_range) -> tuple[float, float, float]:
    """(low, common, high) in K, inside :data:`FIT_LIMITS_K` and in order; InputError otherwise."""
    try:
        lo, mid, hi = (float(x) for x in t_range)
    except (TypeError, ValueError):
        raise InputError(f"a temperature range is LOW,COMMON,HIGH in K, got {t_range!r}") from None
    if not lo < mid < hi:
        raise InputError(f"temperature range {lo:g},{mid:g},{hi:g} K is not in increasing order")
    if lo < FIT_LIMITS_K[0] or hi > FIT_LIMITS_K[1]:
        raise InputError(f"temperature range {lo:g}-{hi:g} K reaches outside {FIT_LIMITS_K[0]:g}-{FIT_LIMITS_K[1]:g} K,"
                         " the range lcao fits polynomials over")
    if not lo <= T_REF <= hi:
        raise InputError(f"temperature range {lo:g}-{hi:g} K must contain 298.15 K, where the enthalpy of formation is set")
    return lo, mid, hi


def thermal_enthalpy_298(constants) -> float:
    """H(298.15 K) - H(0) in kJ/mol of a molecule's or an atom's constants."""
    return float(thermo_table(constants, [T_REF])["h298_minus_h0_kj_per_mol"])


def atom_dhf298(atom: AtomConstants) -> tuple[float, str]:
    """Delta_f H(298.15 K) of an atom, atomic ion or the electron (kJ/mol) and where it came from."""
    from ..data import atomic_enthalpies, ionization
    from ..units import ENERGY_UNITS, HARTREE_EV

    if atom.symbol == ELECTRON:
        return 0.0, "electron convention: zero at every temperature"
    table = atomic_enthalpies()
    if atom.symbol not in table:
        raise InputError(f"no enthalpy of formation is shipped for the {atom.symbol} atom")
    base = table[atom.symbol]["dhf298_kj_per_mol"]
    src = f"{table[atom.symbol]['source']} ({table[atom.symbol]['checked']})"
    if atom.charge == 0:
        return base, src
    if abs(atom.charge) != 1:
        raise InputError(f"no enthalpy of formation for {atom.name}: only singly charged atomic ions are covered")
    ion = ionization().get(atom.symbol)
    ev_kj = ENERGY_UNITS["kj_per_mol"] / HARTREE_EV
    neutral = atom_constants(atom.symbol, 0)
    h_e = thermal_enthalpy_298(electron_constants())
    dh = thermal_enthalpy_298(atom) - thermal_enthalpy_298(neutral)
    if atom.charge > 0:
        value = base + ion["ionization_energy_ev"] * ev_kj + dh + h_e
        what = f"ionisation energy {ion['ionization_energy_ev']} eV"
    else:
        if ion is None or ion["electron_affinity_ev"] is None:
            raise InputError(f"{atom.name} is not bound: no enthalpy of formation")
        value = base - ion["electron_affinity_ev"] * ev_kj + dh - h_e
        what = f"electron affinity {ion['electron_affinity_ev']} eV"
    return value, f"{src}; {what} ({ion['source']}; {ion['checked']}); electron convention"


def fragments_of(species, mass_numbers=None) -> tuple[AtomConstants, AtomConstants]:
    """The separated atoms a molecule dissociates into: for a singly charged ion the charge goes where the
    experimental ionisation energy is lower (cation) or the electron affinity higher (anion)."""
    from ..data import ionization

    a, b = species.atoms
    ma, mb = mass_numbers or (None, None)
    q = species.charge
    if q == 0:
        return atom_constants(a, 0, ma), atom_constants(b, 0, mb)
    if abs(q) != 1:
        raise InputError(f"{species.label}: the separated atoms of a multiply charged ion are not tabulated;"
                         " only neutral and singly charged molecules get atoms in the kinetics files")
    table = ionization()
    if q > 0:
        key = [table[s]["ionization_energy_ev"] for s in (a, b)]
        first = key[0] <= key[1]
    else:
        key = [table[s]["electron_affinity_ev"] or -1.0 for s in (a, b)]
        first = key[0] >= key[1]
    return (atom_constants(a, q if first else 0, ma), atom_constants(b, 0 if first else q, mb))


def atom_entry(atom: AtomConstants, t_range=DEFAULT_RANGE_K, form: str = "nasa7") -> ThermoEntry:
    """Fit the atom's (or the electron's) table over ``t_range``."""
    t = temperature_grid(t_range)
    table = thermo_table(atom, t)
    s298 = float(thermo_table(atom, [T_REF])["s_j_per_mol_k"][0])
    dhf, src = atom_dhf298(atom)
    lo, mid, hi = t_range
    nasa = fit_nasa(t, table["cp_j_per_mol_k"], s298, dhf, lo, mid, hi, form=form)
    kind = "electron" if atom.symbol == ELECTRON else "atom"
    comp = ((ELECTRON, 1),) if kind == "electron" else composition([atom.symbol], atom.charge)
    note = (f"{atom.name}: translation and the ground term's fine-structure levels ({atom.source});"
            f" Delta_f H(298.15 K) {dhf:.3f} kJ/mol: {src}")
    return ThermoEntry(atom.name, comp, nasa, table, kind, note, atom.charge)
