"""Harmonised values in the database: `ingest --harmonise`, the `basis` column and its migration, and every
reader that existed before still giving the raw numbers by default."""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest
from typer.testing import CliRunner

from milepost.example_db.generate import CONTRACT_DIR
from milepost.schema.contract import load
from milepost.validate.cli import app
from milepost.validate.store import database as dbm
from milepost.validate.store.exports import Filters, diff, export, snapshot
from milepost.validate.store.ingest import ingest

runner = CliRunner()
KEY = "model, scenario, region, variable, year"


SCENARIOS = ("drift", "act-firm", "wait-firm")  # a reference, an immediate and a delayed scenario


@pytest.fixture(scope="module")
def plain_and_harmonised(tmp_path_factory):
    """Three scenarios of Ferrow ingested once without and once with --harmonise, into two new databases."""
    from milepost.example_db import generate

    folder = tmp_path_factory.mktemp("basis")
    data, scen = generate.ensemble_frame(), generate.scenario_frame()
    files = [folder / "ferrow.csv", folder / "ferrow-scenarios.csv"]
    data[(data["model"] == "Ferrow") & data["scenario"].isin(SCENARIOS)].to_csv(files[0], index=False)
    scen[(scen["model"] == "Ferrow") & scen["scenario"].isin(SCENARIOS)].to_csv(files[1], index=False)
    plain, both = folder / "plain.duckdb", folder / "both.duckdb"
    assert ingest(files, plain, CONTRACT_DIR).status == "accepted"
    result = ingest(files, both, CONTRACT_DIR, harmonise=True)
    assert result.status == "accepted" and result.harmonised
    return plain, both, result, files


def rows(db: Path, sql: str) -> list[tuple]:
    con = duckdb.connect(str(db), read_only=True)
    try:
        return con.execute(sql).fetchall()
    finally:
        con.close()


def test_harmonised_rows_are_stored_beside_the_raw_ones(plain_and_harmonised):
    plain, both, result, _ = plain_and_harmonised
    counts = dict(rows(both, "SELECT basis, count(*) FROM data GROUP BY 1"))
    assert counts == {"raw": result.rows, "harmonised": result.harmonised_rows}
    assert rows(plain, "SELECT DISTINCT basis FROM data") == [("raw",)]
    # every series of the submission has a row in the method table
    series = rows(both, "SELECT count(*) FROM (SELECT DISTINCT model, scenario, region, variable FROM data)")[0][0]
    assert rows(both, "SELECT count(*) FROM harmonisation")[0][0] == series
    # four gases harmonised in five regions and summed for World, and their GHG total, in each scenario
    assert result.harmonised_series == (4 * 6 + 6) * len(SCENARIOS)
    # the harmonised base year is the reference value; the raw one is the model's
    ref = {(r.region, r.variable): r.value for r in load(CONTRACT_DIR).reference}
    got = dict(
        rows(
            both,
            "SELECT basis, value FROM current_indicators_by_basis WHERE kind = 'value' AND variable = 'emissions.co2' "
            "AND region = 'World' AND scenario = 'drift' AND year_from = 2020",
        )
    )
    assert got["harmonised"] == pytest.approx(ref[("World", "emissions.co2")])
    assert abs(got["raw"] - got["harmonised"]) > 1
    methods = dict(
        rows(
            both,
            "SELECT variable, method FROM current_harmonisation WHERE scenario = 'drift' AND region = 'Ardena' "
            "AND variable IN ('emissions.co2', 'emissions.ghg', 'emissions.co2.land', 'population')",
        )
    )
    assert methods == {
        "emissions.co2": "converging-ratio",
        "emissions.ghg": "from-parts",
        "emissions.co2.land": "left-out",
        "population": "unchanged",
    }


