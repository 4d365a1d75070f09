"""Levels of theory written method/basis (``HF/STO-3G``, ``UHF/6-31G*``).

A :class:`Level` names a method registered in :mod:`lcao.methods` and a basis
PySCF knows. The registry says which family computes a method; the driver asks
the family, so adding a level of theory means one module that registers itself,
with no change for the driver or its callers.

Cartesian or spherical d shells follow the trade's convention unless the user
overrides it: the Pople split-valence sets of the 3-21G, 4-31G and 6-31G
families were defined with six Cartesian d functions; 6-311G, the
correlation-consistent sets and everything else use spherical (pure)
functions. The choice and where it came from are recorded in every output.
"""

from __future__ import annotations

import difflib
import re
import warnings
from dataclasses import dataclass
from functools import lru_cache

from .errors import LevelError

_POPLE_CARTESIAN = re.compile(r"^[346]-?(21|31)\+*G", re.IGNORECASE)


def cartesian_by_convention(basis: str) -> bool:
    """True for basis sets defined with Cartesian d shells (3-21G, 4-31G, 6-31G families)."""
    return bool(_POPLE_CARTESIAN.match(basis.strip()))


@dataclass(frozen=True)
class Level:
    """A level of theory.

    Attributes:
        method: canonical method name, registered in :mod:`lcao.methods` (``'HF'``).
        basis: basis name as PySCF reads it (``'6-31G*'``).
        cartesian: Cartesian (True) or spherical (False) d and higher shells.
        cartesian_source: ``'convention'`` or ``'user'``.
    """

    method: str
    basis: str
    cartesian: bool
    cartesian_source: str = "convention"

    @property
    def text(self) -> str:
        return f"{self.method}/{self.basis}"

    @property
    def shells_text(self) -> str:
        """E.g. 'cartesian d shells (Pople convention)' or 'spherical d shells (user choice)'."""
        kind = "cartesian" if self.cartesian else "spherical"
        if self.cartesian_source == "user":
            why = "user choice"
        else:
            why = "Pople convention" if self.cartesian else "convention for this basis"
        return f"{kind} d shells ({why})"

    def key(self) -> str:
        """The text that identifies the level in the results store."""
        return f"{self.method}/{self.basis.lower()}/{'cart' if self.cartesian else 'sph'}"

    def as_dict(self) -> dict:
        return {
            "text": self.text,
            "method": self.method,
            "basis": self.basis,
            "d_shells": "cartesian" if self.cartesian else "spherical",
            "d_shells_source": self.cartesian_source,
        }


@lru_cache(maxsize=1)
def _known_basis_names() -> tuple[str, ...]:
    from pyscf.gto import basis

    return tuple(sorted(basis.ALIAS))


def parse_level(text: str, cartesian: bool | None = None) -> Level:
    """Parse ``METHOD/BASIS``.

    Args:
        text: e.g. ``'HF/6-31G*'``; the method is case-insensitive.
        cartesian: override the d-shell convention (None keeps it).

    Raises:
        LevelError: unknown method or basis (with the nearest names).
    """
    if not isinstance(text, str) or "/" not in text:
        raise LevelError(f"level must be written METHOD/BASIS, e.g. HF/6-31G, got {text!r}")
    method, _, basis = text.strip().partition("/")
    from .methods import known_methods

    method = method.strip().upper()
    basis = basis.strip()
    names = known_methods()
    if method not in names:
        near = difflib.get_close_matches(method, names, n=3, cutoff=0.4)
        hint = f"; nearest: {', '.join(near)}" if near else ""
        raise LevelError(f"unknown method {method!r}{hint}; allowed: {', '.join(names)}")
    if not basis:
        raise LevelError(f"level {text!r} names no basis; e.g. {method}/STO-3G")
    check_basis_name(basis)
    if cartesian is None:
        return Level(method, basis, cartesian_by_convention(basis), "convention")
    return Level(method, basis, bool(cartesian), "user")


def _normalise(name: str) -> str:
    from pyscf.gto import basis as _b

    return _b._format_basis_name(name)


def check_basis_name(basis: str) -> None:
    """Raise LevelError if PySCF knows no basis of this name."""
    from pyscf.gto import basis as _b

    key = _normalise(basis)
    if key in _b.ALIAS:
        return
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _b.load(basis, "H")
        return
    except Exception:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                _b.load(basis, "C")
            return
        except Exception:
            pass
    near = difflib.get_close_matches(key, _known_basis_names(), n=4, cutoff=0.6)
    shown = list(dict.fromkeys(_display_name(k) for k in near))
    hint = f"; nearest names PySCF knows: {', '.join(shown)}" if shown else ""
    raise LevelError(f"unknown basis {basis!r}{hint}")


def _display_name(key: str) -> str:
    """A readable spelling of a PySCF basis key ('631gs' -> '6-31G*')."""
    import os

    from pyscf.gto import basis as _b

    value = _b.ALIAS.get(key)
    if not isinstance(value, str):
        return key
    name = os.path.splitext(os.path.basename(value))[0]
    if name.endswith("ss") and name.lower().startswith(("3-", "6-")):
        name = name[:-2] + "**"
    elif name.endswith("s") and name.lower().startswith(("3-", "6-")):
        name = name[:-1] + "*"
    return name.upper() if name.lower().startswith("sto") else name


def check_basis_covers(level: Level, symbols) -> None:
    """Raise LevelError naming the element and basis if the basis lacks an element."""
    from pyscf.gto import basis as _b

    for sym in dict.fromkeys(symbols):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                shells = _b.load(level.basis, sym)
        except Exception:
            shells = None
        if not shells:
            raise LevelError(f"basis {level.basis} has no functions for {sym}")
