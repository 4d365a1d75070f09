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


def can_create_in(folder: str) -> bool:
    """Whether a folder can really be created in ``folder`` (permission bits say nothing for root, nor on
    read-only or virtual file systems such as /proc): one is made and removed at once, leaving nothing."""
    try:
        probe = tempfile.mkdtemp(prefix=".lcao-probe-", dir=folder)
    except OSError:
        return False
    os.rmdir(probe)
    return True


def check_out_dir(path) -> str:
    """Check that the output folder can be written, leaving nothing behind.

    The folder may not exist yet; then its nearest existing parent must be a folder in which it can be
    created. Raises InputError naming the path.
    """
    from ..errors import InputError

    path = os.fspath(path)
    if os.path.exists(path):
        if not os.path.isdir(path):
            raise InputError(f"output path {path} exists and is not a folder")
        if not os.access(path, os.W_OK | os.X_OK) or not can_create_in(path):
            raise InputError(f"output folder {path} cannot be written")
        return path
    parent = os.path.dirname(os.path.abspath(path))
    while not os.path.exists(parent):
        parent = os.path.dirname(parent)
    if not os.path.isdir(parent):
        raise InputError(f"cannot create output folder {path}: {parent} is not a folder")
    if not os.access(parent, os.W_OK | os.X_OK) or not can_create_in(parent):
        raise InputError(f"cannot create output folder {path}: nothing can be created in {parent}")
    return path


def ensure_dir(path) -> str:
    os.makedirs(os.fspath(path), exist_ok=True)
    return os.fspath(path)
