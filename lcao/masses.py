"""Isotope masses and reduced masses.

Masses come from the ``periodictable`` package, which carries the 2020 Atomic
Mass Evaluation (Wang, Huang, Kondev, Audi & Naimi, Chin. Phys. C 45 (2021)
030003) and IUPAC natural abundances. By default each atom is its most
abundant isotope. PySCF's own default masses are rounded and are not used.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from .errors import SpeciesError
from .units import AMU_ME

MASS_SOURCE = "AME2020 (Wang et al., Chin. Phys. C 45 (2021) 030003) via the periodictable package"


@dataclass(frozen=True)
class Isotopes:
    """Mass numbers of the two atoms and their masses in dalton."""

    mass_numbers: tuple[int, int]
    masses_dalton: tuple[float, float]

    @property
    def reduced_mass_dalton(self) -> float:
        a, b = self.masses_dalton
        return a * b / (a + b)

    @property
    def reduced_mass_me(self) -> float:
        """Reduced mass in electron masses (the internal unit)."""
        return self.reduced_mass_dalton * AMU_ME

    def label(self, symbols) -> str:
        return "-".join(f"{n}{s}" for n, s in zip(self.mass_numbers, symbols))

    def as_dict(self, symbols) -> dict:
        return {
            "isotopes": self.label(symbols),
            "masses_dalton": list(self.masses_dalton),
            "reduced_mass_dalton": self.reduced_mass_dalton,
            "source": MASS_SOURCE,
        }


def _element(symbol: str):
    import periodictable

    try:
        return periodictable.elements.symbol(symbol)
    except ValueError:
        raise SpeciesError(f"no isotope data for element {symbol!r}") from None


def most_abundant(symbol: str) -> int:
    el = _element(symbol)
    best = max((iso for iso in el), key=lambda i: (i.abundance or 0.0))
    if not best.abundance:
        raise SpeciesError(f"{symbol} has no stable isotope; give its mass number explicitly")
    return int(best.isotope)


def isotope_mass(symbol: str, mass_number: int) -> float:
    el = _element(symbol)
    try:
        return float(el[int(mass_number)].mass)
    except (KeyError, ValueError, TypeError):
        known = ", ".join(str(i.isotope) for i in el if i.abundance)
        raise SpeciesError(f"{symbol} has no isotope of mass number {mass_number}; stable ones: {known}") from None


def resolve_isotopes(symbols, spec: str | None = None) -> Isotopes:
    """Isotopes of the two atoms.

    Args:
        symbols: the element symbols.
        spec: None for the most abundant isotopes, or mass numbers per atom,
            comma-separated, optionally with the symbol: ``'13,16'``,
            ``'13C,16O'``, ``'2H,1H'``; an empty entry keeps the default.
    """
    numbers = [most_abundant(s) for s in symbols]
    if spec:
        parts = [p.strip() for p in str(spec).split(",")]
        if len(parts) != 2:
            raise SpeciesError(f"isotopes {spec!r}: give one mass number per atom, e.g. 13,16 or 13C,16O")
        for i, part in enumerate(parts):
            if not part:
                continue
            m = re.fullmatch(r"(\d+)([A-Z][a-z]?)?", part)
            if not m:
                raise SpeciesError(f"isotope {part!r}: write a mass number, optionally with the symbol (13 or 13C)")
            if m.group(2) and m.group(2) != symbols[i]:
                raise SpeciesError(f"isotope {part!r} does not match atom {i + 1} ({symbols[i]})")
            numbers[i] = int(m.group(1))
    masses = tuple(isotope_mass(s, n) for s, n in zip(symbols, numbers))
    return Isotopes(tuple(numbers), masses)
