"""Read-only DuckDB access for the dashboard, reopened when ingest os.replace-s a new database file in."""

from __future__ import annotations

import contextlib
import os
import sys
from pathlib import Path

import duckdb
import streamlit as st

from milepost.validate.store.database import connect_memory

DEFAULT_DB = "milepost.duckdb"
ENV_DB = "MILEPOST_DB"
CATALOG = "live"


def db_path() -> Path:
    """The database file: `--db PATH` after `--` on the streamlit command line, else env MILEPOST_DB, else default."""
    argv = sys.argv[1:]
    for i, arg in enumerate(argv):
        if arg == "--db" and i + 1 < len(argv):
            return Path(argv[i + 1])
        if arg.startswith("--db="):
            return Path(arg.split("=", 1)[1])
    return Path(os.environ.get(ENV_DB) or DEFAULT_DB)


def file_key(path: Path) -> tuple[str, int, int]:
    """(resolved path, inode, mtime_ns): changes whenever a writer replaces the file."""
    s = path.stat()
    return (str(path.resolve()), s.st_ino, s.st_mtime_ns)


def open_read_only(path: str | Path) -> duckdb.DuckDBPyConnection:
    """An in-memory DuckDB with the file ATTACHed read-only as catalog `live`.

    A plain `duckdb.connect(path, read_only=True)` is cached per path inside the process, so after a replace it
    would keep serving the old snapshot until every session let go of it. A private in-memory instance per file
    version lets old and new versions live side by side: queries in flight finish on the old one.
    """
    con = connect_memory()
    con.execute(f"ATTACH ? AS {CATALOG} (READ_ONLY)", [str(path)])
    return con


def _release(con: duckdb.DuckDBPyConnection) -> None:
    with contextlib.suppress(duckdb.Error):
        con.close()


@st.cache_resource(max_entries=3, show_spinner=False, on_release=_release)
def _open(path: str, inode: int, mtime_ns: int) -> duckdb.DuckDBPyConnection:
    """One connection per file version: inode and mtime are part of the cache key, so a replaced file is reopened."""
    return open_read_only(path)


def connection(path: Path | None = None) -> duckdb.DuckDBPyConnection:
    """The cached read-only connection to the current version of the database (FileNotFoundError if absent)."""
    p = path or db_path()
    if not p.exists():
        raise FileNotFoundError(p)
    return _open(*file_key(p))


def cursor(path: Path | None = None) -> duckdb.DuckDBPyConnection:
    """A fresh cursor on the cached connection, pointed at the database: use one per query."""
    cur = connection(path).cursor()
    cur.execute(f"USE {CATALOG}")
    return cur
