"""Separated-atom limits: which atom states a curve needs and how they combine (pure functions).

The atoms themselves are computed by the level's method (:meth:`lcao.methods.Method.atom`) at the
same level as the molecule, in their Hund's-rule ground spins (:func:`lcao.species.hund_unpaired`).
For an ion the charge goes on whichever atom gives the lower total energy; every placement tried is
reported. The sweeps from the atoms start from the two atoms side by side, in the spin arrangement of
lowest energy that gives the molecule's spin projection.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

from .species import Species, hund_unpaired


@dataclass(frozen=True)
class SeparatedAtoms:
    """The separated-atom limit of a species.

    Attributes:
        atoms: the two atom states (:class:`lcao.methods.AtomResult`) in the order of the species.
        energy_hartree: their sum, the dissociation limit.
        placements: (description, energy) of every charge placement tried.
    """

    atoms: tuple
    energy_hartree: float
    placements: tuple[tuple[str, float], ...] = ()

    def as_dict(self) -> dict:
        return {
            "energy_hartree": self.energy_hartree,
            "atoms": [a.as_dict() for a in self.atoms],
            "charge_placements_tried": [{"placement": p, "energy_hartree": e} for p, e in self.placements],
        }


def ground_spin(symbol: str, charge: int) -> int:
    """2S of the Hund ground state of an atom or atomic ion."""
    from .species import atomic_number

    return hund_unpaired(atomic_number(symbol) - charge)


def charge_placements(species: Species) -> list[tuple[int, int]]:
    """Every way to put the net charge on the two atoms (same sign on both, no negative electron count)."""
    q = species.charge
    out = []
    rng = range(0, q + 1) if q >= 0 else range(q, 1)
    for qa in rng:
        qb = q - qa
        if species.z[0] - qa >= 0 and species.z[1] - qb >= 0:
            out.append((qa, qb))
    return out


def charge_text(q: int) -> str:
    if q == 0:
        return ""
    return ("+" if q > 0 else "-") if abs(q) == 1 else f"^{abs(q)}{'+' if q > 0 else '-'}"


def fragment_spins(spin_a: int, spin_b: int, target: int):
    """Atom spin projections that add up to a molecular 2*Ms of ``target``.

    Yields (2*Ms_A, 2*Ms_B, flip) with flip False (spins parallel), 'b' (B's spin flipped) or 'a'
    (A's flipped); Hund spins first, then spins lowered on one or both atoms.
    """
    opts_a = [spin_a - 2 * k for k in range(spin_a // 2 + 1)]
    opts_b = [spin_b - 2 * k for k in range(spin_b // 2 + 1)]
    for ma, mb in sorted(itertools.product(opts_a, opts_b), key=lambda p: (spin_a - p[0]) + (spin_b - p[1])):
        if ma + mb == target:
            yield ma, mb, False
        elif mb and ma - mb == target:
            yield ma, mb, "b"
        elif ma and mb - ma == target:
            yield ma, mb, "a"


def needed_states(species: Species, spin: int) -> list[tuple[str, int, int]]:
    """(symbol, charge, 2S) of every atom state :func:`separated_atoms` and :func:`fragment_choices`
    ask for, in the order they ask."""
    out = []
    for qa, qb in charge_placements(species):
        sa = ground_spin(species.atoms[0], qa)
        sb = ground_spin(species.atoms[1], qb)
        out += [(species.atoms[0], qa, sa), (species.atoms[1], qb, sb)]
        for ma, mb, _flip in fragment_spins(sa, sb, spin):
            out += [(species.atoms[0], qa, ma), (species.atoms[1], qb, mb)]
    return list(dict.fromkeys(out))


def separated_atoms(species: Species, atoms: dict) -> SeparatedAtoms:
    """The lowest separated-atom limit (Hund ground states, best charge placement) from the computed
    atom states ``atoms`` ((symbol, charge, 2S) -> AtomResult)."""
    tried = []
    best = None
    for qa, qb in charge_placements(species):
        a = atoms[(species.atoms[0], qa, ground_spin(species.atoms[0], qa))]
        b = atoms[(species.atoms[1], qb, ground_spin(species.atoms[1], qb))]
        e = a.energy_hartree + b.energy_hartree
        tried.append((f"{species.atoms[0]}{charge_text(qa)} + {species.atoms[1]}{charge_text(qb)}", e))
        if best is None or e < best[2]:
            best = (a, b, e)
    return SeparatedAtoms((best[0], best[1]), best[2], tuple(tried))


@dataclass(frozen=True)
class FragmentChoice:
    """The atoms a sweep from the separated atoms starts from (one per charge placement).

    Attributes:
        label: the sweep's name ('from-atoms', or 'from-atoms/C-+N' for ions).
        a, b: the two atom states; flip: which atom's spin is turned over (False: none).
        energy_hartree: their summed energy.
    """

    label: str
    a: object
    b: object
    flip: object
    energy_hartree: float


def fragment_choices(species: Species, spin: int, atoms: dict) -> list[FragmentChoice]:
    """Per charge placement, the spin arrangement of lowest separated-atom energy among those that give
    the molecular spin projection 2S = ``spin``."""
    out = []
    for qa, qb in charge_placements(species):
        sa = ground_spin(species.atoms[0], qa)
        sb = ground_spin(species.atoms[1], qb)
        best = None
        for ma, mb, flip in fragment_spins(sa, sb, spin):
            a = atoms[(species.atoms[0], qa, ma)]
            b = atoms[(species.atoms[1], qb, mb)]
            e = a.energy_hartree + b.energy_hartree
            if best is None or e < best[3] - 1e-9:
                best = (a, b, flip, e)
        if best is None:
            continue
        a, b, flip, e = best
        label = ("from-atoms" if species.charge == 0
                 else f"from-atoms/{species.atoms[0]}{charge_text(qa)}+{species.atoms[1]}{charge_text(qb)}")
        out.append(FragmentChoice(label, a, b, flip, e))
    return out
