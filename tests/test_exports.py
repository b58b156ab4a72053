"""Exports, snapshots and diffs read back with independent readers (pandas, pyarrow, openpyxl, duckdb)."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import duckdb
import numpy as np
import openpyxl
import pandas as pd
import pyarrow.dataset as pads
import pyarrow.parquet as pq
import pytest

from milepost.example_db import generate as demo
from milepost.schema.contract import load
from milepost.validate.errors import UsageError
from milepost.validate.store import database as dbm
from milepost.validate.store.exports import CAUTIONS, XLSX_MAX_ROWS, Filters, diff, export, snapshot, submissions
from milepost.validate.store.ingest import ingest

KEY = ["model", "scenario", "region", "variable", "year"]
LONG = ["model", "scenario", "region", "variable", "unit", "year", "value"]


@pytest.fixture(scope="module")
def contract():
    return load(demo.CONTRACT_DIR)


@pytest.fixture(scope="module")
def source() -> dict[str, pd.DataFrame]:
    data, scen = demo.ensemble_frame(), demo.scenario_frame()
    keep = data["model"].isin(["Ferrow", "Halvik"]) & data["scenario"].isin(["drift", "act-firm", "wait-firm"])
    keep_s = scen["model"].isin(["Ferrow", "Halvik"]) & scen["scenario"].isin(["drift", "act-firm", "wait-firm"])
    v2, v2_scen = demo.revision_frames()
    flawed, flawed_scen = demo.flawed_frames()
    return {
        "data": data[keep],
        "scen": scen[keep_s],
        "v2": v2,
        "v2_scen": v2_scen,
        "flawed": flawed,
        "flawed_scen": flawed_scen,
    }


@pytest.fixture(scope="module")
def db(tmp_path_factory: pytest.TempPathFactory, source, contract) -> Path:
    """Submissions: 1 Ferrow, 2 Halvik v1, 3 Vossel (rejected), 4 Halvik v2 (act-firm, wait-firm)."""
    folder = tmp_path_factory.mktemp("exports")
    path = folder / "m.duckdb"
    d, s = source["data"], source["scen"]
    plan = [
        ("ferrow", d[d["model"] == "Ferrow"], s[s["model"] == "Ferrow"]),
        ("halvik", d[d["model"] == "Halvik"], s[s["model"] == "Halvik"]),
        ("vossel", source["flawed"], source["flawed_scen"]),
        ("halvik-v2", source["v2"], source["v2_scen"]),
    ]
    for stem, data, scen in plan:
        files = [folder / f"{stem}.csv", folder / f"{stem}-scenarios.csv"]
        data.to_csv(files[0], index=False, lineterminator="\n")
        scen.to_csv(files[1], index=False, lineterminator="\n")
        ingest(files, path, contract)
    return path


def current_source(source) -> pd.DataFrame:
    """What the current rows must be, built with pandas: Halvik's act-firm and wait-firm come from v2."""
    d = source["data"]
    old = d[~((d["model"] == "Halvik") & d["scenario"].isin(["act-firm", "wait-firm"]))]
    return pd.concat([old, source["v2"]], ignore_index=True)[LONG].sort_values(KEY).reset_index(drop=True)


def test_csv_export_with_filters_matches_the_source_rows(tmp_path: Path, db, source) -> None:
    out = tmp_path / "d.csv"
    f = Filters(
        model=["Halvik"],
        scenario=["act-firm", "drift"],
        region=["World", "Ardena"],
        variable=["emissions.co2", "gdp.mer"],
    )
    n = export(db, "data", "csv", out, f)
    got = pd.read_csv(out)
    want = current_source(source)
    want = want[
        (want["model"] == "Halvik")
        & want["scenario"].isin(f.scenario)
        & want["region"].isin(f.region)
        & want["variable"].isin(f.variable)
    ].reset_index(drop=True)
    assert n == len(got) == len(want) > 0
    assert list(got.columns) == ["submission_id", *LONG]
    pd.testing.assert_frame_equal(got[LONG].sort_values(KEY).reset_index(drop=True), want, check_dtype=False)
    assert set(got.loc[got["scenario"] == "act-firm", "submission_id"]) == {4}
    assert set(got.loc[got["scenario"] == "drift", "submission_id"]) == {2}


