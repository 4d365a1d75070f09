"""lcao: potential-energy curves, orbital analysis and spectroscopic constants of diatomics.

Public API (heavy modules are imported on first use, so ``import lcao`` is cheap)::

    import lcao
    res = lcao.curve("NO", "HF/6-31G")
    res.points[0].energy_hartree
    orb = lcao.orbitals("N2", "HF/6-31G", 1.10)
    rows = lcao.run_series(lcao.members_from(["N2", "CO"], [lcao.parse_level("HF/6-31G")]))

A new level of theory is one module with a :class:`lcao.methods.Method` subclass, registered with
:func:`lcao.methods.register`.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["curve", "orbitals", "run_series", "members_from", "parse_species", "parse_level", "Species", "Level",
           "Store", "clear_caches", "__version__"]

_LAZY = {
    "curve": ("pipeline", "curve"),
    "orbitals": ("single_point", "orbitals"),
    "run_series": ("series", "run_series"),
    "members_from": ("series", "members_from"),
    "parse_species": ("species", "parse_species"),
    "Species": ("species", "Species"),
    "parse_level": ("levels", "parse_level"),
    "Level": ("levels", "Level"),
    "Store": ("store", "Store"),
    "clear_caches": ("methods.cache", "clear_caches"),
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        return getattr(importlib.import_module(f".{module}", __name__), attr)
    raise AttributeError(f"module 'lcao' has no attribute {name!r}")
