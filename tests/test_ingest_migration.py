"""A database written before the indicator conventions changed: migrated, and its indicators recomputed on ingest."""

from __future__ import annotations

import shutil
from pathlib import Path

import duckdb
import pandas as pd
import pytest

from milepost.example_db import generate as demo
from milepost.schema.contract import load
from milepost.validate.store import database as dbm
from milepost.validate.store.exports import export
from milepost.validate.store.ingest import ingest
from milepost.validate.store.recompute import OUTDATED_KEY

ORDER = ["submission_id", "model", "scenario", "region", "kind", "variable", "year_from", "year_to"]
# The schema-1 view, verbatim from schema/migrations/0001_initial.sql (before indicator rows had a note).
OLD_VIEW = """CREATE VIEW current_indicators AS
SELECT i.submission_id, i.model, i.scenario, i.region, i.kind, i.variable, i.year_from, i.year_to, i.value, i.unit
FROM indicators AS i
JOIN current_versions AS c ON c.submission_id = i.submission_id AND c.model = i.model AND c.scenario = i.scenario;"""
OLD_DATA_VIEW = """CREATE VIEW current_data AS
SELECT d.submission_id, d.model, d.scenario, d.region, d.variable, d.unit, d.year, d.value
FROM data AS d
JOIN current_versions AS c ON c.submission_id = d.submission_id AND c.model = d.model AND c.scenario = d.scenario;"""


@pytest.fixture(scope="module")
def contract():
    return load(demo.CONTRACT_DIR)


@pytest.fixture(scope="module")
def submissions(tmp_path_factory: pytest.TempPathFactory) -> list[list[Path]]:
    """Three submissions of the demo: Halvik (reference, immediate, delayed), Halvik's revision, Ferrow."""
    folder = tmp_path_factory.mktemp("files")
    data, scen = demo.ensemble_frame(), demo.scenario_frame()
    rev_data, rev_scen = demo.revision_frames()
    out = []
    for stem, model, names, d, s in (
        ("halvik", "Halvik", ("drift", "act-firm", "wait-firm"), data, scen),
        ("halvik-v2", "Halvik", demo.REVISED_SCENARIOS, rev_data, rev_scen),
        ("ferrow", "Ferrow", ("drift", "act-firm"), data, scen),
    ):
        pick_d = d[(d["model"] == model) & d["scenario"].isin(names)]
        pick_s = s[(s["model"] == model) & s["scenario"].isin(names)]
        paths = [folder / f"{stem}.csv", folder / f"{stem}-scenarios.csv"]
        pick_d.to_csv(paths[0], index=False, lineterminator="\n")
        pick_s.to_csv(paths[1], index=False, lineterminator="\n")
        out.append(paths)
    return out


def indicators(db: Path) -> pd.DataFrame:
    with dbm.open_reader(db) as r:
        df = r.con.execute(f"SELECT * FROM indicators ORDER BY {', '.join(ORDER)}").df()
    return df.reset_index(drop=True)


def age(db: Path) -> None:
    """Turn a database into what the previous milepost wrote: schema 1, no `note`, indicators of other values.

    The values are shifted so that a recompute is visible; the catalog is checked against a real schema-1 file.
    """
    con = duckdb.connect(str(db))
    # what schema 6 added (indicator gaps) goes first
    for view in ("current_indicator_gaps_by_basis", "current_indicator_gaps"):
        con.execute(f"DROP VIEW {view}")
    con.execute("DROP TABLE indicator_gaps")
    # what schema 4 added (harmonised values beside the raw ones) goes first, then schema 3's and 2's
    for view in ("current_harmonisation", "current_indicators_by_basis", "current_data_by_basis", "current_data"):
        con.execute(f"DROP VIEW {view}")
    con.execute("DROP TABLE harmonisation")
    con.execute("ALTER TABLE data DROP COLUMN basis")
    con.execute(OLD_DATA_VIEW)
    con.execute("DROP VIEW submission_versions")  # migration 3
    con.execute("ALTER TABLE findings DROP COLUMN column_name")
    con.execute("DROP VIEW current_indicators")
    con.execute("ALTER TABLE indicators DROP COLUMN basis")
    con.execute("ALTER TABLE indicators DROP COLUMN note")
    con.execute(OLD_VIEW)
    con.execute("UPDATE indicators SET value = value + 1")
    con.execute("UPDATE meta SET value = '1' WHERE key = 'schema_version'")
    con.execute("CHECKPOINT")
    con.close()


