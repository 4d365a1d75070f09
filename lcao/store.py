"""The results store: an embedded SQLite database (standard library).

One row per computed point, keyed by everything that determines it: species,
charge, multiplicity, level (method, basis, d shells), protocol version, the
sweep it belongs to and the distance (in units of 1e-8 bohr). Each row keeps
the converged density matrix (raw float64 bytes, never pickle), so a resumed
sweep warm-starts exactly as the uninterrupted one would have.

Rows are committed one at a time in WAL mode: a run killed at any moment
loses nothing it finished, and a rerun computes only what is missing. Writers
use ``INSERT OR IGNORE``, so two runs writing the same store each store a
point once. Every statement is parameterised.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import sqlite3
from dataclasses import dataclass, field

import numpy as np

from .errors import StoreError

SCHEMA_VERSION = 1
#: Version of the scan protocol; bump when a change alters computed points.
PROTOCOL_VERSION = 1
DEFAULT_STORE_NAME = "lcao-store.sqlite"

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS points (
    species TEXT NOT NULL, charge INTEGER NOT NULL, multiplicity INTEGER NOT NULL,
    level TEXT NOT NULL, protocol INTEGER NOT NULL, sweep TEXT NOT NULL, r_key INTEGER NOT NULL,
    r_bohr REAL NOT NULL, energy REAL, converged INTEGER NOT NULL, cycles INTEGER NOT NULL,
    s2 REAL, rescue TEXT, stability TEXT, reason TEXT, extra TEXT,
    dm_shape TEXT NOT NULL, dm BLOB NOT NULL, created TEXT NOT NULL,
    PRIMARY KEY (species, charge, multiplicity, level, protocol, sweep, r_key)
);
CREATE TABLE IF NOT EXISTS atoms (
    symbol TEXT NOT NULL, charge INTEGER NOT NULL, spin INTEGER NOT NULL,
    level TEXT NOT NULL, protocol INTEGER NOT NULL,
    energy REAL, converged INTEGER NOT NULL, dm_shape TEXT NOT NULL, dm BLOB NOT NULL, created TEXT NOT NULL,
    PRIMARY KEY (symbol, charge, spin, level, protocol)
);
"""


def r_key(r_bohr: float) -> int:
    """Integer key of a distance: units of 1e-8 bohr."""
    return int(round(float(r_bohr) * 1e8))


@dataclass(frozen=True)
class StoredPoint:
    """A point as kept in the store (see :class:`lcao.scan.scf.Solution`)."""

    r_bohr: float
    energy: float
    converged: bool
    cycles: int
    s2: float | None
    rescue: str
    stability: str
    reason: str | None
    extra: dict
    dm: np.ndarray = field(repr=False, compare=False)
    #: (mo_energy, mo_coeff, mo_occ) of a point computed in this run; never written to the file
    orbitals: tuple | None = field(default=None, repr=False, compare=False)


def _pack(dm) -> tuple[str, bytes]:
    a = np.ascontiguousarray(dm, dtype=np.float64)
    return json.dumps(list(a.shape)), a.tobytes()


def _unpack(shape: str, blob: bytes) -> np.ndarray:
    return np.frombuffer(blob, dtype=np.float64).reshape(json.loads(shape)).copy()


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def point_key(species, multiplicity, level, sweep, r_bohr) -> tuple:
    """The key of a point: in the store, in a worker's own points and in the orbital cache."""
    return (species.label, species.charge, multiplicity, level.key(), PROTOCOL_VERSION, sweep, r_key(r_bohr))


