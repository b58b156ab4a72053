"""The dashboard's cache of indicator slices is keyed by the database's signature: a replaced file (new ingest)
is never answered from the old version's slice, and an open reader of the old version keeps its own."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import duckdb
import pandas as pd
import pytest

from milepost.dashboard import connection, queries
from milepost.example_db.generate import CONTRACT_DIR, write_many_scenarios
from milepost.validate.store.database import Reader
from milepost.validate.store.ingest import ingest


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> list[tuple[Path, Path]]:
    paths = write_many_scenarios(tmp_path_factory.mktemp("cache") / "files", n_scenarios=8, fmt="csv")
    return list(zip(paths[::2], paths[1::2], strict=True))


def _models(reader: Reader, sel: queries.Selection) -> set[str]:
    cur = reader.cursor()
    try:
        return set(queries.screen_table(cur, sel, 2020, None)["model"])
    finally:
        cur.close()


def test_a_new_version_of_the_file_is_read_afresh(tmp_path: Path, files) -> None:
    db = tmp_path / "db.duckdb"
    queries.clear_cache()
    sel = queries.Selection(include_references=True)
    assert ingest(list(files[0]), db, CONTRACT_DIR).status == "accepted"
    old = Reader(db)
    first = _models(old, sel)
    assert len(first) == 1
    assert _models(old, sel) == first  # the second time from the cache
    cur = old.cursor()
    before = queries.signature(cur)
    cur.close()

    assert ingest(list(files[1]), db, CONTRACT_DIR).status == "accepted"
    new = Reader(db)
    cur = new.cursor()
    assert queries.signature(cur) != before
    cur.close()
    assert len(_models(new, sel)) == 2
    assert _models(old, sel) == first  # the old reader still reads its own version
    old.close()
    new.close()


def test_cached_and_fresh_answers_are_the_same(tmp_path: Path, files) -> None:
    db = tmp_path / "db.duckdb"
    for pair in files[:2]:
        assert ingest(list(pair), db, CONTRACT_DIR).status == "accepted"
    sel = queries.Selection(year=2050)
    with Reader(db) as reader:
        queries.clear_cache()
        cold = [reader.cursor() for _ in range(2)]
        fresh = queries.screen_table(cold[0], sel, 2020, 2060), queries.rates(cold[0], sel, 2030, 2050)
        cached = queries.screen_table(cold[1], sel, 2020, 2060), queries.rates(cold[1], sel, 2030, 2050)
        for a, b in zip(fresh, cached, strict=True):
            assert len(a) > 0
            assert a.equals(b)
        for c in cold:
            c.close()


def _replacement(db: Path, folder: Path) -> Path:
    """A copy of `db` whose stored milestone values are doubled and nothing else changes: the same settings,
    submissions and row count, so only the file (inode, mtime) tells the two apart."""
    twin = folder / "twin.duckdb"
    shutil.copy(db, twin)
    con = duckdb.connect(str(twin))
    try:
        con.execute("UPDATE indicators SET value = value * 2 WHERE kind = 'value'")
    finally:
        con.close()
    return twin


def _values(cur: duckdb.DuckDBPyConnection, sel: queries.Selection) -> pd.Series:
    try:
        return queries.screen_table(cur, sel, 2020, None).set_index(["model", "scenario"])["value"].sort_index()
    finally:
        cur.close()


@pytest.mark.parametrize("opened", ["reader", "dashboard connection"])
def test_a_reader_of_the_replaced_file_never_labels_its_slice_as_the_new_file(
    tmp_path: Path, files, opened: str
) -> None:
    # The file is replaced between opening a connection and its first query; a key read from the path at query
    # time would then be the new file's, and hand the old file's rows to the next connection on the new file.
    db = tmp_path / "db.duckdb"
    assert ingest(list(files[0]), db, CONTRACT_DIR).status == "accepted"
    twin = _replacement(db, tmp_path)
    queries.clear_cache()
    sel = queries.Selection(include_references=True)

    def cursor() -> duckdb.DuckDBPyConnection:
        if opened == "reader":
            readers.append(Reader(db))
            return readers[-1].cursor()
        return connection.cursor(db)

    readers: list[Reader] = []
    old = cursor()
    os.replace(twin, db)  # what ingest does: a new file renamed over the old one
    before = _values(old, sel)
    after = _values(cursor(), sel)
    assert len(before) > 0
    pd.testing.assert_series_equal(after, before * 2)
    if opened == "dashboard connection":  # keyed on the file key the connection layer opened the file with
        cur = connection.cursor(db)
        assert queries.signature(cur)[0] == repr(connection.file_key(db))  # type: ignore[index]
        cur.close()
    for r in readers:
        r.close()