def catalog(db: Path) -> dict[str, list[tuple[str, str]]]:
    with dbm.open_reader(db) as r:
        rows = r.con.execute(
            "SELECT table_name, column_name, data_type FROM duckdb_columns() WHERE database_name = 'db'"
            " ORDER BY table_name, column_index"
        ).fetchall()
    out: dict[str, list[tuple[str, str]]] = {}
    for table, column, dtype in rows:
        out.setdefault(table, []).append((column, dtype))
    return out


@pytest.fixture(scope="module")
def fresh(tmp_path_factory: pytest.TempPathFactory, submissions, contract) -> Path:
    """The three submissions ingested by this milepost."""
    db = tmp_path_factory.mktemp("fresh") / "m.duckdb"
    for paths in submissions:
        assert ingest(paths, db, contract).status == "accepted"
    return db


@pytest.fixture
def aged(tmp_path: Path, tmp_path_factory: pytest.TempPathFactory, submissions, contract) -> Path:
    """The first two submissions in a schema-1 database, as the previous milepost left it."""
    cache = tmp_path_factory.getbasetemp() / "aged-template.duckdb"
    if not cache.exists():
        for paths in submissions[:2]:
            assert ingest(paths, cache, contract).status == "accepted"
        age(cache)
    db = tmp_path / "m.duckdb"
    shutil.copyfile(cache, db)
    return db


def test_the_aged_database_has_the_schema_1_catalog(tmp_path: Path, aged: Path) -> None:
    only_first = tmp_path / "migrations"
    only_first.mkdir()
    first = dbm.migrations()[0][1]
    (only_first / first.name).write_text(first.read_text(encoding="utf-8"), encoding="utf-8")
    old = tmp_path / "old.duckdb"
    con = dbm.connect_memory()
    con.execute("ATTACH ? AS old", [str(old)])
    assert dbm.migrate(con, "old", only_first) == [1]  # an empty file taken to schema 1 by its own migration
    con.close()
    assert catalog(aged) == catalog(old)


def test_next_ingest_migrates_and_recomputes_every_stored_indicator(aged: Path, fresh: Path, submissions, contract):
    res = ingest(submissions[2], aged, contract)
    assert res.status == "accepted" and res.recomputed > 0
    with dbm.open_reader(aged) as r:
        assert dbm.schema_version(r.con, "db") == dbm.latest_version()
        assert r.con.execute("SELECT count(*) FROM meta WHERE key = ?", [OUTDATED_KEY]).fetchall() == [(0,)]
        # history (the first version of the revised scenarios) is recomputed too
        superseded = r.con.execute(
            "SELECT count(*) FROM indicators i WHERE NOT EXISTS (SELECT 1 FROM current_versions v WHERE"
            " v.submission_id = i.submission_id AND v.model = i.model AND v.scenario = i.scenario)"
        ).fetchall()[0][0]
    assert superseded > 0
    got, want = indicators(aged), indicators(fresh)
    # the same rows, values and notes as a database that this milepost filled from the start
    pd.testing.assert_frame_equal(got, want, check_exact=False, rtol=1e-12, atol=1e-12)
    assert got["note"].notna().any() and {"rate_linear_base", "rate_absolute"} <= set(got["kind"])


def test_ingesting_stored_files_again_still_recomputes(aged: Path, fresh: Path, submissions, contract) -> None:
    res = ingest(submissions[0], aged, contract)
    assert res.status == "unchanged" and res.recomputed > 0
    want = indicators(fresh)
    want = want[want["submission_id"] <= 2].reset_index(drop=True)
    # before the third submission, Halvik's first act-firm/wait-firm were already superseded by the revision
    pd.testing.assert_frame_equal(indicators(aged), want, check_exact=False, rtol=1e-12, atol=1e-12)
    assert ingest(submissions[0], aged, contract).recomputed == 0  # once is enough


def test_an_aged_database_exports_with_a_warning(tmp_path: Path, aged: Path) -> None:
    heard: list[str] = []
    n = export(aged, "indicators", "csv", tmp_path / "i.csv", on_warning=heard.append)
    got = pd.read_csv(tmp_path / "i.csv")
    assert n == len(got) > 0 and got.columns[-1] == "note" and got["note"].isna().all()
    (message,) = heard
    assert "schema version 1" in message and "milepost ingest" in message
    # migrated by a writer that has no contract (here: ensure_database), the indicators wait for an ingest
    assert dbm.ensure_database(aged) == list(range(2, dbm.latest_version() + 1))
    heard.clear()
    export(aged, "indicators", "csv", tmp_path / "j.csv", on_warning=heard.append)
    (message,) = heard
    assert "recomputes them" in message


