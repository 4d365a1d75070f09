"""Helpers shared by the tests that run the CLI in a subprocess."""

import os
import sqlite3
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def spawn(args, env_extra=None):
    """Start ``python -m lcao ARGS`` with one OpenMP thread and the checkout on the path."""
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    env.update(env_extra or {})
    return subprocess.Popen([sys.executable, "-m", "lcao", *args], env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def count_rows(path):
    """Points in a store (0 while it does not exist yet or is being created)."""
    if not os.path.exists(path):
        return 0
    try:
        con = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=5)
        try:
            return con.execute("SELECT COUNT(*) FROM points").fetchone()[0]
        finally:
            con.close()
    except sqlite3.OperationalError:
        return 0


def store_from_newer_schema(path, ahead=1):
    """An lcao store whose schema version is ``ahead`` versions newer than this lcao reads."""
    from lcao.store import SCHEMA_VERSION, Store

    Store(path).close()
    con = sqlite3.connect(path)
    con.execute("UPDATE meta SET value=? WHERE key='schema_version'", (str(SCHEMA_VERSION + ahead),))
    con.commit()
    con.close()
    return path
