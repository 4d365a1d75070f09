"""Writers for results. ``CURVE_WRITERS`` maps a file name to a function(result) -> bytes."""

from .curve_files import CURVE_SCHEMA_VERSION, CURVE_WRITERS, curve_document, write_curve_outputs

__all__ = ["CURVE_SCHEMA_VERSION", "CURVE_WRITERS", "curve_document", "write_curve_outputs"]