def test_the_commands_say_what_happened(tmp_path: Path, aged: Path, submissions) -> None:
    from typer.testing import CliRunner

    from milepost.validate.cli import app

    runner = CliRunner()
    out = tmp_path / "i.csv"
    res = runner.invoke(app, ["export", "--db", str(aged), "--what", "indicators", "--format", "csv", "-o", str(out)])
    assert res.exit_code == 0 and "Warning: the database has schema version 1" in res.stderr
    args = ["ingest", *map(str, submissions[2]), "--db", str(aged), "--contract", str(demo.CONTRACT_DIR)]
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.output
    lines = res.stdout.splitlines()
    assert lines[0].startswith("Recomputed ") and "stored indicator rows under the current conventions" in lines[0]
    assert lines[1].startswith("Accepted as submission 3")
    res = runner.invoke(app, ["export", "--db", str(aged), "--what", "indicators", "--format", "csv", "-o", str(out)])
    assert res.exit_code == 0 and "Warning" not in res.stderr


def test_a_schema_4_database_gets_the_budget_indicators_on_the_next_ingest(tmp_path: Path, submissions, contract):
    db = tmp_path / "v4.duckdb"
    ingest(submissions[0], db, contract)
    budget_kinds = ("cumulative_net_zero", "budget_level", "warming_peak", "warming_peak_low", "warming_peak_high")
    # what schema 4 wrote: the same tables but schema 6's gaps, no carbon-budget indicator rows
    con = duckdb.connect(str(db))
    for view in ("current_indicator_gaps_by_basis", "current_indicator_gaps"):
        con.execute(f"DROP VIEW {view}")
    con.execute("DROP TABLE indicator_gaps")
    con.execute(f"DELETE FROM indicators WHERE kind IN {budget_kinds}")
    con.execute("UPDATE meta SET value = '4' WHERE key = 'schema_version'")
    con.execute("CHECKPOINT")
    con.close()
    dbm.ensure_database(db)  # any writer migrates; only an ingest (it has the contract) recomputes
    with dbm.open_reader(db) as r:
        marker = r.con.execute("SELECT value FROM db.meta WHERE key = ?", [OUTDATED_KEY]).fetchall()
        assert marker == [("computed before the carbon-budget indicators existed",)]
        assert dbm.schema_version(r.con, "db") == dbm.latest_version()
    result = ingest(submissions[2], db, contract)
    assert result.recomputed > 0
    with dbm.open_reader(db) as r:
        kinds = dict(
            r.con.execute(
                f"SELECT scenario, count(*) FROM db.indicators WHERE kind IN {budget_kinds} AND model = 'Halvik'"
                " GROUP BY scenario"
            ).fetchall()
        )
        assert not r.con.execute("SELECT count(*) FROM db.meta WHERE key = ?", [OUTDATED_KEY]).fetchall()[0][0]
    # every stored Halvik scenario has its sums to net zero (6 regions), 5 budget classes and 3 warmings again
    assert kinds == {"drift": 6 + 5 + 3, "act-firm": 6 + 5 + 3, "wait-firm": 6 + 5 + 3}


def test_a_schema_6_database_gets_the_cost_shares_on_the_next_ingest(tmp_path: Path, submissions, contract):
    db = tmp_path / "v6.duckdb"
    ingest(submissions[0], db, contract)
    # what schema 6 wrote: the same tables, no cost_share rows
    con = duckdb.connect(str(db))
    con.execute("DELETE FROM indicators WHERE kind = 'cost_share'")
    con.execute("UPDATE meta SET value = '6' WHERE key = 'schema_version'")
    con.execute("CHECKPOINT")
    con.close()
    dbm.ensure_database(db)
    with dbm.open_reader(db) as r:
        marker = r.con.execute("SELECT value FROM db.meta WHERE key = ?", [OUTDATED_KEY]).fetchall()
        assert marker == [("computed before the regional cost shares existed",)]
    assert ingest(submissions[2], db, contract).recomputed > 0
    with dbm.open_reader(db) as r:
        n = r.con.execute("SELECT count(*) FROM db.indicators WHERE kind = 'cost_share' AND model = 'Halvik'")
        assert n.fetchall()[0][0] > 0  # the first submission (Halvik) has its shares again
