"""Separated-atom references at the same level of theory.

Atoms are computed unrestricted, without symmetry, from two starting guesses
and with internal stability followed, so each is the lowest UHF determinant of
its spin. Ground-state spins follow Hund's rule from the element's ground
configuration (:func:`lcao.species.hund_unpaired`). These are not the
spherically averaged atoms PySCF uses for its initial guess, which lie
0.35-0.56 Eh higher.

For an ion the charge goes on whichever atom gives the lower total energy;
every placement tried is reported.
"""

from __future__ import annotations

import itertools
import logging
from dataclasses import dataclass, field

import numpy as np

from .species import Species, hund_unpaired

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class AtomState:
    """One atom (or atomic ion) at the level of theory.

    Attributes:
        symbol, charge: the atom and its charge.
        spin: 2S, alpha minus beta electrons.
        energy_hartree: UHF energy (0 for a bare nucleus).
        converged: whether the SCF converged.
        dm: (alpha, beta) density matrices in the atom's basis.
    """

    symbol: str
    charge: int
    spin: int
    energy_hartree: float
    converged: bool
    dm: np.ndarray = field(repr=False, compare=False)

    def as_dict(self) -> dict:
        return {
            "symbol": self.symbol,
            "charge": self.charge,
            "multiplicity": self.spin + 1,
            "energy_hartree": self.energy_hartree,
            "converged": self.converged,
        }


@dataclass(frozen=True)
class SeparatedAtoms:
    """The separated-atom limit of a species.

    Attributes:
        atoms: the two atom states in the order of the species.
        energy_hartree: their sum, the dissociation limit.
        placements: (description, energy) of every charge placement tried.
    """

    atoms: tuple[AtomState, AtomState]
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


def compute_atom(symbol: str, charge: int, spin: int, level) -> AtomState:
    """UHF atom without symmetry, lowest of two guesses, stability followed."""
    from .scan.scf import build_atom, solve
    from .species import atomic_number

    n_el = atomic_number(symbol) - charge
    if n_el == 0:
        mol = build_atom(symbol, level, charge, 0)
        return AtomState(symbol, charge, 0, 0.0, True, np.zeros((2, mol.nao, mol.nao)))
    mol = build_atom(symbol, level, charge, spin)
    best = None
    for guess in ("minao", "atom"):
        from .scan.scf import make_scf

        mf0 = make_scf(mol, "UHF")
        mf0.init_guess = guess
        try:
            dm0 = mf0.get_init_guess(mol, guess)
        except Exception:  # some guesses are unavailable for some elements
            continue
        sol = solve(mol, "UHF", dm0)
        if sol.converged and (best is None or sol.energy < best.energy - 1e-10):
            best = sol
    if best is None:
        sol = solve(mol, "UHF", None)
        return AtomState(symbol, charge, spin, sol.energy, False, sol.dm)
    return AtomState(symbol, charge, spin, best.energy, True, best.dm)


#: atom states computed in this process, per (symbol, charge, spin, level key): the curves of a
#: series share their atoms even without a file store
_COMPUTED: dict = {}


class AtomCache:
    """Atom states per (symbol, charge, spin) for one level, backed by the store if given."""

    def __init__(self, level, store=None):
        self.level = level
        self.store = store
        self._mem: dict[tuple[str, int, int], AtomState] = {}

    def get(self, symbol: str, charge: int, spin: int) -> AtomState:
        key = (symbol, charge, spin)
        if key in self._mem:
            return self._mem[key]
        state = self.store.get_atom(symbol, charge, spin, self.level) if self.store is not None else None
        if state is None:
            pkey = key + (self.level.key(),)
            state = _COMPUTED.get(pkey)
            if state is None:
                state = _COMPUTED[pkey] = compute_atom(symbol, charge, spin, self.level)
            if self.store is not None:
                self.store.put_atom(state, self.level)
        self._mem[key] = state
        return state

    def add(self, state: AtomState) -> None:
        """Take a state computed elsewhere (a forked sweep process) into this cache and its store."""
        key = (state.symbol, state.charge, state.spin)
        if key in self._mem:
            return
        self._mem[key] = state
        _COMPUTED.setdefault(key + (self.level.key(),), state)
        if self.store is not None and self.store.get_atom(*key, self.level) is None:
            self.store.put_atom(state, self.level)

    def ground(self, symbol: str, charge: int) -> AtomState:
        return self.get(symbol, charge, ground_spin(symbol, charge))


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


