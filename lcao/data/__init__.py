"""Reference tables shipped with the package, each row with its source.

``diatomic_constants.csv``: experimental ground-state constants (Huber &
Herzberg, Constants of Diatomic Molecules, 1979; NIST Chemistry WebBook).
The ``checked`` column says how far each row has been checked; most values are
quoted from memory and have not been checked against the printed table.
``atomic_enthalpies.csv``: standard enthalpies of formation of the gaseous
atoms (CODATA Key Values), for enthalpies of formation derived from a
computed atomisation energy.
``atomic_fine_structure.csv``: the J levels of the atoms' and atomic ions'
ground terms (NIST Atomic Spectra Database), for spin-orbit corrections and
the atoms' electronic partition functions.
``atomic_ionization.csv``: first ionisation energies and electron affinities
(NIST ASD; Andersen, Haugen & Hotop 1999), for the enthalpies of formation of
atomic and molecular ions.
"""

from __future__ import annotations

import csv
from functools import lru_cache
from importlib import resources

NUMERIC = ("multiplicity", "re_angstrom", "we_cm1", "wexe_cm1", "be_cm1", "alpha_e_cm1", "d0_ev")


@lru_cache(maxsize=1)
def handbook_table() -> dict[str, dict]:
    """Species label -> row (numbers as float, multiplicity as int, empty as None)."""
    text = resources.files(__package__).joinpath("diatomic_constants.csv").read_text(encoding="utf-8")
    out = {}
    for row in csv.DictReader(text.splitlines()):
        rec = dict(row)
        for key in NUMERIC:
            v = rec.get(key, "")
            rec[key] = None if v in ("", None) else (int(v) if key == "multiplicity" else float(v))
        out[rec["species"]] = rec
    return out


def handbook_row(label: str) -> dict | None:
    """The handbook row of a species label (``'N2'``, ``'NO+'``), or None."""
    return handbook_table().get(label)


@lru_cache(maxsize=1)
def atomic_enthalpies() -> dict[str, dict]:
    """Element symbol -> {'dhf298_kj_per_mol', 'source', 'checked'} (gaseous atoms at 298.15 K)."""
    text = resources.files(__package__).joinpath("atomic_enthalpies.csv").read_text(encoding="utf-8")
    out = {}
    for row in csv.DictReader(text.splitlines()):
        out[row["symbol"]] = {**row, "dhf298_kj_per_mol": float(row["dhf298_kj_per_mol"])}
    return out


@lru_cache(maxsize=1)
def fine_structure() -> dict[tuple[str, int], dict]:
    """(symbol, charge) -> {'term', 'levels': ((J, energy_cm1), ...), 'source', 'checked'}."""
    text = resources.files(__package__).joinpath("atomic_fine_structure.csv").read_text(encoding="utf-8")
    out = {}
    for row in csv.DictReader(text.splitlines()):
        levels = tuple((float(j), float(e)) for j, e in (part.split(":") for part in row["levels_j_cm1"].split(";")))
        out[(row["symbol"], int(row["charge"]))] = {**row, "levels": levels}
    return out


@lru_cache(maxsize=1)
def ionization() -> dict[str, dict]:
    """Element symbol -> {'ionization_energy_ev', 'electron_affinity_ev' (None: no bound anion), 'source',
    'checked'}: for the enthalpies of formation of atomic ions and of molecular ions derived from them."""
    text = resources.files(__package__).joinpath("atomic_ionization.csv").read_text(encoding="utf-8")
    out = {}
    for row in csv.DictReader(text.splitlines()):
        ea = row["electron_affinity_ev"]
        out[row["symbol"]] = {**row, "ionization_energy_ev": float(row["ionization_energy_ev"]),
                              "electron_affinity_ev": float(ea) if ea else None}
    return out