def test_parquet_export_equals_csv_export(tmp_path: Path, db) -> None:
    n_csv = export(db, "indicators", "csv", tmp_path / "i.csv", Filters(model=["Ferrow"]))
    n_pq = export(db, "indicators", "parquet", tmp_path / "i.parquet", Filters(model=["Ferrow"]))
    a = pd.read_csv(tmp_path / "i.csv")
    b = pq.read_table(tmp_path / "i.parquet").to_pandas()
    assert n_csv == n_pq == len(a) == len(b) > 0
    assert list(b.columns) == [
        "submission_id",
        "model",
        "scenario",
        "region",
        "kind",
        "variable",
        "year_from",
        "year_to",
        "value",
        "unit",
        "note",
    ]
    np.testing.assert_allclose(a["value"].to_numpy(float), b["value"].to_numpy(float), equal_nan=True)


def test_findings_export_covers_rejected_submissions(tmp_path: Path, db) -> None:
    n = export(db, "findings", "csv", tmp_path / "f.csv", Filters(submission=[3]))
    got = pd.read_csv(tmp_path / "f.csv")
    subs = {s["id"]: s for s in submissions(db)}
    assert subs[3]["status"] == "rejected"
    assert n == len(got) == subs[3]["errors"] > 0
    assert set(got["submission_id"]) == {3} and set(got["severity"]) == {"error"}


def test_a_submission_filter_exports_history(tmp_path: Path, db, source) -> None:
    n = export(db, "data", "csv", tmp_path / "old.csv", Filters(submission=[2], scenario=["act-firm"]))
    d = source["data"]
    assert n == ((d["model"] == "Halvik") & (d["scenario"] == "act-firm")).sum()
    assert (
        export(db, "data", "csv", tmp_path / "cur.csv", Filters(model=["Halvik"], scenario=["act-firm"]))
        == (source["v2"]["scenario"] == "act-firm").sum()
    )


def test_xlsx_export_has_the_rows_and_the_cautions(tmp_path: Path, db) -> None:
    out = tmp_path / "d.xlsx"
    n = export(db, "data", "xlsx", out, Filters(model=["Ferrow"], region=["World"]))
    wb = openpyxl.load_workbook(out, read_only=True)
    rows = list(wb["data"].iter_rows(values_only=True))
    assert rows[0] == ("submission_id", *LONG)
    assert len(rows) - 1 == n > 0
    about = [r for r in wb["about"].iter_rows(values_only=True)]
    assert [r[1] for r in about if r[0] == "caution"] == list(CAUTIONS)
    assert not [r for r in about if r[0] == "basis"]  # the indicator conventions go with indicator exports only


def test_an_xlsx_export_reports_its_progress(tmp_path: Path, db) -> None:
    heard: list[tuple[int, int]] = []
    n = export(
        db, "data", "xlsx", tmp_path / "d.xlsx", Filters(model=["Ferrow"]), progress=lambda d, t: heard.append((d, t))
    )
    assert n > 10_000  # more than one chunk, so more than one report
    assert len(heard) >= 2 and heard[-1] == (n, n)
    assert [d for d, _ in heard] == sorted(d for d, _ in heard)


def test_xlsx_indicator_export_states_the_conventions(tmp_path: Path, db) -> None:
    out = tmp_path / "i.xlsx"
    export(db, "indicators", "xlsx", out, Filters(model=["Ferrow"], region=["World"], variable=["gdp.mer"]))
    wb = openpyxl.load_workbook(out, read_only=True)
    rows = list(wb["indicators"].iter_rows(values_only=True))
    assert rows[0][-1] == "note"
    notes = {r[rows[0].index("note")] for r in rows[1:] if r[rows[0].index("kind")] == "growth_reduction_pp"}
    assert any(n and n.startswith("against drift, the model's own reference scenario") for n in notes)
    basis = " ".join(r[1] for r in wb["about"].iter_rows(values_only=True) if r[0] == "basis")
    assert "both included" in basis and "current-policies pathway" in basis and "rate_linear_base" in basis


