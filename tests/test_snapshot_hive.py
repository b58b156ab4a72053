"""The partitioned Parquet snapshot is what a distributed engine reads: pyarrow's dataset API (the Hive layout
that Spark and Trino read: one folder `model=<name>` per partition) must see the rows and sums of the database."""

from __future__ import annotations

from pathlib import Path

import duckdb
import pyarrow.compute as pc
import pyarrow.dataset as pads
import pytest

from milepost.example_db.generate import CONTRACT_DIR, write_many_scenarios
from milepost.validate.store.exports import snapshot
from milepost.validate.store.ingest import ingest

VIEWS = {"data": "current_data", "indicators": "current_indicators", "scenarios": "current_scenarios"}


@pytest.fixture(scope="module")
def snap(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    """Four models of the generator's consistent ensemble, each ingested on its own, and their snapshot."""
    folder = tmp_path_factory.mktemp("hive")
    paths = write_many_scenarios(folder / "files", n_scenarios=8, fmt="csv")
    db = folder / "db.duckdb"
    for data, scenarios in zip(paths[::2], paths[1::2], strict=True):
        assert ingest([data, scenarios], db, CONTRACT_DIR).status == "accepted"
    out = folder / "snap"
    snapshot(db, out)
    return db, out


def _hive(out: Path, table: str) -> pads.Dataset:
    # Partition values are strings in the folder names; reading them as such is what Spark and Trino do too.
    return pads.dataset(out / table, format="parquet", partitioning="hive")


@pytest.mark.parametrize("table", sorted(VIEWS))
def test_each_table_reads_back_with_the_row_count_of_the_database(snap, table: str) -> None:
    db, out = snap
    with duckdb.connect(str(db), read_only=True) as con:
        want = dict(con.execute(f"SELECT model, count(*) FROM {VIEWS[table]} GROUP BY 1").fetchall())
    ds = _hive(out, table)
    assert "model" in ds.schema.names
    counts = ds.to_table(columns=["model"]).group_by("model").aggregate([("model", "count")]).to_pylist()
    assert {r["model"]: r["model_count"] for r in counts} == want
    assert ds.count_rows() == sum(want.values()) > 0


@pytest.mark.parametrize("table", ["data", "indicators"])
def test_sums_by_model_and_a_partition_filter_match_the_database(snap, table: str) -> None:
    db, out = snap
    with duckdb.connect(str(db), read_only=True) as con:
        want = dict(con.execute(f"SELECT model, sum(value) FROM {VIEWS[table]} GROUP BY 1").fetchall())
        n_one = con.execute(f"SELECT count(*) FROM {VIEWS[table]} WHERE model = 'Halvik'").fetchall()[0][0]
    ds = _hive(out, table)
    got = ds.to_table(columns=["model", "value"]).group_by("model").aggregate([("value", "sum")]).to_pylist()
    assert {r["model"]: r["value_sum"] for r in got} == pytest.approx(want, rel=1e-12)
    # a filter on the partition column reads only that model's folder, as a distributed engine prunes partitions
    only = pc.field("model") == "Halvik"
    fragments = [f.path for f in ds.get_fragments(filter=only)]
    assert fragments and all("/model=Halvik/" in f for f in fragments) and len(fragments) < len(ds.files)
    assert ds.count_rows(filter=only) == n_one > 0
