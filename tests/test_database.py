"""The database layer on real DuckDB files: schema and migrations, the writer lock, copy-and-swap, readers."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import duckdb
import pytest

from milepost.validate.errors import LoadError, LockTimeout
from milepost.validate.findings import FINDING_COLUMNS, FINDING_TYPES
from milepost.validate.store import database as dbm
from milepost.validate.store import exports, ingest

TABLES = {"meta", "submissions", "findings", "data", "scenarios", "indicators", "harmonisation", "indicator_gaps"}
VIEWS = {
    "current_versions",
    "current_data",
    "current_scenarios",
    "current_indicators",
    "submission_versions",
    "current_data_by_basis",
    "current_indicators_by_basis",
    "current_harmonisation",
    "current_indicator_gaps",
    "current_indicator_gaps_by_basis",
}


def catalog(con: duckdb.DuckDBPyConnection, name: str) -> tuple[dict, dict]:
    cols: dict[str, list[tuple[str, str]]] = {}
    for table, column, dtype in con.execute(
        "SELECT table_name, column_name, data_type FROM duckdb_columns() WHERE database_name = ? "
        "ORDER BY table_name, column_index",
        [name],
    ).fetchall():
        cols.setdefault(table, []).append((column, dtype))
    views = dict(
        con.execute(
            "SELECT view_name, sql FROM duckdb_views() WHERE database_name = ? AND NOT internal", [name]
        ).fetchall()
    )
    return cols, views


def build(path: Path, migrations_dir: Path = dbm.MIGRATIONS_DIR) -> None:
    con = dbm.connect_memory()
    with dbm.Writer(path, con, migrations_dir=migrations_dir):
        pass
    con.close()


def test_new_database_has_the_agreed_tables_views_and_version(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    with dbm.open_reader(db) as r:
        cols, views = catalog(r.con, "db")
        assert set(cols) >= TABLES
        assert set(views) == VIEWS
        assert dbm.schema_version(r.con, "db") == dbm.latest_version() >= 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.duckdb", "m.duckdb.lock"]


def test_stored_columns_are_the_ones_the_code_writes_and_reads(tmp_path: Path) -> None:
    # The DDL against the code's own column lists (the Finding dataclass, ingest's and the exports' lists), so a
    # column added on one side only fails here rather than in a user's export.
    db = tmp_path / "m.duckdb"
    build(db)
    with dbm.open_reader(db) as r:
        cols, _ = catalog(r.con, "db")
    findings = cols["findings"]
    assert [c for c, _ in findings] == ["submission_id", *FINDING_COLUMNS]
    assert {c: t for c, t in findings if t != "VARCHAR"} == {"submission_id": "INTEGER", **FINDING_TYPES}
    # data and indicators carry a basis (raw or harmonised) last; the current views are raw only, without it
    assert tuple(c for c, _ in cols["data"]) == ("submission_id", *ingest.DATA_COLUMNS, "basis")
    assert tuple(c for c, _ in cols["current_data"]) == exports.DATA_COLUMNS == ("submission_id", *ingest.DATA_COLUMNS)
    assert tuple(c for c, _ in cols["current_data_by_basis"]) == (*exports.DATA_COLUMNS, "basis")
    assert (
        tuple(c for c, _ in cols["indicators"])
        == ("submission_id", *ingest.INDICATOR_COLUMNS, "basis")
        == (*exports.INDICATOR_COLUMNS, "basis")
        == (*(c for c, _ in cols["current_indicators"]), "basis")
        == tuple(c for c, _ in cols["current_indicators_by_basis"])
    )
    assert tuple(c for c, _ in cols["harmonisation"]) == ("submission_id", *ingest.HARMONISATION_COLUMNS)
    assert tuple(c for c, _ in cols["current_scenarios"]) == exports.SNAPSHOT_TABLES[2][2]
    assert [c for c, _ in cols["submission_versions"]] == ["submission_id", "model", "version"]


def test_database_sql_equals_the_migrations_applied_in_order(tmp_path: Path) -> None:
    con = dbm.connect_memory()
    con.execute("ATTACH ? AS fresh", [str(tmp_path / "a.duckdb")])
    con.execute("ATTACH ? AS stepped", [str(tmp_path / "b.duckdb")])
    dbm.create_schema(con, "fresh")
    assert dbm.migrate(con, "stepped") == list(range(1, dbm.latest_version() + 1))
    assert catalog(con, "fresh") == catalog(con, "stepped")
    assert dbm.schema_version(con, "stepped") == dbm.schema_version(con, "fresh")


def test_migration_runs_forward_and_keeps_rows(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    con = dbm.connect_memory()
    con.execute("ATTACH ? AS x", [str(db)])
    con.execute("INSERT INTO x.data VALUES (1, 'M', 'S', 'World', 'population', 'million', 2020, 7800.0, 'raw')")
    con.close()
    extra = tmp_path / "migrations"
    extra.mkdir()
    for _, path in dbm.migrations():
        (extra / path.name).write_text(path.read_text())
    n = dbm.latest_version() + 1
    (extra / f"{n:04d}_add_flag.sql").write_text("ALTER TABLE submissions ADD COLUMN flag VARCHAR;\n")
    con = dbm.connect_memory()
    with dbm.Writer(db, con, migrations_dir=extra) as w:
        assert w.migrated == [n]
    con.close()
    with dbm.open_reader(db, migrations_dir=extra) as r:
        assert dbm.schema_version(r.con, "db") == n
        assert "flag" in [c for c, _ in catalog(r.con, "db")[0]["submissions"]]
        assert r.con.execute("SELECT value FROM data").fetchall() == [(7800.0,)]


def test_a_database_newer_than_the_program_is_refused(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    con = dbm.connect_memory()
    con.execute("ATTACH ? AS x", [str(db)])
    con.execute("UPDATE x.meta SET value = '99' WHERE key = 'schema_version'")
    con.close()
    before = db.read_bytes()
    con = dbm.connect_memory()
    with pytest.raises(LoadError, match="schema version 99, newer than this milepost"), dbm.Writer(db, con):
        pass
    with pytest.raises(LoadError, match="newer than this milepost"), dbm.reading(db):
        pass
    assert db.read_bytes() == before
    assert not list(tmp_path.glob("*.tmp-*"))


def test_migration_numbers_must_not_have_gaps(tmp_path: Path) -> None:
    (tmp_path / "0001_a.sql").write_text("SELECT 1;")
    (tmp_path / "0003_c.sql").write_text("SELECT 1;")
    with pytest.raises(LoadError, match="expected 2"):
        dbm.migrations(tmp_path)


def test_failed_write_leaves_the_live_file_untouched(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    before = db.read_bytes()
    con = dbm.connect_memory()
    with pytest.raises(duckdb.Error), dbm.Writer(db, con) as w:
        w.begin()
        con.execute("INSERT INTO new.data VALUES (1, 'M', 'S', 'World', 'population', 'million', 2020, 1.0, 'raw')")
        con.execute("INSERT INTO new.no_such_table VALUES (1)")
    assert db.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.duckdb", "m.duckdb.lock"]
    # The lock was released: the next writer does not wait.
    with dbm.Writer(db, con, timeout=0):
        pass
    con.close()


def test_stale_copies_of_a_killed_writer_are_removed(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    (tmp_path / "m.duckdb.tmp-999999").write_bytes(b"half written")
    (tmp_path / "m.duckdb.tmp-999999.wal").write_bytes(b"x")
    build(db)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.duckdb", "m.duckdb.lock"]


def test_missing_folder_and_missing_file_give_clear_errors(tmp_path: Path) -> None:
    con = dbm.connect_memory()
    with (
        pytest.raises(LoadError, match="folder of the database does not exist"),
        dbm.Writer(tmp_path / "nope" / "m.duckdb", con),
    ):
        pass
    with pytest.raises(LoadError, match="no database at"):
        dbm.open_reader(tmp_path / "m.duckdb")


def test_default_db_path_order(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.delenv(dbm.ENV_DB, raising=False)
    assert dbm.default_db_path(None) == Path("milepost.duckdb")
    monkeypatch.setenv(dbm.ENV_DB, str(tmp_path / "env.duckdb"))
    assert dbm.default_db_path(None) == tmp_path / "env.duckdb"
    assert dbm.default_db_path(tmp_path / "given.duckdb") == tmp_path / "given.duckdb"


HOLD_LOCK = textwrap.dedent("""
    import sys, time
    from pathlib import Path
    from milepost.validate.store.database import acquire_lock
    lock = acquire_lock(Path(sys.argv[1]), timeout=5)
    print("locked", flush=True)
    time.sleep(float(sys.argv[2]))