def test_xlsx_refuses_more_rows_than_a_sheet_holds(tmp_path: Path) -> None:
    # Excel's worksheet limit is 1,048,576 rows (Microsoft, "Excel specifications and limits"); one is the header.
    assert XLSX_MAX_ROWS == 1_048_576 - 1
    path = tmp_path / "big.duckdb"
    con = dbm.connect_memory()
    with dbm.Writer(path, con) as w:
        w.begin()
        con.execute(
            "INSERT INTO new.submissions (id, model, status, rows) VALUES (1, 'M', 'accepted', ?)", [XLSX_MAX_ROWS + 1]
        )
        con.execute("INSERT INTO new.scenarios VALUES (1, 'M', 'S', NULL, '{}')")
        con.execute(
            "INSERT INTO new.data SELECT 1, 'M', 'S', 'World', 'v', 'u', 2000, i, 'raw' FROM range(?) t(i)",
            [XLSX_MAX_ROWS + 1],
        )
    con.close()
    out = tmp_path / "big.xlsx"
    with pytest.raises(UsageError, match=r"1,048,576 rows do not fit in an Excel sheet \(at most 1,048,575\)"):
        export(path, "data", "xlsx", out)
    assert not out.exists()


def test_bad_export_arguments(tmp_path: Path, db) -> None:
    with pytest.raises(UsageError, match="--what must be one of"):
        export(db, "everything", "csv", tmp_path / "x.csv")
    with pytest.raises(UsageError, match="--format must be one of"):
        export(db, "data", "json", tmp_path / "x.json")
    with pytest.raises(UsageError, match="does not exist"):
        export(db, "data", "csv", tmp_path / "no" / "x.csv")


def test_filter_values_are_parameters_not_sql(tmp_path: Path, db) -> None:
    n = export(db, "data", "csv", tmp_path / "x.csv", Filters(model=["Halvik' OR '1'='1"]))
    assert n == 0


def test_snapshot_reads_back_with_duckdb_and_pyarrow(tmp_path: Path, db, source, contract) -> None:
    out = tmp_path / "snap"
    manifest = snapshot(db, out)
    want = current_source(source)
    # duckdb's hive reader puts partition columns last; pyarrow's dataset API is the second, independent reader.
    a = duckdb.sql(f"SELECT * FROM read_parquet('{out}/data/**/*.parquet', hive_partitioning = true)").df()
    b = pads.dataset(out / "data", format="parquet", partitioning="hive").to_table().to_pandas()
    for got in (a, b):
        got = got[LONG].astype({"model": str}).sort_values(KEY).reset_index(drop=True)
        pd.testing.assert_frame_equal(got, want, check_dtype=False)
    assert sorted(p.name for p in (out / "data").iterdir()) == ["model=Ferrow", "model=Halvik"]
    on_disk = json.loads((out / "manifest.json").read_text())
    assert on_disk == manifest
    assert manifest["contract_hash"] == contract.hash
    assert manifest["tables"]["data"]["rows"] == len(want)
    assert manifest["submissions"] == [1, 2, 4]
    listed = {f["path"]: f for f in manifest["files"]}
    assert set(listed) == {p.relative_to(out).as_posix() for p in out.rglob("*.parquet")}
    for rel, f in listed.items():
        assert f["sha256"] == hashlib.sha256((out / rel).read_bytes()).hexdigest()
        assert f["rows"] == pq.read_metadata(out / rel).num_rows
    ind = pads.dataset(out / "indicators", format="parquet", partitioning="hive").to_table()
    assert ind.num_rows == manifest["tables"]["indicators"]["rows"] > 0
    assert manifest["tables"]["gaps"]["rows"] == 0 and not (out / "gaps").exists()  # every input reported here


