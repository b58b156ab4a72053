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
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import duckdb

import milepost.schema
from milepost.validate.errors import LoadError, LockTimeout

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


def quote(name: str) -> str:
    """A DuckDB identifier in double quotes (names can never be query parameters)."""
    return '"' + name.replace('"', '""') + '"'


def connect_memory() -> duckdb.DuckDBPyConnection:
    """A new in-memory connection that never tries to download extensions."""
    return duckdb.connect(":memory:", config=dict(_NO_AUTOLOAD))


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
    prefix = f"{quote(catalog)}." if catalog else ""
    try:
        rows = con.execute(f"SELECT value FROM {prefix}meta WHERE key = 'schema_version'").fetchall()
    except duckdb.CatalogException:
        return 0
    return int(rows[0][0]) if rows else 0


def _run_script(con: duckdb.DuckDBPyConnection, catalog: str, sql: str) -> None:
    # Scripts use unqualified names; USE makes them land in the attached copy.
    con.execute(f"USE {quote(catalog)}")
    try:
        con.execute(sql)
    finally:
        con.execute("USE memory")


def _set_meta(con: duckdb.DuckDBPyConnection, catalog: str, key: str, value: str) -> None:
    c = quote(catalog)
    con.execute(f"DELETE FROM {c}.meta WHERE key = ?", [key])
    con.execute(f"INSERT INTO {c}.meta VALUES (?, ?)", [key, value])


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
                shutil.copyfile(self.db, self.tmp)
            try:
                self.con.execute(f"ATTACH ? AS {NEW}", [str(self.tmp)])
            except duckdb.Error as e:
                raise LoadError(f"cannot open {self.db}: {e}") from None
            self._attached = True
            if self.created:
                create_schema(self.con, NEW, self.migrations_dir)
            else:
                self.migrated = migrate(self.con, NEW, self.migrations_dir)
        except BaseException:
            self._discard()
            raise
        return self

    def begin(self) -> None:
        """Start the one transaction of this write."""
        self.con.execute("BEGIN TRANSACTION")
        self._in_tx = True

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: object) -> None:
        if exc_type is not None:
            self._discard()
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
        except BaseException:
            self._discard()
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
            if schema_version(reader.con, "db") >= latest_version():
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
    """A read-only view of the database file that can tell when a writer has swapped in a new version.

    `con` is an in-memory DuckDB connection with the file attached read-only as catalog `db` and selected
    (`USE db`), so queries use plain table names. Attaching (rather than `duckdb.connect(path)`) gives each
    reader its own instance: DuckDB's per-path instance cache would otherwise hand back the old file.
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.con: duckdb.DuckDBPyConnection
        self.signature: tuple[int, int] | None = None
        self._open()

    def _open(self) -> None:
        sig = _signature(self.path)
        if sig is None:
            raise LoadError(f"no database at {self.path} (create one with `milepost ingest`)")
        con = connect_memory()
        try:
            con.execute("ATTACH ? AS db (READ_ONLY)", [str(self.path)])
            con.execute("USE db")
        except duckdb.Error as e:
            con.close()
            raise LoadError(f"cannot open {self.path} read-only: {_one_line(e)}") from None
        self.con = con
        self.signature = sig

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


def open_reader(path: str | Path) -> Reader:
    """Open the database read-only; `reader.refresh()` reopens it after an ingest and says whether it did."""
    return Reader(path)


def _one_line(e: BaseException) -> str:
    return " ".join(str(e).split())


@contextlib.contextmanager
def reading(db: str | Path) -> Iterator[duckdb.DuckDBPyConnection]:
    """A read-only connection for the length of a `with` block (the commands that only read use this)."""
    reader = open_reader(db)
    try:
        version = schema_version(reader.con, "db")
        latest = latest_version()
        if version > latest:
            raise LoadError(
                f"{db} has schema version {version}, newer than this milepost knows ({latest}); upgrade milepost"
            )
        yield reader.con
    finally:
        reader.close()


def warn(message: str) -> None:
    """One line on stderr."""
    print(message, file=sys.stderr, flush=True)