""")


def test_second_writer_waits_then_times_out_with_a_message(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    holder = subprocess.Popen([sys.executable, "-c", HOLD_LOCK, str(db), "30"], stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "locked"
        messages: list[str] = []
        with pytest.raises(LockTimeout, match=rf"another milepost process \(pid {holder.pid}\) is writing"):
            dbm.acquire_lock(db, timeout=0.5, on_wait=messages.append)
        # it waited (the message comes only after a first try failed) and then gave up
        assert len(messages) == 1 and messages[0].startswith("Waiting up to 0.5 s")
    finally:
        holder.kill()
        holder.wait()
    # The lock dies with its process.
    dbm.acquire_lock(db, timeout=0).release()


def test_second_writer_gets_the_lock_when_the_first_finishes(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    holder = subprocess.Popen([sys.executable, "-c", HOLD_LOCK, str(db), "1.0"], stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "locked"
        messages: list[str] = []
        lock = dbm.acquire_lock(db, timeout=20, on_wait=messages.append)
        lock.release()
        assert len(messages) == 1  # it had to wait, and got the lock when the holder let go
    finally:
        holder.wait()


def test_reader_keeps_its_snapshot_and_refreshes_after_a_swap(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    reader = dbm.open_reader(db)
    assert reader.refresh() is False
    con = dbm.connect_memory()
    with dbm.Writer(db, con) as w:
        w.begin()
        con.execute("INSERT INTO new.data VALUES (1, 'M', 'S', 'World', 'population', 'million', 2020, 1.0, 'raw')")
    assert reader.changed()
    assert reader.con.execute("SELECT count(*) FROM data").fetchall() == [(0,)]  # the old file, whole
    assert reader.refresh() is True
    assert reader.con.execute("SELECT count(*) FROM data").fetchall() == [(1,)]
    assert reader.cursor().execute("SELECT count(*) FROM data").fetchall() == [(1,)]  # cursors see the file too
    assert not reader.changed()
    with pytest.raises(duckdb.Error, match="read-only"):
        reader.con.execute("DELETE FROM data")
    reader.close()
    con.close()


def test_read_only_connection_of_another_process_does_not_block_a_write(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    # A plain duckdb.connect(read_only=True), as a dashboard might hold it.
    code = (
        "import duckdb, sys, time; c = duckdb.connect(sys.argv[1], read_only=True); "
        "print(c.execute('SELECT count(*) FROM data').fetchall()[0][0], flush=True); time.sleep(30)"
    )
    holder = subprocess.Popen([sys.executable, "-c", code, str(db)], stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "0"
        con = dbm.connect_memory()
        with dbm.Writer(db, con, timeout=0) as w:  # timeout=0: any wait for the reader would fail the write
            w.begin()
            con.execute("INSERT INTO new.data VALUES (1, 'M', 'S', 'World', 'population', 'million', 2020, 1.0, 'raw')")
        con.close()
        with dbm.open_reader(db) as r:
            assert r.con.execute("SELECT count(*) FROM data").fetchall() == [(1,)]
    finally:
        holder.kill()
        holder.wait()


def test_lock_timeout_from_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv(dbm.ENV_LOCK_TIMEOUT, "2.5")
    assert dbm.lock_timeout_default() == 2.5
    monkeypatch.setenv(dbm.ENV_LOCK_TIMEOUT, "soon")
    with pytest.raises(LoadError, match="not a number"):
        dbm.lock_timeout_default()
    monkeypatch.delenv(dbm.ENV_LOCK_TIMEOUT)
    assert dbm.lock_timeout_default() == dbm.DEFAULT_LOCK_TIMEOUT


def test_no_wal_is_left_next_to_the_live_file(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    build(db)
    con = dbm.connect_memory()
    with dbm.Writer(db, con) as w:
        w.begin()
        con.execute(
            "INSERT INTO new.data SELECT 1, 'M', 'S', 'World', 'v', 'u', 2000 + i % 100, i, 'raw' "
            "FROM range(300000) t(i)"
        )
    con.close()
    assert not os.path.exists(str(db) + ".wal")
    with dbm.open_reader(db) as r:
        assert r.con.execute("SELECT count(*), sum(value) FROM data").fetchall() == [(300000, 299999 * 300000 / 2)]


def test_database_sql_header_names_the_latest_version() -> None:
    header = next(line for line in dbm.schema_sql().splitlines() if line.startswith("-- schema_version:"))
    assert int(header.split(":")[1]) == dbm.latest_version()


def test_ensure_database_creates_once_and_then_leaves_the_file_alone(tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    assert dbm.ensure_database(db) == []
    sig = (db.stat().st_ino, db.stat().st_mtime_ns)
    assert dbm.ensure_database(db) == []
    assert (db.stat().st_ino, db.stat().st_mtime_ns) == sig


def test_readers_read_an_older_database_as_it_is(tmp_path: Path) -> None:
    # A database written before the latest migration (only 0001 here), as an earlier milepost left it.
    first = tmp_path / "first"
    first.mkdir()
    (first / "0001_initial.sql").write_text((dbm.MIGRATIONS_DIR / "0001_initial.sql").read_text())
    db = tmp_path / "m.duckdb"
    con = dbm.connect_memory()
    con.execute("ATTACH ? AS x", [str(db)])
    assert dbm.migrate(con, "x", first) == [1]
    con.execute(
        "INSERT INTO x.submissions (id, model, status, rows, errors, warnings, notes) "
        "VALUES (1, 'M', 'accepted', 0, 0, 0, 0), (2, 'M', 'rejected', 0, 1, 0, 0), (3, 'M', 'accepted', 0, 0, 0, 0)"
    )
    con.close()
    before = db.read_bytes()
    # versions from the view's definition in database.sql, since the file predates the view
    assert [(s["id"], s["version"]) for s in exports.submissions(db)] == [(1, 1), (2, None), (3, 2)]
    out = tmp_path / "f.csv"
    assert exports.export(db, "findings", "csv", out) == 0
    assert out.read_text().splitlines()[0].split(",") == list(exports.STORED_FINDING_COLUMNS)
    with dbm.open_reader(db) as r:
        assert r.version == 1 and "column_name" not in dbm.stored_columns(r.con, "findings")
    assert db.read_bytes() == before  # readers never write


def test_a_duckdb_file_that_is_not_a_milepost_database_is_refused(tmp_path: Path) -> None:
    db = tmp_path / "other.duckdb"
    with duckdb.connect(str(db)) as con:
        con.execute("CREATE TABLE submissions (x INTEGER)")
    before = db.read_bytes()
    with pytest.raises(LoadError, match="not a milepost database"), dbm.reading(db):
        pass
    assert db.read_bytes() == before