def test_snapshot_holds_the_indicator_gaps(tmp_path: Path, source, contract) -> None:
    """The gaps travel with the indicators, so a reader of the snapshot sees what was left out and why."""
    d, s = source["data"], source["scen"]
    # Ferrow without Ardena's population: its Kaya factors and per-capita allocations there cannot be computed
    d = d[(d["model"] == "Ferrow") & ~((d["region"] == "Ardena") & (d["variable"] == "population"))]
    files = [tmp_path / "ferrow.csv", tmp_path / "ferrow-scenarios.csv"]
    d.to_csv(files[0], index=False, lineterminator="\n")
    s[s["model"] == "Ferrow"].to_csv(files[1], index=False, lineterminator="\n")
    db = tmp_path / "g.duckdb"
    assert ingest(files, db, contract).status == "accepted"
    manifest = snapshot(db, tmp_path / "snap")
    cols = ["model", "scenario", "region", "kind", "variable", "note"]
    with duckdb.connect(str(db), read_only=True) as con:
        stored = con.execute(f"SELECT {', '.join(cols)} FROM current_indicator_gaps").df()
    gaps = pads.dataset(tmp_path / "snap" / "gaps", format="parquet", partitioning="hive").to_table().to_pandas()
    assert manifest["tables"]["gaps"]["rows"] == len(gaps) == len(stored) > 0
    assert "Ardena" in set(gaps["region"])
    pd.testing.assert_frame_equal(
        gaps[cols].astype({"model": str}).sort_values(cols[:5]).reset_index(drop=True),
        stored.sort_values(cols[:5]).reset_index(drop=True),
        check_dtype=False,
    )


def test_snapshot_partition_names_survive_odd_model_names(tmp_path: Path) -> None:
    path = tmp_path / "odd.duckdb"
    models = ["Ferrow/2 β", "a=b", "50% plan"]
    con = dbm.connect_memory()
    with dbm.Writer(path, con) as w:
        w.begin()
        for i, m in enumerate(models, start=1):
            con.execute(
                "INSERT INTO new.submissions (id, model, status, rows, contract_hash) "
                "VALUES (?, ?, 'accepted', 1, 'h')",
                [i, m],
            )
            con.execute("INSERT INTO new.scenarios VALUES (?, ?, 'S', NULL, '{}')", [i, m])
            con.execute("INSERT INTO new.data VALUES (?, ?, 'S', 'World', 'v', 'u', 2020, ?, 'raw')", [i, m, float(i)])
    con.close()
    out = tmp_path / "snap"
    snapshot(path, out)
    a = duckdb.sql(
        f"SELECT model, value FROM read_parquet('{out}/data/**/*.parquet', hive_partitioning = true) ORDER BY value"
    ).fetchall()
    b = pads.dataset(out / "data", format="parquet", partitioning="hive").to_table().to_pandas()
    assert a == [(m, float(i)) for i, m in enumerate(models, start=1)]
    assert sorted(b["model"].astype(str)) == sorted(models)


def test_snapshot_refuses_a_folder_with_content_and_an_empty_database(tmp_path: Path, db) -> None:
    (tmp_path / "full").mkdir()
    (tmp_path / "full" / "x").write_text("keep me")
    with pytest.raises(UsageError, match="not an empty folder"):
        snapshot(db, tmp_path / "full")
    assert (tmp_path / "full" / "x").read_text() == "keep me"
    empty = tmp_path / "empty.duckdb"
    con = dbm.connect_memory()
    with dbm.Writer(empty, con):
        pass
    con.close()
    with pytest.raises(UsageError, match="no accepted data"):
        snapshot(empty, tmp_path / "snap")
    assert not (tmp_path / "snap").exists()
    assert not list(tmp_path.glob("snap.tmp-*"))


