"""Diatomic species from text: formula parsing, electron counts, spin candidates.

Accepted spellings (case matters, as in chemistry: ``CO`` is carbon monoxide,
``Co`` is cobalt):

* two element symbols: ``CO``, ``HCl``, ``LiH``, ``NaCl``;
* one symbol with a subscript 2 for a homonuclear molecule: ``N2``, ``Cl2``;
* an optional charge suffix: ``+``, ``-``, ``++``, ``--``, or a magnitude and
  a sign, optionally after a caret: ``NO+``, ``CN-``, ``O2+``, ``C2^2-``,
  ``NO^2+``. After a homonuclear ``X2`` the caret may be left out
  (``C22-`` is read as C2 with charge 2-); after two symbols a bare digit is
  read as a subscript, so ``NO2+`` is the triatomic nitronium ion and is
  refused; write ``NO^2+`` for the doubly charged diatomic.

A ``charge`` argument (the CLI's ``--charge``) may be given instead of or as
well as a suffix; when both are given they must agree.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass
from functools import lru_cache

from .errors import SpeciesError

#: Most negative charge accepted. Isolated diatomic anions beyond 2- are not
#: bound in reality; 4- leaves room for model studies and no more.
MIN_CHARGE = -4

_FORMULA = re.compile(r"^(?P<a>[A-Z][a-z]?)(?P<b>[A-Z][a-z]?)?(?P<two>\d+)?(?P<rest>.*)$")
_CHARGE = re.compile(r"^\^?(?P<mag>\d*)(?P<sign>[+-])$|^(?P<rep>\++|-+)$|^\^?(?P<sign2>[+-])(?P<mag2>\d+)$")


@lru_cache(maxsize=1)
def _element_table() -> tuple[str, ...]:
    from pyscf.data import elements

    return tuple(elements.ELEMENTS)


def atomic_number(symbol: str) -> int:
    """Atomic number of an element symbol (``'Cl'`` -> 17).

    Raises:
        SpeciesError: for an unknown symbol, suggesting near ones.
    """
    table = _element_table()
    if symbol in table[1:]:
        return table.index(symbol)
    near = difflib.get_close_matches(symbol, table[1:], n=3)
    hint = f"; did you mean {', '.join(near)}?" if near else ""
    raise SpeciesError(f"unknown element {symbol!r}{hint}")


def element_symbol(z: int) -> str:
    """Element symbol of atomic number ``z``."""
    return _element_table()[z]


def hund_unpaired(z_electrons: int) -> int:
    """Unpaired electrons of the ground configuration with ``z_electrons`` electrons.

    Uses PySCF's table of ground-state configurations (electrons per angular
    momentum) and Hund's first rule within each open shell. For ions the
    configuration of the isoelectronic neutral atom is used, which holds for
    main-group elements (N+ like C, O- like F) and is an approximation for
    transition metals.
    """
    if z_electrons <= 0:
        return 0
    from pyscf.data import elements

    conf = elements.CONFIGURATION[min(z_electrons, len(elements.CONFIGURATION) - 1)]
    unpaired = 0
    for l, count in enumerate(conf):
        shell = 2 * (2 * l + 1)
        n = count % shell
        unpaired += n if n <= shell // 2 else shell - n
    return unpaired


@dataclass(frozen=True)
class Species:
    """A diatomic molecule or ion.

    Attributes:
        atoms: the two element symbols, in the order written (``('N', 'O')``).
        charge: net charge in units of e (``+1`` for NO+).
    """

    atoms: tuple[str, str]
    charge: int = 0

    def __post_init__(self):
        if len(self.atoms) != 2:
            raise SpeciesError(f"a diatomic has two atoms, got {self.atoms!r}")
        for sym in self.atoms:
            atomic_number(sym)
        if not isinstance(self.charge, int) or isinstance(self.charge, bool):
            raise SpeciesError(f"charge must be a whole number, got {self.charge!r}")
        n = self.n_electrons
        if n < 1:
            raise SpeciesError(
                f"charge {self.charge:+d} leaves {n} electrons on {self.formula_neutral}"
                f" (nuclear charge {self.nuclear_charge}); the charge must be at most"
                f" {self.nuclear_charge - 1:+d}"
            )
        if self.charge < MIN_CHARGE:
            raise SpeciesError(
                f"charge {self.charge:+d} puts {n} electrons on {self.formula_neutral}; "
                f"charges below {MIN_CHARGE:+d} are not accepted"
            )

    @property
    def z(self) -> tuple[int, int]:
        """Atomic numbers of the two atoms."""
        return (atomic_number(self.atoms[0]), atomic_number(self.atoms[1]))

    @property
    def nuclear_charge(self) -> int:
        return sum(self.z)

    @property
    def n_electrons(self) -> int:
        return self.nuclear_charge - self.charge

    @property
    def homonuclear(self) -> bool:
        return self.atoms[0] == self.atoms[1]

    @property
    def formula_neutral(self) -> str:
        return f"{self.atoms[0]}2" if self.homonuclear else f"{self.atoms[0]}{self.atoms[1]}"

    @property
    def label(self) -> str:
        """Canonical text: ``N2``, ``NO+``, ``CN-``, ``C2^2-``, ``NO^2+``."""
        q = self.charge
        if q == 0:
            suffix = ""
        elif abs(q) == 1:
            suffix = "+" if q > 0 else "-"
        else:
            suffix = f"^{abs(q)}{'+' if q > 0 else '-'}"
        return self.formula_neutral + suffix

    @property
    def slug(self) -> str:
        """A file-name-safe form of the label (``C2^2-`` -> ``C2_2minus``)."""
        q = self.charge
        if q == 0:
            return self.formula_neutral
        return f"{self.formula_neutral}_{abs(q)}{'plus' if q > 0 else 'minus'}"

    def lowest_multiplicity(self) -> int:
        return 1 if self.n_electrons % 2 == 0 else 2

    def check_multiplicity(self, multiplicity: int) -> int:
        """Return ``multiplicity`` if the electron count allows it, else raise."""
        n = self.n_electrons
        if not isinstance(multiplicity, int) or isinstance(multiplicity, bool) or multiplicity < 1:
            raise SpeciesError(f"multiplicity must be a whole number >= 1, got {multiplicity!r}")
        two_s = multiplicity - 1
        allowed = f"{self.lowest_multiplicity()}, {self.lowest_multiplicity() + 2}, ... up to {n + 1}"
        if two_s > n or (n - two_s) % 2:
            raise SpeciesError(
                f"multiplicity {multiplicity} is impossible for {self.label} with {n} electrons"
                f" ({'an odd' if n % 2 else 'an even'} count); allowed: {allowed}"
            )
        return multiplicity

    def multiplicity_candidates(self) -> tuple[int, ...]:
        """Multiplicities worth trying for the ground state.

        The lowest allowed one and higher ones up to the number of unpaired
        electrons the separated ground-state atoms carry (at most two steps
        above the lowest): for O2 (1, 3, 5), for NO (2, 4, 6), for H2 (1, 3).
        """
        lowest = self.lowest_multiplicity()
        atoms_unpaired = sum(hund_unpaired(z) for z in self.z)
        top = min(max(lowest, atoms_unpaired + 1), lowest + 4, self.n_electrons + 1)
        return tuple(range(lowest, top + 1, 2))


def parse_species(text: str, charge: int | None = None) -> Species:
    """Parse a species from text (see the module docstring for spellings).

    Args:
        text: the formula with an optional charge suffix, e.g. ``'NO+'``.
        charge: an explicit net charge; must agree with a suffix if both given.

    Returns:
        Species

    Examples:
        >>> parse_species('C2^2-').charge
        -2
        >>> parse_species('HCl').atoms
        ('H', 'Cl')
    """
    if not isinstance(text, str) or not text.strip():
        raise SpeciesError(f"species must be a formula such as N2, CO or NO+, got {text!r}")
    raw = text.strip()
    m = _FORMULA.match(raw)
    if not m:
        raise SpeciesError(
            f"cannot read {raw!r} as a diatomic: write two element symbols (CO, HCl) or one with a 2 (N2),"
            " optionally followed by a charge (NO+, CN-, C2^2-)"
        )
    a, b, digits, rest = m.group("a"), m.group("b"), m.group("two"), m.group("rest")
    if b is None and digits is None:
        raise SpeciesError(f"{raw!r} names one atom, not a diatomic; for the homonuclear molecule write {a}2")
    suffix_q = None
    if b is None:
        # X2..., possibly with a bare charge magnitude glued on (C22- = C2 with 2-)
        if not digits.startswith("2"):
            raise SpeciesError(f"{raw!r} is not a diatomic: {a}{digits} has {digits} atoms")
        extra = digits[1:]
        rest = extra + rest
        b = a
    elif digits is not None:
        raise SpeciesError(
            f"{raw!r} is not a diatomic ({a}{b}{digits} has more than two atoms);"
            f" for a charge write it after a caret, e.g. {a}{b}^{digits}{rest or '+'}"
        )
    for sym in (a, b):
        atomic_number(sym)
    if rest:
        cm = _CHARGE.match(rest)
        if not cm:
            raise SpeciesError(
                f"cannot read the charge {rest!r} in {raw!r}; allowed: +, -, ++, --, 2+, 2-, ^2+, ^2-"
            )
        if cm.group("rep"):
            rep = cm.group("rep")
            suffix_q = len(rep) * (1 if rep[0] == "+" else -1)
        elif cm.group("sign"):
            mag = int(cm.group("mag") or 1)
            suffix_q = mag * (1 if cm.group("sign") == "+" else -1)
        else:
            suffix_q = int(cm.group("mag2")) * (1 if cm.group("sign2") == "+" else -1)
        if suffix_q == 0:
            raise SpeciesError(f"charge suffix {rest!r} in {raw!r} has magnitude 0; leave it out for a neutral")
    if charge is not None:
        if isinstance(charge, bool) or not isinstance(charge, int):
            raise SpeciesError(f"charge must be a whole number, got {charge!r}")
        if suffix_q is not None and suffix_q != charge:
            raise SpeciesError(f"{raw!r} carries charge {suffix_q:+d} but the charge option says {charge:+d}")
    q = suffix_q if suffix_q is not None else (charge or 0)
    return Species((a, b), q)
