"""The scenario database file: create, migrate, lock, write by copy-and-swap, and open read-only for readers.

Writers never touch the live file. Under an exclusive lock on `<db>.lock` a writer copies the live file to
`<db>.tmp-<pid>` (or builds a new one there), attaches the copy to its own DuckDB connection, writes one
transaction, checkpoints, detaches, fsyncs and `os.replace`s the copy over the live file. A crash at any moment
leaves either the old file or the whole new one; a reader that has the old file open keeps its snapshot.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
import re
import shutil
import sys
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path

import duckdb

import milepost.schema
from milepost.validate.errors import LoadError, LockTimeout, one_line
from milepost.validate.sql import identifier

ENV_DB = "MILEPOST_DB"
ENV_LOCK_TIMEOUT = "MILEPOST_LOCK_TIMEOUT"
# Fault-injection hook for tests: pause (sleep) at the named stage of a write, after touching MILEPOST_PAUSE_FILE.
ENV_PAUSE_AT = "MILEPOST_PAUSE_AT"
ENV_PAUSE_FILE = "MILEPOST_PAUSE_FILE"
PAUSE_STAGES = ("locked", "in-transaction", "before-replace", "after-replace")
DEFAULT_DB = "milepost.duckdb"
DEFAULT_LOCK_TIMEOUT = 120.0
SCHEMA_DIR = Path(milepost.schema.__file__).resolve().parent
SCHEMA_FILE = SCHEMA_DIR / "database.sql"
MIGRATIONS_DIR = SCHEMA_DIR / "migrations"
NEW = "new"  # catalog alias of the copy being written, in the writer's connection
_MIGRATION_NAME = re.compile(r"^(\d{4})_[a-z0-9_]+\.sql$")
_NO_AUTOLOAD = {"autoinstall_known_extensions": False, "autoload_known_extensions": False}


def default_db_path(db: str | Path | None = None) -> Path:
    """The database to use: `db` if given, else $MILEPOST_DB, else ./milepost.duckdb."""
    if db is not None and str(db) != "":
        return Path(db)
    return Path(os.environ.get(ENV_DB) or DEFAULT_DB)


def lock_timeout_default() -> float:
    """Seconds a writer waits for the lock: $MILEPOST_LOCK_TIMEOUT or 120."""
    raw = os.environ.get(ENV_LOCK_TIMEOUT)
    if not raw:
        return DEFAULT_LOCK_TIMEOUT
    try:
        return max(0.0, float(raw))
    except ValueError:
        raise LoadError(f"{ENV_LOCK_TIMEOUT}={raw!r} is not a number of seconds") from None


def connect_memory(mb: int | None = None, spill: Path | None = None) -> duckdb.DuckDBPyConnection:
    """A new in-memory connection that never tries to download extensions, within the memory budget of
    `milepost.validate.memory` (or `mb`), spilling beyond it to a private folder (or `spill`)."""
    from milepost.validate.memory import budget

    return budget(duckdb.connect(":memory:", config=dict(_NO_AUTOLOAD)), mb, spill)


# ---------------------------------------------------------------- schema and migrations


def schema_sql() -> str:
    """The complete current DDL (tables and views)."""
    return SCHEMA_FILE.read_text(encoding="utf-8")


def migrations(directory: Path = MIGRATIONS_DIR) -> list[tuple[int, Path]]:
    """The numbered forward migrations, in order; their numbers must run 1, 2, 3 ... without gaps."""
    found = sorted((int(m.group(1)), p) for p in directory.glob("*.sql") if (m := _MIGRATION_NAME.match(p.name)))
    for expected, (number, path) in enumerate(found, start=1):
        if number != expected:
            raise LoadError(f"{path}: migration number {number}, expected {expected} (no gaps or repeats)")
    return found


def latest_version(directory: Path = MIGRATIONS_DIR) -> int:
    """The schema version this program writes: the number of the last migration."""
    found = migrations(directory)
    return found[-1][0] if found else 0


def schema_version(con: duckdb.DuckDBPyConnection, catalog: str | None = None) -> int:
    """The schema_version recorded in a database's meta table (0 for a database without one)."""
    prefix = f"{identifier(catalog)}." if catalog else ""
    try:
        rows = con.execute(f"SELECT value FROM {prefix}meta WHERE key = 'schema_version'").fetchall()  # noqa: S608 - catalog quoted by validate.sql
    except duckdb.CatalogException:
        return 0
    return int(rows[0][0]) if rows else 0


