"""Writers for results. ``CURVE_WRITERS`` and ``ORBITAL_WRITERS`` map a file name to a function(result) -> bytes."""

from .curve_files import CURVE_SCHEMA_VERSION, CURVE_WRITERS, curve_document, write_outputs
from .orbital_files import ORBITAL_WRITERS, ORBITALS_SCHEMA_VERSION, orbitals_document

__all__ = [
    "CURVE_SCHEMA_VERSION",
    "CURVE_WRITERS",
    "ORBITALS_SCHEMA_VERSION",
    "ORBITAL_WRITERS",
    "curve_document",
    "orbitals_document",
    "write_outputs",
]