def test_existing_readers_give_the_raw_numbers(plain_and_harmonised, tmp_path):
    plain, both, _, _ = plain_and_harmonised
    for view in ("current_data", "current_indicators"):
        sql = f"SELECT * EXCLUDE (submission_id) FROM {view} ORDER BY ALL"
        assert rows(both, sql) == rows(plain, sql)
    for what in ("data", "indicators"):
        a, b = tmp_path / f"{what}-plain.csv", tmp_path / f"{what}-both.csv"
        assert export(plain, what, "csv", a) == export(both, what, "csv", b)
        assert a.read_text() == b.read_text()
    harmonised = tmp_path / "harmonised.csv"
    n = export(both, "data", "csv", harmonised, Filters(basis="harmonised"))
    assert n == rows(both, "SELECT count(*) FROM data WHERE basis = 'harmonised'")[0][0]
    manifest = snapshot(both, tmp_path / "snap")
    assert manifest["tables"]["data"]["rows"] == rows(plain, "SELECT count(*) FROM data")[0][0]


def test_diff_compares_the_raw_values(plain_and_harmonised, tmp_path):
    _, _, _, files = plain_and_harmonised
    db = tmp_path / "d.duckdb"
    ingest(files, db, CONTRACT_DIR)
    again = ingest(files, db, CONTRACT_DIR, harmonise=True)  # the same files, now harmonised: a new version
    assert again.status == "accepted" and again.submission_id == 2
    d = diff(db, 1, 2, 0.0, 0.0)
    assert d.identical and d.counts["same"] == again.rows
    assert ingest(files, db, CONTRACT_DIR, harmonise=True).status == "unchanged"
    assert ingest(files, db, CONTRACT_DIR).status == "unchanged"


def test_ingest_command_reports_the_harmonisation(plain_and_harmonised, tmp_path):
    _, _, _, files = plain_and_harmonised
    db = tmp_path / "cli.duckdb"
    res = runner.invoke(app, ["ingest", *map(str, files), "--db", str(db), "-c", str(CONTRACT_DIR), "--harmonise"])
    assert res.exit_code == 0, res.stdout
    n = rows(db, "SELECT count(*) FROM data WHERE basis = 'harmonised'")[0][0]
    adjusted, notes = 30 * len(SCENARIOS), 6 * len(SCENARIOS)  # one note per harmonised CO2 total (its sectors)
    want = f"Harmonised: {n:,} rows stored beside the raw ones, {adjusted} series adjusted (0 warnings, {notes} notes;"
    assert want in res.stdout
    res = runner.invoke(app, ["export", "--db", str(db), "--what", "data", "-f", "csv", "-o", str(tmp_path / "x.csv"),
                              "--basis", "harmonised"])  # fmt: skip
    assert res.exit_code == 0 and f"Wrote {n:,} rows" in res.stderr


def test_a_database_of_schema_1_migrates_and_its_rows_become_raw(tmp_path):
    old = tmp_path / "migrations"
    old.mkdir()
    first = dbm.migrations()[0][1]
    (old / first.name).write_text(first.read_text())
    db = tmp_path / "old.duckdb"
    con = dbm.connect_memory()
    con.execute("ATTACH ? AS x", [str(db)])
    assert dbm.migrate(con, "x", old) == [1]  # a database as the first release wrote it
    con.execute("INSERT INTO x.data VALUES (1, 'M', 'S', 'World', 'population', 'million', 2020, 7800.0)")
    con.execute(
        "INSERT INTO x.indicators VALUES (1, 'M', 'S', 'World', 'value', 'population', 2020, 2020, 7800.0, 'million')"
    )
    con.execute("INSERT INTO x.scenarios VALUES (1, 'M', 'S', NULL, '{}')")
    con.execute("INSERT INTO x.submissions (id, model, status) VALUES (1, 'M', 'accepted')")
    con.close()
    assert dbm.ensure_database(db) == list(range(2, dbm.latest_version() + 1))
    assert rows(db, "SELECT basis, value FROM data") == [("raw", 7800.0)]
    assert rows(db, "SELECT basis FROM indicators") == [("raw",)]
    assert rows(db, "SELECT value FROM current_data") == [(7800.0,)]
    assert rows(db, "SELECT basis FROM current_data_by_basis") == [("raw",)]


