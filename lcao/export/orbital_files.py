"""``orbitals.json`` (schema documented in the README)."""

from __future__ import annotations

import datetime as _dt

from .io import json_text

ORBITALS_SCHEMA_VERSION = 1

CHARACTER_NOTE = (
    "formal_class is the MO's place in the usual diatomic pattern (in-phase bonding, out-of-phase antibonding,"
    " orbitals one atom cannot take part in nonbonding) and drives the MO-counting bond order;"
    " overlap_population_character is the sign of the MO's overlap population between the atoms (Mulliken 1955)."
    " Both are true in their own sense: s-p mixing can leave a formally bonding orbital nearly nonbonding by"
    " overlap population."
)


def orbitals_document(res) -> dict:
    """The ``orbitals.json`` document of a :class:`lcao.single_point.OrbitalsResult`."""
    import pyscf

    from .. import __version__
    from ..analysis.orbitals import NONBONDING_OVERLAP
    from ..methods import method_for
    from ..pipeline import caution_for
    from ..units import HARTREE_EV

    a = res.analysis
    sp = res.species
    mos = []
    for m in a.orbitals:
        d = m.as_dict()
        if m.spin == "both":
            d["occupation_alpha"] = d["occupation_beta"] = m.occupation / 2.0
        else:
            d["occupation_alpha"] = m.occupation if m.spin == "alpha" else 0.0
            d["occupation_beta"] = m.occupation if m.spin == "beta" else 0.0
        mos.append(d)
    return {
        "schema_version": ORBITALS_SCHEMA_VERSION,
        "kind": "lcao orbital analysis",
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "versions": {"lcao": __version__, "pyscf": pyscf.__version__},
        "inputs": {
            "species": sp.label,
            "charge": sp.charge,
            "electrons": sp.n_electrons,
            "multiplicity": res.multiplicity,
            "level": res.level.as_dict(),
        },
        "point": {**res.point.as_dict(), "branch_choice": res.branch_choice},
        "other_solutions_here_hartree": res.other_branches,
        "binding_energy_vs_separated_atoms_ev": (res.limit_energy_hartree - res.point.energy_hartree) * HARTREE_EV,
        "multiplicity_candidates": [t.as_dict() for t in res.candidates],
        "orbitals_of": method_for(res.level).orbitals_note(res.level) or "the level's own canonical orbitals",
        "orbitals": mos,
        "bond_orders": a.bond_orders(),
        "bond_order_definitions": {
            "mo_count": "(electrons in formally bonding MOs - electrons in formally antibonding MOs) / 2 over the valence MOs",
            "mulliken": "Mulliken overlap population between the atoms, 2 sum_{mu in A, nu in B} P_mu,nu S_mu,nu (Mulliken 1955)",
            "mayer": "2 sum_{mu in A, nu in B} [(P^a S)_mu,nu (P^a S)_nu,mu + (P^b S)_mu,nu (P^b S)_nu,mu] (Mayer 1983, 1986)",
            "overlap_character_count": "as mo_count but classing MOs by the sign of their overlap population"
            f" (|population| <= {NONBONDING_OVERLAP} e per electron counts as nonbonding)",
        },
        "character_note": CHARACTER_NOTE,
        "unpaired_electrons": a.unpaired_electrons,
        "unpaired_orbitals": list(a.unpaired_orbitals),
        "magnetism": a.magnetism,
        "s2": a.s2,
        "s2_exact": a.s2_exact,
        "s2_deviation": a.s2 - a.s2_exact,
        "frontier": a.frontier(),
        "overlap_integrals": a.overlaps,
        "caution": caution_for(res.level),
    }


ORBITAL_WRITERS = {"orbitals.json": lambda res: json_text(orbitals_document(res)).encode()}
