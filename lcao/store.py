"""The results store: an embedded SQLite database (standard library).

One row per computed point, keyed by everything that determines it: species,
charge, multiplicity, level (method, basis, d shells), protocol version, the
sweep it belongs to and the distance (in units of 1e-8 bohr). Each row keeps
the method's warm start (named arrays as raw float64 bytes, never pickle) and
its energy components, so a resumed sweep warm-starts exactly as the
uninterrupted one would have. Only the process that started a run writes
the store; workers hand their results back to it.

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
import numpy as np

from .errors import StoreError

#: 2: per point and atom, the method's energy components and a warm start of named arrays (schema 1
#: kept one density matrix; such stores are upgraded in place when opened for writing, and read as
#: they are otherwise: their density is the warm start of Hartree-Fock points)
SCHEMA_VERSION = 2
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
    dm_shape TEXT NOT NULL, dm BLOB NOT NULL, created TEXT NOT NULL, components TEXT, warm_layout TEXT,
    PRIMARY KEY (species, charge, multiplicity, level, protocol, sweep, r_key)
);
CREATE TABLE IF NOT EXISTS atoms (
    symbol TEXT NOT NULL, charge INTEGER NOT NULL, spin INTEGER NOT NULL,
    level TEXT NOT NULL, protocol INTEGER NOT NULL,
    energy REAL, converged INTEGER NOT NULL, dm_shape TEXT NOT NULL, dm BLOB NOT NULL, created TEXT NOT NULL,
    components TEXT, warm_layout TEXT,
    PRIMARY KEY (symbol, charge, spin, level, protocol)
);
"""
#: the statements that upgrade a schema-1 store to schema 2 (table, column, statement)
_UPGRADE_TO_2 = (
    ("points", "components", "ALTER TABLE points ADD COLUMN components TEXT"),
    ("points", "warm_layout", "ALTER TABLE points ADD COLUMN warm_layout TEXT"),
    ("atoms", "components", "ALTER TABLE atoms ADD COLUMN components TEXT"),
    ("atoms", "warm_layout", "ALTER TABLE atoms ADD COLUMN warm_layout TEXT"),
)


def r_key(r_bohr: float) -> int:
    """Integer key of a distance: units of 1e-8 bohr."""
    return int(round(float(r_bohr) * 1e8))