def separated_atoms(species: Species, cache: AtomCache) -> SeparatedAtoms:
    """The lowest separated-atom limit: Hund ground states, best charge placement."""
    tried = []
    best = None
    for qa, qb in charge_placements(species):
        a = cache.ground(species.atoms[0], qa)
        b = cache.ground(species.atoms[1], qb)
        e = a.energy_hartree + b.energy_hartree
        tried.append((f"{species.atoms[0]}{_q(qa)} + {species.atoms[1]}{_q(qb)}", e))
        if best is None or e < best[2]:
            best = (a, b, e)
    return SeparatedAtoms((best[0], best[1]), best[2], tuple(tried))


def _q(q: int) -> str:
    if q == 0:
        return ""
    return ("+" if q > 0 else "-") if abs(q) == 1 else f"^{abs(q)}{'+' if q > 0 else '-'}"


def fragment_spins(spin_a: int, spin_b: int, target: int):
    """Atom spin projections that add up to a molecular 2*Ms of ``target``.

    Yields (2*Ms_A, 2*Ms_B, flip) with flip False (spins parallel), 'b' (B's
    spin flipped) or 'a' (A's flipped); Hund spins first, then spins lowered
    on one or both atoms.
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


def fragment_density(state_a: AtomState, state_b: AtomState, flip) -> np.ndarray:
    """Block-diagonal (alpha, beta) density of two atoms; ``flip`` 'b' flips B's spin, 'a' flips A's."""
    from scipy.linalg import block_diag

    da = np.asarray(state_a.dm)
    db = np.asarray(state_b.dm)
    if flip == "a":
        da = da[::-1]
    elif flip == "b":
        db = db[::-1]
    return np.array([block_diag(da[0], db[0]), block_diag(da[1], db[1])])


def needed_states(species: Species, spin: int) -> list[tuple[str, int, int]]:
    """(symbol, charge, 2S) of every atom state :func:`separated_atoms` and :func:`fragment_guesses`
    ask for, in the order they ask."""
    out = []
    for qa, qb in charge_placements(species):
        sa = ground_spin(species.atoms[0], qa)
        sb = ground_spin(species.atoms[1], qb)
        out += [(species.atoms[0], qa, sa), (species.atoms[1], qb, sb)]
        for ma, mb, _flip in fragment_spins(sa, sb, spin):
            out += [(species.atoms[0], qa, ma), (species.atoms[1], qb, mb)]
    return list(dict.fromkeys(out))


def fragment_guesses(species: Species, spin: int, cache: AtomCache, max_candidates: int = 1):
    """Starting densities from the separated atoms for a molecule with 2S = ``spin``.

    Returns a list of (label, dm, fragment_energy) with one entry per charge
    placement (for ions one with the charge on each atom): for each, the spin
    arrangement of lowest separated-atom energy among those that give the
    requested spin projection.
    """
    out = []
    for qa, qb in charge_placements(species):
        sa = ground_spin(species.atoms[0], qa)
        sb = ground_spin(species.atoms[1], qb)
        best = None
        for ma, mb, flip in fragment_spins(sa, sb, spin):
            a = cache.get(species.atoms[0], qa, ma)
            b = cache.get(species.atoms[1], qb, mb)
            e = a.energy_hartree + b.energy_hartree
            if best is None or e < best[3] - 1e-9:
                best = (a, b, flip, e)
        if best is None:
            continue
        a, b, flip, e = best
        label = "from-atoms" if species.charge == 0 else f"from-atoms/{species.atoms[0]}{_q(qa)}+{species.atoms[1]}{_q(qb)}"
        out.append((label, fragment_density(a, b, flip), e))
    return out