def test_diff_matches_a_pandas_comparison(db, source, contract) -> None:
    rel, ab = contract.tolerance.sum_relative, contract.tolerance.sum_absolute
    d = diff(db, 2, 4, rel, ab, limit=0)
    # The same comparison done independently with a pandas outer merge.
    v1 = source["data"][source["data"]["model"] == "Halvik"][LONG]
    m = v1.merge(source["v2"][LONG], on=KEY, how="outer", suffixes=("_a", "_b"), indicator=True)
    both = m[m["_merge"] == "both"]
    changed = (both["value_b"] - both["value_a"]).abs() > np.maximum(rel * both["value_a"].abs(), ab)
    # a partial revision: rows of scenarios it does not hold are untouched (still current), not removed
    revised = m["scenario"].isin(set(source["v2"]["scenario"]))
    assert d.counts == {
        "added": int((m["_merge"] == "right_only").sum()),
        "removed": int(((m["_merge"] == "left_only") & revised).sum()),
        "changed": int(changed.sum()),
        "same": int((~changed).sum()),
        "untouched": int(((m["_merge"] == "left_only") & ~revised).sum()),
    }
    assert d.counts["untouched"] > 0 and d.counts["changed"] > 0 and d.counts["added"] == 0
    assert (d.models, d.versions) == (("Halvik", "Halvik"), (1, 2))
    assert len(d.changed) == d.counts["changed"]
    first = both[changed].sort_values(KEY).iloc[0]
    assert (d.changed[0]["scenario"], d.changed[0]["region"], d.changed[0]["variable"], d.changed[0]["year"]) == (
        first["scenario"],
        first["region"],
        first["variable"],
        first["year"],
    )
    assert d.changed[0]["delta"] == pytest.approx(first["value_b"] - first["value_a"])
    # The reverse direction swaps added and removed.
    r = diff(db, 4, 2, rel, ab, limit=5)
    assert (r.counts["added"], r.counts["removed"]) == (d.counts["removed"] + d.counts["untouched"], 0)
    assert len(r.added) == 5
    # A looser tolerance reports fewer changes.
    assert diff(db, 2, 4, 0.5, ab).counts["changed"] < d.counts["changed"]


def test_diff_compares_one_model_unless_told(db) -> None:
    with pytest.raises(UsageError, match=r"submission 1 is of model Ferrow, 2 of model Halvik.*--any-model"):
        diff(db, 1, 2, 0.01, 0.001)
    d = diff(db, 1, 2, 0.01, 0.001, any_model=True)
    assert d.models == ("Ferrow", "Halvik") and d.counts["same"] == 0


def test_diff_refuses_rejected_and_unknown_submissions(db) -> None:
    with pytest.raises(UsageError, match="submission 3 was rejected"):
        diff(db, 2, 3, 0.01, 0.001)
    with pytest.raises(UsageError, match="no submission 99"):
        diff(db, 2, 99, 0.01, 0.001)


def test_the_cli_list_and_the_dashboard_number_versions_alike(db) -> None:
    """Both read the `submission_versions` view: the same number per submission, none for a rejected one."""
    from milepost.dashboard import queries
    from milepost.validate.store.database import reading

    with reading(db) as con:
        board = queries.submissions(con)
    on_board = {int(i): (None if pd.isna(v) else int(v)) for i, v in zip(board["id"], board["version"], strict=True)}
    assert on_board == {s["id"]: s["version"] for s in submissions(db)}
    assert on_board[3] is None


def test_submissions_lists_status_and_versions(db) -> None:
    subs = submissions(db)
    assert [(s["id"], s["model"], s["status"], s["version"]) for s in subs] == [
        (1, "Ferrow", "accepted", 1),
        (2, "Halvik", "accepted", 1),
        (3, "Vossel", "rejected", None),
        (4, "Halvik", "accepted", 2),
    ]
    assert subs[1]["current_scenarios"] == ["drift"] and subs[3]["current_scenarios"] == ["act-firm", "wait-firm"]
    assert [f["name"] for f in subs[0]["files"]] == ["ferrow.csv", "ferrow-scenarios.csv"]