def _has_tables(con: duckdb.DuckDBPyConnection, catalog: str) -> bool:
    found = con.execute("SELECT count(*) FROM duckdb_tables() WHERE database_name = ?", [catalog]).fetchall()
    return bool(found[0][0])


def _run_script(con: duckdb.DuckDBPyConnection, catalog: str, sql: str) -> None:
    # Scripts use unqualified names; USE makes them land in the attached copy.
    con.execute(f"USE {identifier(catalog)}")
    try:
        con.execute(sql)
    finally:
        con.execute("USE memory")


def _set_meta(con: duckdb.DuckDBPyConnection, catalog: str, key: str, value: str) -> None:
    c = identifier(catalog)
    con.execute(f"DELETE FROM {c}.meta WHERE key = ?", [key])  # noqa: S608 - catalog quoted by validate.sql
    con.execute(f"INSERT INTO {c}.meta VALUES (?, ?)", [key, value])  # noqa: S608 - catalog quoted by validate.sql


def create_schema(con: duckdb.DuckDBPyConnection, catalog: str, directory: Path = MIGRATIONS_DIR) -> None:
    """Build the current schema from database.sql in an empty attached database."""
    from milepost.validate import __version__

    _run_script(con, catalog, schema_sql())
    _set_meta(con, catalog, "schema_version", str(latest_version(directory)))
    _set_meta(con, catalog, "created_at", time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()))
    _set_meta(con, catalog, "created_by_milepost", __version__)


def migrate(con: duckdb.DuckDBPyConnection, catalog: str, directory: Path = MIGRATIONS_DIR) -> list[int]:
    """Apply the migrations the attached database lacks, in order; returns the numbers applied."""
    current = schema_version(con, catalog)
    steps = migrations(directory)
    latest = steps[-1][0] if steps else 0
    if current > latest:
        raise LoadError(
            f"the database has schema version {current}, newer than this milepost knows ({latest}); upgrade milepost"
        )
    applied = []
    for number, path in steps:
        if number <= current:
            continue
        try:
            _run_script(con, catalog, path.read_text(encoding="utf-8"))
            _set_meta(con, catalog, "schema_version", str(number))
        except duckdb.Error as e:
            raise LoadError(f"migration {path.name} failed: {e}") from None
        applied.append(number)
    return applied


# DuckDB errors that say the file cannot be read or written (I/O, a full disk, a damaged block): a LoadError, not a
# bug. DuckDB raises a damaged block's checksum error as the plain base class. Errors about our SQL (parser,
# binder, catalog, constraint) stay what they are.
FILE_ERRORS: tuple[type[duckdb.Error], ...] = (
    duckdb.IOException,
    duckdb.SerializationException,
    duckdb.PermissionException,
    duckdb.FatalException,
    duckdb.InternalException,
)


def is_file_error(e: BaseException) -> bool:
    """Whether an exception says the database file (or the disk under it) failed, rather than our code."""
    return isinstance(e, (OSError, *FILE_ERRORS)) or type(e) is duckdb.Error


# ---------------------------------------------------------------- lock


@dataclass
class Lock:
    """An exclusive advisory lock on `<db>.lock`, released by `release()` or by the death of the process."""

    path: Path
    fd: int

    def release(self) -> None:
        """Give the lock back (idempotent)."""
        if self.fd >= 0:
            with contextlib.suppress(OSError):
                fcntl.flock(self.fd, fcntl.LOCK_UN)
            os.close(self.fd)
            self.fd = -1


def lock_path(db: Path) -> Path:
    return db.with_name(db.name + ".lock")


def acquire_lock(db: Path, timeout: float | None = None, on_wait: Callable[[str], None] | None = None) -> Lock:
    """Take the writer lock of `db`, waiting up to `timeout` seconds (message once via `on_wait`), else LockTimeout."""
    timeout = lock_timeout_default() if timeout is None else timeout
    path = lock_path(db)
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    except OSError as e:
        raise LoadError(f"cannot create the lock file {path}: {e.strerror}") from None
    deadline = time.monotonic() + timeout
    told = False
    while True:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            break
        except OSError as e:
            if e.errno not in (errno.EAGAIN, errno.EACCES):
                os.close(fd)
                raise LoadError(f"cannot lock {path}: {e.strerror}") from None
        if time.monotonic() >= deadline:
            holder = _lock_holder(fd)
            os.close(fd)
            raise LockTimeout(
                f"another milepost process{holder} is writing {db}; gave up after {timeout:g} s "
                f"(wait longer with --wait or {ENV_LOCK_TIMEOUT})"
            )
        if not told and on_wait is not None:
            on_wait(
                f"Waiting up to {timeout:g} s for another milepost process{_lock_holder(fd)} to finish writing {db} ..."
            )
            told = True
        time.sleep(0.05)
    os.ftruncate(fd, 0)
    os.pwrite(fd, f"{os.getpid()}\n".encode(), 0)
    return Lock(path, fd)


