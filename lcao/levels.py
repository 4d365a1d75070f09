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
        method: canonical method name, registered in :mod:`lcao.methods` (``'HF'``, ``'CCSD(T)'``,
            ``'B3LYP'``).
        basis: basis name as PySCF reads it (``'6-31G*'``), or a basis-set extrapolation
            ``'CBS(cc-pVTZ,cc-pVQZ)'`` (:func:`cbs_pair`).
        cartesian: Cartesian (True) or spherical (False) d and higher shells.
        cartesian_source: ``'convention'`` or ``'user'``.
        frozen_core: the atoms' noble-gas cores left out of the correlation (True, the default of
            correlated methods) or not (False); None where it does not apply (Hartree-Fock, DFT).
        active_space: (electrons, orbitals) of an active-space method's space where it is not the default
            full valence space (written ``CASSCF(6,6)/cc-pVDZ``), else None.
    """

    method: str
    basis: str
    cartesian: bool
    cartesian_source: str = "convention"
    frozen_core: bool | None = None
    active_space: tuple | None = None

    @property
    def text(self) -> str:
        space = "" if self.active_space is None else f"({self.active_space[0]},{self.active_space[1]})"
        return f"{self.method}{space}/{self.basis}"

    @property
    def cbs(self):
        """(smaller basis, larger basis, X, Y) of a basis-set extrapolation, else None."""
        return cbs_pair(self.basis)

    def with_basis(self, basis: str) -> "Level":
        """The same method and settings in another basis (a component of an extrapolation)."""
        from dataclasses import replace

        return replace(self, basis=basis)

    @property
    def electrons_text(self) -> str:
        """'frozen core', 'all electrons' or '' where it does not apply."""
        return {True: "frozen core", False: "all electrons"}.get(self.frozen_core, "")

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
        tail = "/ae" if self.frozen_core is False else ""
        if self.active_space is not None:
            tail += f"/cas{self.active_space[0]}.{self.active_space[1]}"
        return f"{self.method}/{self.basis.lower()}/{'cart' if self.cartesian else 'sph'}{tail}"

    def as_dict(self) -> dict:
        out = {
            "text": self.text,
            "method": self.method,
            "basis": self.basis,
            "d_shells": "cartesian" if self.cartesian else "spherical",
            "d_shells_source": self.cartesian_source,
        }
        if self.frozen_core is not None:
            out["correlated_electrons"] = self.electrons_text
        if self.active_space is not None:
            out["active_space"] = {"electrons": self.active_space[0], "orbitals": self.active_space[1]}
        return out


_CBS = re.compile(r"^CBS\(\s*([^,()]+?)\s*,\s*([^,()]+?)\s*\)$", re.IGNORECASE)
#: correlation-consistent basis names and their cardinal number (D=2, T=3, Q=4, 5, 6)
_CC_NAME = re.compile(r"^(?P<pre>(?:d-|t-)?(?:aug-)?cc-p(?:w?C)?V)(?P<x>[DTQ56])Z(?P<post>.*)$", re.IGNORECASE)
_CARDINAL = {"D": 2, "T": 3, "Q": 4, "5": 5, "6": 6}


def cardinal_number(basis: str) -> tuple[str, int] | None:
    """(family, cardinal number) of a correlation-consistent basis: 'cc-pVTZ' -> ('cc-pV?Z', 3)."""
    m = _CC_NAME.match(basis.strip())
    if not m:
        return None
    return (m.group("pre").lower() + "?Z" + m.group("post").lower(), _CARDINAL[m.group("x").upper()])


def cbs_pair(basis: str):
    """(smaller, larger, X, Y) of ``CBS(b1,b2)``, or None for an ordinary basis name.

    Raises:
        LevelError: the two bases are not a pair of one correlation-consistent family with different
            cardinal numbers.
    """
    m = _CBS.match(basis.strip())
    if not m:
        if basis.strip().upper().startswith("CBS"):
            raise LevelError(f"write a basis-set extrapolation as CBS(cc-pVTZ,cc-pVQZ), got {basis!r}")
        return None
    a, b = m.group(1), m.group(2)
    ca, cb = cardinal_number(a), cardinal_number(b)
    if ca is None or cb is None:
        bad = a if ca is None else b
        raise LevelError(f"{bad!r} has no cardinal number: CBS needs two correlation-consistent bases of one"
                         " family, e.g. CBS(cc-pVTZ,cc-pVQZ)")
    if ca[0] != cb[0] or ca[1] == cb[1]:
        raise LevelError(f"CBS({a},{b}) is not a cardinal-number pair: use two bases of one correlation-consistent"
                         " family with different cardinal numbers, e.g. CBS(cc-pVTZ,cc-pVQZ)")
    return (a, b, ca[1], cb[1]) if ca[1] < cb[1] else (b, a, cb[1], ca[1])


@lru_cache(maxsize=1)
def _known_basis_names() -> tuple[str, ...]:
    from pyscf.gto import basis

    return tuple(sorted(basis.ALIAS))


#: an active space written after an active-space method's name: CASSCF(6,6), NEVPT2(10,8)
_SPACE = re.compile(r"^(?P<m>[A-Z0-9]+)\(\s*(?P<n>\d+)\s*,\s*(?P<k>\d+)\s*\)$")


def parse_active_space(text: str) -> tuple[int, int]:
    """(electrons, orbitals) of 'N,M' (the --active-space option)."""
    m = re.match(r"^\s*(\d+)\s*,\s*(\d+)\s*$", str(text))
    if not m:
        raise LevelError(f"an active space is written ELECTRONS,ORBITALS, e.g. 10,8; got {text!r}")
    return int(m.group(1)), int(m.group(2))


def parse_level(text: str, cartesian: bool | None = None, frozen_core: bool | None = None,
                active_space: tuple | None = None) -> Level:
    """Parse ``METHOD/BASIS``.

    Args:
        text: e.g. ``'HF/6-31G*'``, ``'CCSD(T)/cc-pVTZ'``, ``'B3LYP/6-31G*'``,
            ``'CCSD(T)/CBS(cc-pVTZ,cc-pVQZ)'``; the method is case-insensitive.
        cartesian: override the d-shell convention (None keeps it).
        frozen_core: for correlated methods, False correlates every electron (default: frozen core).
        active_space: (electrons, orbitals) for an active-space method (CASSCF, NEVPT2), instead of the
            full valence space; also written in the text, ``CASSCF(6,6)/cc-pVDZ``.

    Raises:
        LevelError: unknown method or basis (with the nearest names), a CBS level that is not a
            cardinal-number pair, or an option the method does not take.
    """
    from .methods import method_named, suggestions

    if not isinstance(text, str) or "/" not in text:
        raise LevelError(f"level must be written METHOD/BASIS, e.g. HF/6-31G, got {text!r}")
    method, _, basis = text.strip().partition("/")
    method = method.strip().upper()
    basis = basis.strip()
    written = _SPACE.match(method)
    if written and method_named(method) is None:
        method = written.group("m")
        space = (int(written.group("n")), int(written.group("k")))
        if active_space is not None and tuple(active_space) != space:
            raise LevelError(f"{text!r} names the active space {space[0]},{space[1]} but"
                             f" {active_space[0]},{active_space[1]} was given too")
        active_space = space
    family = method_named(method)
    if family is None:
        near = suggestions(method)
        hint = f"; nearest: {', '.join(near)}" if near else ""
        raise LevelError(f"unknown method or functional {method!r}{hint}")
    family.check_name(method)
    if not basis:
        raise LevelError(f"level {text!r} names no basis; e.g. {method}/STO-3G")
    pair = cbs_pair(basis)
    if pair is not None and not getattr(family, "extrapolates", False):
        raise LevelError(f"a basis-set extrapolation applies to correlated methods (MP2, CCSD, CCSD(T)), not {method}")
    for name in (pair[:2] if pair else (basis,)):
        check_basis_name(name)
    fc = family.frozen_core_default(method)
    if frozen_core is not None:
        if fc is None and frozen_core is False:
            raise LevelError(f"{method} correlates no electrons separately: all-electron applies to MP2 and coupled cluster")
        if fc is not None:
            fc = bool(frozen_core)
    if active_space is not None:
        if not getattr(family, "takes_active_space", False):
            raise LevelError(f"an active space applies to CASSCF and NEVPT2, not {method}")
        active_space = (int(active_space[0]), int(active_space[1]))
    names = pair[:2] if pair else (basis,)
    if cartesian is None:
        conv = {cartesian_by_convention(b) for b in names}
        return Level(method, basis, conv.pop() if len(conv) == 1 else False, "convention", fc, active_space)
    return Level(method, basis, bool(cartesian), "user", fc, active_space)


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
    """Raise LevelError naming the element and basis if the basis (either of an extrapolation) lacks an element."""
    from pyscf.gto import basis as _b

    pair = level.cbs
    for name in (pair[:2] if pair else (level.basis,)):
        for sym in dict.fromkeys(symbols):
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    shells = _b.load(name, sym)
            except Exception:
                shells = None
            if not shells:
                from .errors import BasisCoverageError

                raise BasisCoverageError(f"basis {name} has no functions for {sym}")
