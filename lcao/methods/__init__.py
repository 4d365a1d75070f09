"""Levels of theory: one module per method family, all behind :class:`lcao.methods.base.Method`.

The registry maps the method name of a ``METHOD/BASIS`` level to the family that computes it.
Hartree-Fock (:mod:`lcao.methods.hf`) is registered here; a new family registers itself with
:func:`register` and the driver, the store and every output take it as it is::

    from lcao.methods import register
    register(MyMethod())          # MyMethod.names = ("MYMETHOD",)
    lcao.curve("N2", "MYMETHOD/cc-pVDZ")
"""

from __future__ import annotations

from .base import (
    BRANCHES,
    AtomResult,
    Capabilities,
    Method,
    PointResult,
    StatePlan,
    Target,
    Warm,
    lagrange_extrapolate,
)

__all__ = [
    "BRANCHES", "AtomResult", "Capabilities", "Method", "PointResult", "StatePlan", "Target", "Warm",
    "lagrange_extrapolate", "known_methods", "method_for", "method_named", "register", "suggestions", "unregister",
]

_REGISTRY: dict[str, Method] = {}


def register(method: Method, replace: bool = False) -> Method:
    """Make ``method`` answer to each of its ``names``; returns it.

    Raises:
        ValueError: a name is already taken (unless ``replace``) or the method has no names.
    """
    if not method.names:
        raise ValueError(f"{type(method).__name__} declares no method names")
    for name in method.names:
        key = name.upper()
        if key in _REGISTRY and not replace and _REGISTRY[key] is not method:
            raise ValueError(f"method name {key!r} is already registered to {type(_REGISTRY[key]).__name__}")
    for name in method.names:
        _REGISTRY[name.upper()] = method
    return method


def unregister(method: Method) -> None:
    """Forget every name of ``method`` (tests that register a method of their own)."""
    for key in [k for k, v in _REGISTRY.items() if v is method]:
        del _REGISTRY[key]


def known_methods() -> tuple[str, ...]:
    """Every registered method name, in registration order."""
    return tuple(_REGISTRY)


def method_named(name: str) -> Method | None:
    """The family that computes the method ``name``: by its registered names first, then by asking
    each family (:meth:`Method.accepts`), or None."""
    key = name.upper()
    got = _REGISTRY.get(key)
    if got is not None:
        return got
    for family in dict.fromkeys(_REGISTRY.values()):
        if family.accepts(key):
            return family
    return None


def suggestions(name: str, n: int = 4) -> list[str]:
    """Known method names nearest to ``name`` (for an error message), the functional library included."""
    import difflib

    pool = list(_REGISTRY)
    for family in dict.fromkeys(_REGISTRY.values()):
        pool += list(getattr(family, "name_pool", lambda: ())())
    return difflib.get_close_matches(name.upper(), list(dict.fromkeys(p.upper() for p in pool)), n=n, cutoff=0.5)


def method_for(level) -> Method:
    """The method family of a :class:`lcao.levels.Level`."""
    got = method_named(level.method)
    if got is None:  # pragma: no cover - parse_level refuses unknown names
        raise KeyError(f"no method is registered for {level.method!r}")
    return got


def _register_builtin() -> None:
    from .correlated import Correlated
    from .dft import KohnSham
    from .hf import HartreeFock
    from .multireference import CompleteActiveSpace, Nevpt2

    register(HartreeFock())
    register(Correlated())
    register(KohnSham())
    register(CompleteActiveSpace())
    register(Nevpt2())


_register_builtin()
