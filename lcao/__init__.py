"""lcao: potential-energy curves, orbital analysis and spectroscopic constants of diatomics.

Public API (heavy modules are imported on first use, so ``import lcao`` is cheap)::

    import lcao
    res = lcao.curve("NO", "HF/6-31G")
    res.points[0].energy_hartree
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["curve", "parse_species", "parse_level", "Species", "Level", "Store", "__version__"]


def __getattr__(name):
    if name == "curve":
        from .pipeline import curve

        return curve
    if name in ("parse_species", "Species"):
        from . import species

        return getattr(species, name)
    if name in ("parse_level", "Level"):
        from . import levels

        return getattr(levels, name)
    if name == "Store":
        from .store import Store

        return Store
    raise AttributeError(f"module 'lcao' has no attribute {name!r}")
