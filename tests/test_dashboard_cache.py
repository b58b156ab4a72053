"""The dashboard's cache of indicator slices is keyed by the database's signature: a replaced file (new ingest)
is never answered from the old version's slice, and an open reader of the old version keeps its own."""

from __future__ import annotations

from pathlib import Path

import pytest

from milepost.dashboard import queries
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
