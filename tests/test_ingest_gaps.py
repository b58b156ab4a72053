"""Gaps stored at ingest, per basis, and brought to a database of schema 5 by the migration and the recompute."""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest

from milepost.example_db import generate as demo
from milepost.validate.store import database as dbm
from milepost.validate.store.ingest import ingest


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, list[Path]]:
    """Two small Ferrow submissions: one complete, one whose regions report no population."""
    folder = tmp_path_factory.mktemp("gaps")
    data, scen = demo.ensemble_frame(), demo.scenario_frame()
    out = {}
    for stem, names, drop_pop in (("full", ("drift", "act-firm"), False), ("nopop", ("act-deep",), True)):
        d = data[(data["model"] == "Ferrow") & data["scenario"].isin(names)]
        if drop_pop:
            d = d[~((d["variable"] == "population") & (d["region"] != "World"))]
        s = scen[(scen["model"] == "Ferrow") & scen["scenario"].isin(names)]
        paths = [folder / f"{stem}.csv", folder / f"{stem}-scenarios.csv"]
        d.to_csv(paths[0], index=False, lineterminator="\n")
        s.to_csv(paths[1], index=False, lineterminator="\n")
        out[stem] = paths
    return out


def _gaps(db: Path) -> list[tuple]:
    con = duckdb.connect(str(db), read_only=True)
    try:
        return con.execute(
            "SELECT scenario, region, kind, variable, basis, note FROM indicator_gaps ORDER BY ALL"
        ).fetchall()
    finally:
        con.close()


def test_gaps_are_stored_per_basis_and_survive_the_migration(files, tmp_path: Path) -> None:
    db = tmp_path / "m.duckdb"
    ingest(files["full"], db, demo.CONTRACT_DIR)
    assert _gaps(db) == []
    # take the database back to schema 5: no gaps table, no driver or burden indicators
    con = duckdb.connect(str(db))
    con.execute("DROP VIEW current_indicator_gaps_by_basis")
    con.execute("DROP VIEW current_indicator_gaps")
    con.execute("DROP TABLE indicator_gaps")
    con.execute("DELETE FROM indicators WHERE kind LIKE 'lmdi%' OR kind IN ('allowance', 'transfer')")
    con.execute("UPDATE meta SET value = '5' WHERE key = 'schema_version'")
    con.close()
    ingest(files["nopop"], db, demo.CONTRACT_DIR, harmonise=True)
    with dbm.open_reader(db) as r:
        assert dbm.schema_version(r.con, "db") == dbm.latest_version() >= 6
        kinds = dict(
            r.con.execute(
                "SELECT scenario, list(DISTINCT kind ORDER BY kind) FROM current_indicators"
                " WHERE kind IN ('lmdi_population', 'allowance') GROUP BY scenario"
            ).fetchall()
        )
    # the migration marked the stored indicators outdated: the older submission's new kinds were computed
    assert kinds["act-firm"] == ["allowance", "lmdi_population"]
    gaps = _gaps(db)
    raw = [g for g in gaps if g[4] == "raw"]
    # without regional population: no Kaya decomposition in the regions, no per-capita rules; grandfathering stays
    assert {g[0] for g in raw} == {"act-deep"}
    assert {(g[2], g[3]) for g in raw if g[2] == "allowance"} == {
        ("allowance", "per_capita"),
        ("allowance", "convergence"),
    }
    assert {g[1] for g in raw if g[2] == "lmdi_population"} == set(demo.REGIONS)
    assert all("no population is reported" in g[5] for g in raw)
    assert kinds["act-deep"] == ["allowance", "lmdi_population"]  # World still reports its population
    assert any(g[4] == "harmonised" for g in gaps)  # harmonised rows have gaps of their own
