"""Read-only database access for the dashboard: the store's `Reader`, one per file version, cached by Streamlit.

Ingest `os.replace`s a new file in; the cache key holds the file's inode and mtime, so the next rerun opens the new
version while queries in flight finish on the old one. `Reader` checks the schema version on opening (a file that
is not a Milepost database, or of another schema version, raises LoadError).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import duckdb
import streamlit as st

from milepost.dashboard import queries
from milepost.validate.store.database import DEFAULT_DB, ENV_DB, Reader


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


def _release(reader: Reader) -> None:
    reader.close()


@st.cache_resource(max_entries=3, show_spinner=False, on_release=_release)
def _open(path: str, inode: int, mtime_ns: int) -> Reader:
    """One reader per file version: inode and mtime are part of the cache key, so a replaced file is reopened.
    The reader carries that key (queries.mark_opened): the slices cached for it are those of this version."""
    reader = Reader(path)
    queries.mark_opened(reader.con, (path, inode, mtime_ns))
    return reader


def connection(path: Path | None = None) -> duckdb.DuckDBPyConnection:
    """The cached read-only connection to the current version of the database.

    FileNotFoundError if the file is absent; LoadError if it cannot be opened or has another schema version.
    """
    p = path or db_path()
    if not p.exists():
        raise FileNotFoundError(p)
    return _open(*file_key(p)).con


def cursor(path: Path | None = None) -> duckdb.DuckDBPyConnection:
    """A fresh cursor on the cached connection, pointed at the database: use one per query."""
    p = path or db_path()
    if not p.exists():
        raise FileNotFoundError(p)
    return _open(*file_key(p)).cursor()


def cursor_of(key: tuple[str, int, int]) -> duckdb.DuckDBPyConnection:
    """A fresh cursor on the reader of one version of the file (`file_key`), so an answer cached under that key is
    read from that version even if a writer replaces the file meanwhile."""
    return _open(*key).cursor()