def pack_warm(warm: dict) -> tuple[str, bytes, str]:
    """(total shape, bytes, layout) of a warm start: its arrays as float64, one after another."""
    layout, parts = [], []
    for name, arr in warm.items():
        a = np.ascontiguousarray(arr, dtype=np.float64)
        layout.append([name, list(a.shape)])
        parts.append(a.tobytes())
    blob = b"".join(parts)
    return json.dumps([len(blob) // 8]), blob, json.dumps(layout)


def unpack_warm(shape: str, blob: bytes, layout: str | None) -> dict:
    """The warm start of a row; a schema-1 row (no layout) holds one density matrix."""
    flat = np.frombuffer(blob, dtype=np.float64)
    if layout is None:
        return {"dm": flat.reshape(json.loads(shape)).copy()}
    out, at = {}, 0
    for name, dims in json.loads(layout):
        size = int(np.prod(dims)) if dims else 1
        out[name] = flat[at:at + size].reshape(dims).copy()
        at += size
    return out


def _extra(point) -> dict:
    return {"unstable_towards": point.unstable_towards} if point.unstable_towards else {}


def _unstable_towards(extra: dict) -> str | None:
    if extra.get("unstable_towards"):
        return extra["unstable_towards"]
    return "unrestricted" if extra.get("uhf_unstable") else None  # schema-1 rows


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def point_key(species, multiplicity, level, sweep, r_bohr) -> tuple:
    """The key of a point in the store."""
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
            self._init_when_free()
        except sqlite3.DatabaseError as exc:
            raise StoreError(f"{self.path} is not an lcao store ({exc})") from None

    def _init_when_free(self, seconds: float = 60.0):
        """:meth:`_check_and_init`, tried again while another process holds the file: switching a new
        store to WAL takes a lock that SQLite does not wait for (two runs opening one new store at once
        had one of them fail with "database is locked")."""
        import time

        deadline = time.monotonic() + seconds
        while True:
            try:
                return self._check_and_init()
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) or time.monotonic() > deadline:
                    raise
                time.sleep(0.05)

    def _check_and_init(self):
        c = self.conn
        tables = {r[0] for r in c.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        if tables and "meta" not in tables:
            raise StoreError(f"{self.path} is an SQLite file but not an lcao store (tables: {', '.join(sorted(tables))})")
        version = SCHEMA_VERSION
        if "meta" in tables:
            row = c.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
            if row is None:
                raise StoreError(f"{self.path} has no schema version; it is not an lcao store")
            version = int(row[0])
            if version > SCHEMA_VERSION:
                raise StoreError(
                    f"store {self.path} was written by a newer lcao (schema {version});"
                    f" this lcao reads schema {SCHEMA_VERSION} and older: upgrade lcao or use another store"
                )
        self.schema = version
        if self.read_only:
            return
        c.execute("PRAGMA journal_mode=WAL")
        c.execute("PRAGMA synchronous=NORMAL")
        c.execute("BEGIN IMMEDIATE")
        try:
            for stmt in _SCHEMA.strip().split(";"):
                if stmt.strip():
                    c.execute(stmt)
            row = c.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
            if row is not None and int(row[0]) < SCHEMA_VERSION:  # schema 1: add the columns of 2
                have = {"points": {r[1] for r in c.execute("PRAGMA table_info(points)")},
                        "atoms": {r[1] for r in c.execute("PRAGMA table_info(atoms)")}}
                for table, column, statement in _UPGRADE_TO_2:
                    if column not in have[table]:
                        c.execute(statement)
                c.execute("UPDATE meta SET value=? WHERE key='schema_version'", (str(SCHEMA_VERSION),))
            c.execute(
                "INSERT OR IGNORE INTO meta(key, value) VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),)
            )
            c.execute("INSERT OR IGNORE INTO meta(key, value) VALUES ('created', ?)", (_now(),))
            c.execute("COMMIT")
        except Exception:
            c.execute("ROLLBACK")
            raise
        self.schema = SCHEMA_VERSION

    def _new_columns(self) -> str:
        """The schema-2 columns, or NULLs in their place for a schema-1 store opened read-only."""
        return "components, warm_layout" if self.schema >= 2 else "NULL, NULL"

    def close(self):
        self.conn.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # points -----------------------------------------------------------------

    def has_species(self, species) -> bool:
        """Whether any point of this species (any level, state or sweep) may be read from the store."""
        if not self.reuse:
            return any(k[0] == species.label and k[1] == species.charge for k in self._written)
        row = self.conn.execute("SELECT 1 FROM points WHERE species=? AND charge=? AND protocol=? LIMIT 1",
                                (species.label, species.charge, PROTOCOL_VERSION)).fetchone()
        return row is not None

    def get_point(self, species, multiplicity, level, sweep, r_bohr):
        """The stored :class:`lcao.methods.PointResult`, or None."""
        from .methods.base import PointResult

        key = point_key(species, multiplicity, level, sweep, r_bohr)
        if not self.reuse and key not in self._written:
            return None
        row = self.conn.execute(
            "SELECT r_bohr, energy, converged, cycles, s2, rescue, stability, reason, extra, dm_shape, dm, "
            + self._new_columns() +
            " FROM points WHERE species=? AND charge=? AND multiplicity=? AND level=? AND protocol=?"
            " AND sweep=? AND r_key=?",
            key,
        ).fetchone()
        if row is None:
            return None
        energy = float("nan") if row[1] is None else row[1]
        extra = json.loads(row[8]) if row[8] else {}
        components = json.loads(row[11]) if row[11] else {}
        return PointResult(row[0], energy, bool(row[2]), row[3], row[4], row[5], row[6], row[7], components,
                           unpack_warm(row[9], row[10], row[12]), _unstable_towards(extra))

    def put_point(self, species, multiplicity, level, sweep, point) -> bool:
        """Store one :class:`lcao.methods.PointResult` (committed at once). Returns False if it was already there."""
        if self.read_only:
            raise StoreError(f"store {self.path} is open read-only")
        shape, blob, layout = pack_warm(point.warm)
        energy = None if not np.isfinite(point.energy) else float(point.energy)
        key = point_key(species, multiplicity, level, sweep, point.r_bohr)
        verb = "INSERT OR IGNORE" if self.reuse else "INSERT OR REPLACE"
        self._written.add(key)
        components = {k: (float(v) if np.isfinite(v) else None) for k, v in point.components.items()}
        cur = self.conn.execute(
            f"{verb} INTO points(species, charge, multiplicity, level, protocol, sweep, r_key,"
            " r_bohr, energy, converged, cycles, s2, rescue, stability, reason, extra, dm_shape, dm, created,"
            " components, warm_layout)"
            " VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
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
                json.dumps(_extra(point), sort_keys=True),
                shape,
                blob,
                _now(),
                json.dumps(components, sort_keys=True),
                layout,
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
        """The stored :class:`lcao.methods.AtomResult`, or None."""
        from .methods.base import AtomResult

        if not self.reuse:
            return None
        row = self.conn.execute(
            "SELECT energy, converged, dm_shape, dm, " + self._new_columns() + " FROM atoms WHERE symbol=?"
            " AND charge=? AND spin=? AND level=? AND protocol=?",
            (symbol, charge, spin, level.key(), PROTOCOL_VERSION),
        ).fetchone()
        if row is None:
            return None
        return AtomResult(symbol, charge, spin, row[0], bool(row[1]), unpack_warm(row[2], row[3], row[5]),
                          json.loads(row[4]) if row[4] else {})

    def put_atom(self, state, level) -> None:
        if self.read_only:
            return
        shape, blob, layout = pack_warm(state.warm)
        verb = "INSERT OR IGNORE" if self.reuse else "INSERT OR REPLACE"
        self.conn.execute(
            f"{verb} INTO atoms(symbol, charge, spin, level, protocol, energy, converged, dm_shape, dm, created,"
            " components, warm_layout) VALUES (?,?,?,?,?,?,?,?,?,?,?,?)",
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
                json.dumps(state.components, sort_keys=True),
                layout,
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
    from .export.io import can_create_in

    if not os.access(folder, os.W_OK | os.X_OK) or not can_create_in(folder):
        raise InputError(f"cannot create store {path}: folder {folder} cannot be written")


class MemoryStore(Store):
    """A throw-away in-memory store (for the library API without a file)."""

    def __init__(self):
        self.path = ":memory:"
        self.read_only = False
        self.reuse = True
        self._written = set()
        self.schema = SCHEMA_VERSION
        self.conn = sqlite3.connect(":memory:", isolation_level=None)
        self._check_and_init()


class RecordingStore(MemoryStore):
    """An in-memory store that also keeps what was put into it, in order, as plain values: what a worker
    that ran a whole series member hands back for the client to commit to the real store
    (:class:`lcao.scan.tasks.MemberTask`)."""

    def __init__(self):
        super().__init__()
        #: (species, multiplicity, level, sweep, PointResult) and (AtomResult, level), as put
        self.points: list = []
        self.atoms: list = []

    def put_point(self, species, multiplicity, level, sweep, point) -> bool:
        self.points.append((species, multiplicity, level, sweep, point))
        return super().put_point(species, multiplicity, level, sweep, point)

    def put_atom(self, state, level) -> None:
        self.atoms.append((state, level))
        super().put_atom(state, level)
