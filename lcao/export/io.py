"""Atomic file writing: a temporary file in the same folder, then ``os.replace``.

A reader never sees half a file, and a failed write leaves the old file (or
nothing) in place.
"""

from __future__ import annotations

import json
import math
import os
import tempfile


def atomic_write_bytes(path, data: bytes) -> None:
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=os.path.basename(path), dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def atomic_write_text(path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def _clean(obj):
    """JSON-safe copy: NaN and infinities become null, tuples lists, numpy scalars floats."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item") and not isinstance(obj, (str, bytes)):
        try:
            obj = obj.item()
        except (TypeError, ValueError):
            pass
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def json_text(obj) -> str:
    return json.dumps(_clean(obj), indent=2, sort_keys=False, allow_nan=False) + "\n"


def atomic_write_json(path, obj) -> None:
    atomic_write_text(path, json_text(obj))


def prepare_out_dir(path) -> str:
    """Create the output folder if needed and check it can be written.

    Raises:
        InputError: naming the folder, before anything is computed.
    """
    from ..errors import InputError

    path = os.fspath(path)
    try:
        os.makedirs(path, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create output folder {path}: {exc.strerror}") from None
    if not os.path.isdir(path):
        raise InputError(f"output path {path} exists and is not a folder")
    try:
        fd, probe = tempfile.mkstemp(prefix=".lcao-write-check-", dir=path)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise InputError(f"output folder {path} cannot be written: {exc.strerror}") from None
    return path