def test_the_demo_database_holds_both_bases(demo_db):
    got = dict(rows(demo_db, "SELECT basis, count(DISTINCT submission_id) FROM current_data_by_basis GROUP BY 1"))
    assert got == {"raw": 5, "harmonised": 5}
    (n,) = rows(demo_db, "SELECT count(*) FROM current_harmonisation WHERE method = 'converging-ratio'")[0]
    assert n == 5 * 40 * 4  # five regions, 40 current scenarios, four gases (CO2, CH4, N2O, F-gases)


def test_harmonised_losses_follow_the_reference_of_their_own_basis(tmp_path):
    """A harmonised policy scenario's losses are measured against the harmonised reference; a reference revised
    without --harmonise leaves them without one (null), never computed against the replaced version."""
    from milepost.example_db import generate

    data, scen = generate.ensemble_frame(), generate.scenario_frame()

    def part(names: tuple[str, ...], stem: str) -> list[Path]:
        d = data[(data["model"] == "Ormund") & data["scenario"].isin(names)]
        s = scen[(scen["model"] == "Ormund") & scen["scenario"].isin(names)]
        paths = [tmp_path / f"{stem}.csv", tmp_path / f"{stem}-scenarios.csv"]
        d.to_csv(paths[0], index=False)
        s.to_csv(paths[1], index=False)
        return paths

    db = tmp_path / "loss.duckdb"
    sql = (
        "SELECT basis, count(value) FROM current_indicators_by_basis WHERE kind = 'loss_pct' "
        "AND scenario = 'act-firm' GROUP BY 1 ORDER BY 1"
    )
    assert ingest(part(("drift",), "ref"), db, CONTRACT_DIR, harmonise=True).status == "accepted"
    assert ingest(part(("act-firm",), "pol"), db, CONTRACT_DIR, harmonise=True).status == "accepted"
    both = dict(rows(db, sql))
    assert both["raw"] == both["harmonised"] > 0
    revised = data.copy()
    revised.loc[(revised["variable"] == "consumption") & (revised["model"] == "Ormund"), "value"] *= 1.1
    data = revised
    result = ingest(part(("drift",), "ref2"), db, CONTRACT_DIR)  # the revised reference, raw only
    assert result.refreshed == [{"model": "Ormund", "scenario": "act-firm", "submission_id": 2}]
    after = dict(rows(db, sql))
    assert after["raw"] == both["raw"] and after.get("harmonised", 0) == 0


def test_a_recompute_of_outdated_indicators_keeps_both_bases(plain_and_harmonised, tmp_path):
    """When a migration marks the stored indicators outdated, the next ingest recomputes those of each basis from
    that basis' rows (store/recompute.py)."""
    from milepost.validate.store.recompute import OUTDATED_KEY

    _, both, _, files = plain_and_harmonised
    db = tmp_path / "outdated.duckdb"
    db.write_bytes(both.read_bytes())
    order = "ORDER BY basis, submission_id, model, scenario, region, kind, variable, year_from, year_to"
    before = rows(db, f"SELECT * FROM indicators {order}")
    con = duckdb.connect(str(db))
    con.execute("UPDATE indicators SET value = value + 1")
    con.execute("INSERT INTO meta VALUES (?, 'computed under the conventions of an older milepost')", [OUTDATED_KEY])
    con.close()
    again = ingest(files, db, CONTRACT_DIR, harmonise=True)
    assert again.status == "unchanged" and again.recomputed == len(before)
    after = rows(db, f"SELECT * FROM indicators {order}")
    assert len(after) == len(before)
    for a, b in zip(after, before, strict=True):
        assert a[:8] == b[:8] and a[9:] == b[9:]
        assert a[8] == b[8] if b[8] is None else a[8] == pytest.approx(b[8], rel=1e-12)