class Store:
    """The SQLite results store. Use as a context manager or call :meth:`close`.

    Args:
        path: database file; created if missing (its folder must exist).
        read_only: open without creating or writing anything.
        reuse: False ignores rows stored before this run (they are computed
            afresh and replaced); rows written during the run are still read.
    """

    def __init__(self, path, read_only: bool = False, reuse: bool = True):
        self.path = os.fspath(path)
        self.read_only = read_only
        self.reuse = reuse
        self._written: set = set()
        if read_only and not os.path.exists(self.path):
            raise StoreError(f"store {self.path} does not exist")
        folder = os.path.dirname(os.path.abspath(self.path))
        if not os.path.isdir(folder):
            raise StoreError(f"cannot create store {self.path}: folder {folder} does not exist")
        try:
            uri = f"file:{self.path}?mode=ro" if read_only else self.path
            self.conn = sqlite3.connect(uri, uri=read_only, timeout=60.0, isolation_level=None)
            self.conn.execute("PRAGMA busy_timeout = 60000")
            self._check_and_init()
        except sqlite3.DatabaseError as exc:
            raise StoreError(f"{self.path} is not an lcao store ({exc})") from None

    def _check_and_init(self):
        c = self.conn
        tables = {r[0] for r in c.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        if tables and "meta" not in tables:
            raise StoreError(f"{self.path} is an SQLite file but not an lcao store (tables: {', '.join(sorted(tables))})")
        if "meta" in tables:
            row = c.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
            if row is None:
                raise StoreError(f"{self.path} has no schema version; it is not an lcao store")
            version = int(row[0])
            if version > SCHEMA_VERSION:
                raise StoreError(
                    f"store {self.path} was written by a newer lcao (schema {version});"
                    f" this lcao reads schema {SCHEMA_VERSION} and older"
                )
        if self.read_only:
            return
        c.execute("PRAGMA journal_mode=WAL")
        c.execute("PRAGMA synchronous=NORMAL")
        c.execute("BEGIN IMMEDIATE")
        try:
            for stmt in _SCHEMA.strip().split(";"):
                if stmt.strip():
                    c.execute(stmt)
            c.execute(
                "INSERT OR IGNORE INTO meta(key, value) VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),)
            )
            c.execute("INSERT OR IGNORE INTO meta(key, value) VALUES ('created', ?)", (_now(),))
            c.execute("COMMIT")
        except Exception:
            c.execute("ROLLBACK")
            raise

    def close(self):
        self.conn.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # points -----------------------------------------------------------------

    def get_point(self, species, multiplicity, level, sweep, r_bohr) -> StoredPoint | None:
        key = point_key(species, multiplicity, level, sweep, r_bohr)
        if not self.reuse and key not in self._written:
            return None
        row = self.conn.execute(
            "SELECT r_bohr, energy, converged, cycles, s2, rescue, stability, reason, extra, dm_shape, dm"
            " FROM points WHERE species=? AND charge=? AND multiplicity=? AND level=? AND protocol=?"
            " AND sweep=? AND r_key=?",
            key,
        ).fetchone()
        if row is None:
            return None
        return StoredPoint(
            row[0],
            float("nan") if row[1] is None else row[1],
            bool(row[2]),
            row[3],
            row[4],
            row[5],
            row[6],
            row[7],
            json.loads(row[8]) if row[8] else {},
            _unpack(row[9], row[10]),
        )

    def put_point(self, species, multiplicity, level, sweep, point: StoredPoint) -> bool:
        """Store one point (committed at once). Returns False if it was already there."""
        if self.read_only:
            raise StoreError(f"store {self.path} is open read-only")
        shape, blob = _pack(point.dm)
        energy = None if not np.isfinite(point.energy) else float(point.energy)
        key = point_key(species, multiplicity, level, sweep, point.r_bohr)
        verb = "INSERT OR IGNORE" if self.reuse else "INSERT OR REPLACE"
        self._written.add(key)
        cur = self.conn.execute(
            f"{verb} INTO points(species, charge, multiplicity, level, protocol, sweep, r_key,"
            " r_bohr, energy, converged, cycles, s2, rescue, stability, reason, extra, dm_shape, dm, created)"
            " VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
            key
            + (
                float(point.r_bohr),
                energy,
                int(point.converged),
                int(point.cycles),
                point.s2,
                point.rescue,
                point.stability,
                point.reason,
                json.dumps(point.extra, sort_keys=True),
                shape,
                blob,
                _now(),
            ),
        )
        return cur.rowcount == 1

    def count_points(self, species=None) -> int:
        if species is None:
            return self.conn.execute("SELECT COUNT(*) FROM points").fetchone()[0]
        return self.conn.execute("SELECT COUNT(*) FROM points WHERE species=?", (species.label,)).fetchone()[0]

    def delete_curve(self, species, multiplicity, level) -> int:
        """Forget every stored point of one curve (for a forced recomputation)."""
        cur = self.conn.execute(
            "DELETE FROM points WHERE species=? AND charge=? AND multiplicity=? AND level=? AND protocol=?",
            (species.label, species.charge, multiplicity, level.key(), PROTOCOL_VERSION),
        )
        return cur.rowcount

    # atoms ------------------------------------------------------------------
    def get_atom(self, symbol, charge, spin, level):
        from .atoms import AtomState

        if not self.reuse:
            return None
        row = self.conn.execute(
            "SELECT energy, converged, dm_shape, dm FROM atoms WHERE symbol=? AND charge=? AND spin=?"
            " AND level=? AND protocol=?",
            (symbol, charge, spin, level.key(), PROTOCOL_VERSION),
        ).fetchone()
        if row is None:
            return None
        return AtomState(symbol, charge, spin, row[0], bool(row[1]), _unpack(row[2], row[3]))

    def put_atom(self, state, level) -> None:
        if self.read_only:
            return
        shape, blob = _pack(state.dm)
        verb = "INSERT OR IGNORE" if self.reuse else "INSERT OR REPLACE"
        self.conn.execute(
            f"{verb} INTO atoms(symbol, charge, spin, level, protocol, energy, converged, dm_shape, dm, created)"
            " VALUES (?,?,?,?,?,?,?,?,?,?)",
            (
                state.symbol,
                state.charge,
                state.spin,
                level.key(),
                PROTOCOL_VERSION,
                float(state.energy_hartree),
                int(state.converged),
                shape,
                blob,
                _now(),
            ),
        )


def check_store_path(path) -> None:
    """Check a store path before a run, creating nothing.

    An existing file must be an lcao store of a schema this version reads;
    a new one needs an existing, writable folder. Raises InputError.
    """
    from .errors import InputError

    path = os.fspath(path)
    if os.path.exists(path):
        if os.path.isdir(path):
            raise InputError(f"store {path} is a folder, not a file")
        try:
            Store(path, read_only=True).close()
        except StoreError as exc:
            raise InputError(str(exc)) from None
        if not os.access(path, os.W_OK):
            raise InputError(f"store {path} cannot be written")
        return
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"cannot create store {path}: folder {folder} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"cannot create store {path}: folder {folder} cannot be written")


class MemoryStore(Store):
    """A throw-away in-memory store (for the library API without a file)."""

    def __init__(self):
        self.path = ":memory:"
        self.read_only = False
        self.reuse = True
        self._written = set()
        self.conn = sqlite3.connect(":memory:", isolation_level=None)
        self._check_and_init()