def _lock_holder(fd: int) -> str:
    with contextlib.suppress(OSError, ValueError):
        pid = int(os.pread(fd, 32, 0).decode().strip() or "0")
        if pid:
            return f" (pid {pid})"
    return ""


# ---------------------------------------------------------------- writer


def _pause(stage: str) -> None:
    """Test hook: stop here (sleep) when $MILEPOST_PAUSE_AT names this stage, so a test can kill us at it."""
    if os.environ.get(ENV_PAUSE_AT) != stage:
        return
    signal_file = os.environ.get(ENV_PAUSE_FILE)
    if signal_file:
        Path(signal_file).write_text(f"{os.getpid()} {stage}\n", encoding="utf-8")
    time.sleep(float(os.environ.get("MILEPOST_PAUSE_SECONDS", "60")))


def _remove_stale_copies(db: Path) -> None:
    # Only called under the lock: no other writer exists, so every copy left behind is from a dead one.
    for p in db.parent.glob(glob_escape(db.name) + ".tmp-*"):
        with contextlib.suppress(OSError):
            p.unlink()


def glob_escape(name: str) -> str:
    return re.sub(r"([\[\]*?])", r"[\1]", name)


def _fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(path: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(path, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


class Writer:
    """One atomic write of the database: a copy of the live file attached as catalog `new` on `con`.

    Use as a context manager: `with Writer(db, con) as w: con.execute("INSERT INTO new.data ...")`.
    Entering takes the lock, copies (or creates) and migrates; leaving normally commits, checkpoints and swaps
    the copy in; leaving with an exception discards the copy. Statements inside run in one transaction, begun
    by `begin()`; work that must happen outside it (TEMP tables) goes before `begin()`.
    """

    def __init__(
        self,
        db: Path,
        con: duckdb.DuckDBPyConnection,
        *,
        timeout: float | None = None,
        on_wait: Callable[[str], None] | None = None,
        migrations_dir: Path = MIGRATIONS_DIR,
    ) -> None:
        self.db = Path(db)
        self.con = con
        self.timeout = timeout
        self.on_wait = on_wait
        self.migrations_dir = migrations_dir
        self.tmp = self.db.with_name(f"{self.db.name}.tmp-{os.getpid()}")
        self.lock: Lock | None = None
        self.created = False
        self.migrated: list[int] = []
        self._attached = False
        self._in_tx = False

    def __enter__(self) -> Writer:
        if not self.db.parent.is_dir():
            raise LoadError(f"the folder of the database does not exist: {self.db.parent}")
        self.lock = acquire_lock(self.db, self.timeout, self.on_wait)
        try:
            _pause("locked")
            _remove_stale_copies(self.db)
            self.created = not self.db.exists()
            if not self.created:
                if self.db.with_name(self.db.name + ".wal").exists():
                    raise LoadError(
                        f"{self.db} has an unfinished write-ahead log ({self.db.name}.wal): it was "
                        "written in place by another program; open it once with duckdb and CHECKPOINT"
                    )
                # copyfile uses the kernel's copy path (sendfile); measured ~0.2 s for a 35 MB file.
                try:
                    shutil.copyfile(self.db, self.tmp)
                except OSError as e:
                    raise LoadError(f"cannot copy {self.db} to write it: {e.strerror or e}") from None
            if not self.created:
                self.migrated = self._migrate_copy()
            try:
                self.con.execute(f"ATTACH ? AS {NEW}", [str(self.tmp)])
            except duckdb.Error as e:
                raise LoadError(f"cannot open {self.db}: {e}") from None
            self._attached = True
            if self.created:
                create_schema(self.con, NEW, self.migrations_dir)
        except BaseException as e:
            self._discard()
            if is_file_error(e):
                raise LoadError(f"cannot open {self.db} to write it: {one_line(e)}") from None
            raise
        return self

    def _migrate_copy(self) -> list[int]:
        # On a connection of its own: the caller's TEMP tables (a check run's `findings`) would shadow the tables
        # of the same name that a migration's unqualified statements alter.
        con = connect_memory()
        try:
            try:
                con.execute(f"ATTACH ? AS {NEW}", [str(self.tmp)])
            except duckdb.Error as e:
                raise LoadError(f"cannot open {self.db}: {e}") from None
            if schema_version(con, NEW) == 0 and _has_tables(con, NEW):
                raise LoadError(f"{self.db} is a DuckDB file but not a milepost database (no schema version)")
            applied = migrate(con, NEW, self.migrations_dir)
            con.execute(f"CHECKPOINT {NEW}")
            return applied
        finally:
            con.close()

    def begin(self) -> None:
        """Start the one transaction of this write."""
        self.con.execute("BEGIN TRANSACTION")
        self._in_tx = True

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: object) -> None:
        if exc_type is not None:
            self._discard()
            if exc is not None and is_file_error(exc):
                # The disk filled up or went away under the copy: a database that cannot be written, not a bug.
                raise LoadError(f"could not write {self.db}, nothing was changed: {one_line(exc)}") from exc
            return
        try:
            if self._in_tx:
                _pause("in-transaction")
                self.con.execute("COMMIT")
                self._in_tx = False
            self.con.execute(f"CHECKPOINT {NEW}")
            self.con.execute(f"DETACH {NEW}")
            self._attached = False
            wal = self.tmp.with_name(self.tmp.name + ".wal")
            if wal.exists():
                raise LoadError(f"DuckDB left a write-ahead log next to {self.tmp}; the copy was not swapped in")
            _fsync_file(self.tmp)
            _pause("before-replace")
            os.replace(self.tmp, self.db)
            _fsync_dir(self.db.parent)
            _pause("after-replace")
        except BaseException as e:
            self._discard()
            if is_file_error(e):
                raise LoadError(f"could not write {self.db}, nothing was changed: {one_line(e)}") from e
            raise
        finally:
            if self.lock is not None:
                self.lock.release()

    def _discard(self) -> None:
        if self._in_tx:
            with contextlib.suppress(duckdb.Error):
                self.con.execute("ROLLBACK")
            self._in_tx = False
        if self._attached:
            with contextlib.suppress(duckdb.Error):
                self.con.execute("USE memory")
                self.con.execute(f"DETACH {NEW}")
            self._attached = False
        for p in (self.tmp, self.tmp.with_name(self.tmp.name + ".wal")):
            with contextlib.suppress(OSError):
                p.unlink()
        if self.lock is not None:
            self.lock.release()


def ensure_database(db: Path, *, timeout: float | None = None) -> list[int]:
    """Create `db` if it is missing, or migrate it if its schema is older; returns the migrations applied."""
    db = Path(db)
    if db.exists():
        with open_reader(db) as reader:
            if reader.version >= latest_version():
                return []
    con = connect_memory()
    try:
        with Writer(db, con, timeout=timeout) as w:
            return w.migrated
    finally:
        con.close()


# ---------------------------------------------------------------- readers


def _signature(path: Path) -> tuple[int, int] | None:
    try:
        st = os.stat(path)
    except FileNotFoundError:
        return None
    return (st.st_ino, st.st_mtime_ns)


class Reader:
    """The read-only view of the database file that every reader uses: the CLI's read commands (through
    `reading`), ingest's look for an earlier identical submission, and the dashboard (`dashboard/connection.py`).

    `con` is an in-memory DuckDB connection with the file attached read-only as catalog `db` and selected
    (`USE db`), so queries use plain table names. Attaching (rather than `duckdb.connect(path)`) gives each
    reader its own instance: DuckDB's per-path instance cache would otherwise hand back the old file, and old
    and new versions can be open side by side (queries in flight finish on the old one).

    Opening checks the schema version (unless `check_version=False`): a file that is not a Milepost database, or
    one newer than this program, raises LoadError instead of failing later on a missing table. A database of an
    older schema is read as it is (only writers migrate): `stored_columns` and `view_or_definition` let queries
    read it in the current shape. `refresh()` reopens the file after a writer swapped in a new version.
    """

    def __init__(self, path: str | Path, *, check_version: bool = True, migrations_dir: Path = MIGRATIONS_DIR) -> None:
        self.path = Path(path)
        self.check_version = check_version
        self.migrations_dir = migrations_dir
        self.con: duckdb.DuckDBPyConnection
        self.signature: tuple[int, int] | None = None
        self.version = 0  # the schema version of the file as opened (0: not a milepost database)
        self._open()

    def _open(self) -> None:
        sig = _signature(self.path)
        if sig is None:
            raise LoadError(f"no database at {self.path} (create one with `milepost ingest`)")
        con = connect_memory()
        try:
            con.execute("ATTACH ? AS db (READ_ONLY)", [str(self.path)])
            con.execute("USE db")
            version = schema_version(con, "db")
            if self.check_version:
                self._check_version(version)
        except duckdb.Error as e:
            con.close()
            raise LoadError(f"cannot open {self.path} read-only: {one_line(e)}") from None
        except LoadError:
            con.close()
            raise
        self.con = con
        self.signature = sig
        self.version = version

    def _check_version(self, version: int) -> None:
        latest = latest_version(self.migrations_dir)
        if version == 0:
            raise LoadError(f"{self.path} is a DuckDB file but not a milepost database (it has no schema version)")
        if version > latest:
            raise LoadError(
                f"{self.path} has schema version {version}, newer than this milepost knows ({latest}); upgrade milepost"
            )

    def changed(self) -> bool:
        """True when the file on disk is no longer the one this reader has open."""
        return _signature(self.path) != self.signature

    def refresh(self) -> bool:
        """Reopen if the file changed; returns whether it did (the old connection is closed)."""
        if not self.changed() or _signature(self.path) is None:
            return False
        old = self.con
        self._open()
        old.close()
        return True

    def cursor(self) -> duckdb.DuckDBPyConnection:
        """A cursor for one thread or query (DuckDB connections are not thread-safe in 2.0)."""
        cur = self.con.cursor()
        cur.execute("USE db")  # a cursor starts in the default catalog, not the one the connection switched to
        return cur

    def close(self) -> None:
        with contextlib.suppress(duckdb.Error):
            self.con.close()

    def __enter__(self) -> Reader:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def open_reader(path: str | Path, *, migrations_dir: Path = MIGRATIONS_DIR) -> Reader:
    """Open the database read-only; `reader.refresh()` reopens it after an ingest and says whether it did."""
    return Reader(path, migrations_dir=migrations_dir)


@contextlib.contextmanager
def reading(db: str | Path) -> Iterator[duckdb.DuckDBPyConnection]:
    """A read-only connection for the length of a `with` block (the commands that only read use this).

    DuckDB errors about the file raised inside the block (I/O, damaged blocks) become LoadError.
    """
    reader = open_reader(db)
    try:
        yield reader.con
    except duckdb.Error as e:
        if not is_file_error(e):
            raise
        raise LoadError(f"cannot read {db}: {one_line(e)}") from None
    finally:
        reader.close()


def stored_columns(con: duckdb.DuckDBPyConnection, relation: str) -> frozenset[str]:
    """The columns of a table or view of the current database (one of an older schema lacks the newer ones)."""
    rows = con.execute(
        "SELECT column_name FROM duckdb_columns() WHERE database_name = current_database() AND table_name = ?",
        [relation],
    ).fetchall()
    return frozenset(r[0] for r in rows)


def select_columns(con: duckdb.DuckDBPyConnection, relation: str, columns: Sequence[str], prefix: str = "") -> str:
    """A select list of `columns` of `relation`, with an empty (NULL) column for each one that a database of an
    older schema does not have yet (readers do not migrate); `prefix` is a table alias such as "i."."""
    present = stored_columns(con, relation)
    return ", ".join(f"{prefix}{c}" if c in present else f"NULL::VARCHAR AS {c}" for c in columns)


def view_or_definition(con: duckdb.DuckDBPyConnection, name: str) -> str:
    """`name` when the database has that view, else its definition in the current schema (database.sql) as a
    subquery, for a database of an older schema: both read the same rule, written once."""
    found = con.execute(
        "SELECT count(*) FROM duckdb_views() WHERE database_name = current_database() AND view_name = ?", [name]
    ).fetchall()
    if found[0][0]:
        return name
    m = re.search(rf"^CREATE VIEW {re.escape(name)} AS\n(.*?);\s*$", schema_sql(), flags=re.S | re.M)
    if m is None:
        raise LoadError(f"database.sql defines no view {name}")
    return f"({m.group(1)})"


def warn(message: str) -> None:
    """One line on stderr."""
    print(message, file=sys.stderr, flush=True)
