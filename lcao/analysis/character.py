"""The formal bonding pattern of diatomic MOs, used by the MO-counting bond order.

Rule (written down here and in the README):

* Core MOs (the lowest ``chemcore`` orbitals of each spin: 1s on Li-Ne, up to
  2p on Na-Ar) are *core* and do not count.
* Homonuclear species: sigma_g, pi_u and delta_g MOs are *bonding*, sigma_u,
  pi_g and delta_u *antibonding* (the in-phase and out-of-phase combinations).
* Heteronuclear species: each atom offers valence slots per kind, sigma (its
  valence s and, from lithium on, p_z) and pi (its valence p_x, p_y). The
  slots of the two atoms are paired: in energy order when both atoms have the
  same number, otherwise each slot of the atom with fewer is paired with the
  slot of the other closest to it in energy (H 1s goes with F 2p but with Li
  2s); an unpaired slot gives a *nonbonding* MO (the F 2s and the pi lone pairs
  of HF, the 2p of LiH). A pair gives a bonding level just below the lower
  slot and an antibonding one just above the higher; these prototype levels,
  sorted, are matched in energy order with the valence MOs of that kind (pi
  MOs two at a time). Slot energies are the diagonal Fock elements of the
  atoms' valence AOs at the computed geometry.
* MOs past the prototype levels (extra virtuals of split-valence sets) are
  *outside the valence pattern*; MOs of mixed symmetry are *unclassified*.

The MO-counting bond order is (electrons in bonding MOs - electrons in
antibonding MOs) / 2. The overlap-population character of each MO is reported
beside this formal class: both are true in their own sense (s-p mixing leaves
3sigma_g of N2 nearly nonbonding by overlap population, though it is formally
bonding).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..methods.molecule import ao_labels

DELTA = 1e-3


@dataclass(frozen=True)
class Slot:
    atom: int
    shell: str  # e.g. '2s', '2p'
    energy: float


def core_orbitals(z: int) -> int:
    """Core orbitals of an atom: its noble-gas core, plus the filled (n-1)d shell from Ga and In on."""
    for last, n in ((2, 0), (10, 1), (18, 5), (30, 9), (36, 14), (48, 18), (54, 23), (80, 27), (86, 39)):
        if z <= last:
            return n
    return 43


def period(z: int) -> int:
    for n, last in enumerate((2, 10, 18, 36, 54, 86, 118), start=1):
        if z <= last:
            return n
    return 7


def valence_aos(mol, atom: int) -> dict[str, list[int]]:
    """Valence AO indices of an atom: {'s': [...], 'p': [...], 'px','py','pz': [...]}."""
    z = int(mol.atom_charge(atom))
    n_val = period(z)
    out: dict[str, list[int]] = {"s": [], "p": [], "px": [], "py": [], "pz": []}
    has_p = z > 2
    for i, (ia, _sym, shell, comp) in enumerate(ao_labels(mol, fmt=False)):
        if ia != atom:
            continue
        n = int("".join(ch for ch in shell if ch.isdigit()) or 0)
        l = shell.lstrip("0123456789")
        if n < n_val:
            continue
        if l == "s":
            out["s"].append(i)
        elif l == "p" and has_p and n <= n_val + 1:
            out["p"].append(i)
            if comp in ("x", "y", "z"):
                out[f"p{comp}"].append(i)
    return out


def valence_slots(mol, fock_diag) -> dict[int, list[Slot]]:
    """Slots per kind (0 sigma, 1 pi) for each atom, from the diagonal Fock elements."""
    slots = {0: [[], []], 1: [[], []]}
    for atom in (0, 1):
        aos = valence_aos(mol, atom)
        n_val = period(int(mol.atom_charge(atom)))
        if aos["s"]:
            slots[0][atom].append(Slot(atom, f"{n_val}s", float(np.min(fock_diag[aos["s"]]))))
        if aos["pz"]:
            e_p = float(np.min(fock_diag[aos["p"]]))
            slots[0][atom].append(Slot(atom, f"{n_val}p", e_p))
            slots[1][atom].append(Slot(atom, f"{n_val}p", e_p))
    return slots


@dataclass(frozen=True)
class Prototype:
    kind: str  # 'bonding', 'antibonding', 'nonbonding'
    energy: float
    name: str  # e.g. 'sigma 2s', 'sigma* 2p', 'pi 2p', 'n O 2s'


def _pairs(a: list[Slot], b: list[Slot]):
    a = sorted(a, key=lambda s: s.energy)
    b = sorted(b, key=lambda s: s.energy)
    if len(a) == len(b):
        return list(zip(a, b)), []
    few, many = (a, b) if len(a) < len(b) else (b, a)
    left = list(many)
    pairs = []
    for s in few:
        partner = min(left, key=lambda t: abs(t.energy - s.energy))
        left.remove(partner)
        pairs.append((s, partner) if s.atom == 0 else (partner, s))
    return pairs, left


def prototypes(slots_a: list[Slot], slots_b: list[Slot], lam: int, symbols) -> list[Prototype]:
    """Sorted prototype levels of one kind (see the module docstring)."""
    greek = {0: "sigma", 1: "pi"}[lam]
    pairs, lone = _pairs(slots_a, slots_b)
    out = []
    for sa, sb in pairs:
        shell = sa.shell if sa.shell == sb.shell else f"({symbols[0]} {sa.shell} + {symbols[1]} {sb.shell})"
        out.append(Prototype("bonding", min(sa.energy, sb.energy) - DELTA, f"{greek} {shell}"))
        out.append(Prototype("antibonding", max(sa.energy, sb.energy) + DELTA, f"{greek}* {shell}"))
    for s in lone:
        out.append(Prototype("nonbonding", s.energy, f"n {symbols[s.atom]} {s.shell}"))
    return sorted(out, key=lambda p: p.energy)


def homonuclear_class(lam: int, parity: str) -> str:
    bonding = (lam % 2 == 0) == (parity == "g")
    return "bonding" if bonding else "antibonding"


def homonuclear_name(lam: int, parity: str, index_in_valence: int, n_val: int) -> str | None:
    """'sigma 2s', 'sigma* 2p', 'pi 2p', 'pi* 2p' for the valence MOs of a homonuclear species."""
    star = "" if homonuclear_class(lam, parity) == "bonding" else "*"
    if lam == 0 and index_in_valence in (1, 2):
        return f"sigma{star} {n_val}{'s' if index_in_valence == 1 else 'p'}"
    if lam == 1 and index_in_valence == 1:
        return f"pi{star} {n_val}p"
    return None
