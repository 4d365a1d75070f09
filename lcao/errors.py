"""The error hierarchy.

``LcaoError`` is the base. ``InputError`` (and its kinds) is raised before any
computation, at the public boundary, and names the offending value and what is
allowed. ``CalculationError`` is for failures of a single calculation; the scan
protocol catches it per point, flags the point and carries on. ``StoreError``
covers a results store that cannot be used.
"""

from __future__ import annotations


class LcaoError(Exception):
    """Base class of every error this package raises on purpose."""


class InputError(LcaoError, ValueError):
    """Bad input, detected before any computation starts."""


class SpeciesError(InputError):
    """A species text or charge that does not describe a usable diatomic."""


class LevelError(InputError):
    """An unknown method or basis, or a basis that lacks an element."""


class BasisCoverageError(LevelError):
    """A basis set that has no functions for an element (a survey skips such members)."""


class GridError(InputError):
    """Distances that cannot make a scan."""


class CalculationError(LcaoError, RuntimeError):
    """A single calculation failed (no convergence, NaN). Flags a point, not a run."""


class StoreError(LcaoError):
    """The results store cannot be opened or read."""


class FitError(LcaoError):
    """A curve cannot be fitted (too few trusted points, no minimum)."""
