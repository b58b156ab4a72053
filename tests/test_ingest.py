"""`ingest()` on real files and real DuckDB files: accepted, rejected, repeated, superseded, and indicators."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from milepost.example_db import generate as demo
from milepost.schema.contract import load
from milepost.validate import __version__
from milepost.validate.errors import UsageError
from milepost.validate.store.database import open_reader
from milepost.validate.store.ingest import ingest, submission_digest

MODEL = "Halvik"
KEY = ["model", "scenario", "region", "variable", "year"]


@pytest.fixture(scope="module")
def contract():
    return load(demo.CONTRACT_DIR)


@pytest.fixture(scope="module")
def frames() -> tuple[pd.DataFrame, pd.DataFrame]:
    return demo.ensemble_frame(), demo.scenario_frame()


def write(folder: Path, stem: str, data: pd.DataFrame, scenarios: pd.DataFrame | None = None) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    paths = [folder / f"{stem}.csv"]
    data.to_csv(paths[0], index=False, lineterminator="\n")
    if scenarios is not None:
        paths.append(folder / f"{stem}-scenarios.csv")
        scenarios.to_csv(paths[1], index=False, lineterminator="\n")
    return paths


def subset(frames: tuple[pd.DataFrame, pd.DataFrame], scenarios: tuple[str, ...], model: str = MODEL):
    data, scen = frames
    d = data[(data["model"] == model) & data["scenario"].isin(scenarios)].reset_index(drop=True)
    s = scen[(scen["model"] == model) & scen["scenario"].isin(scenarios)].reset_index(drop=True)
    return d, s


def query(db: Path, sql: str, params: list | None = None) -> pd.DataFrame:
    with open_reader(db) as r:
        return r.con.execute(sql, params or []).df()


def test_accepted_submission_is_stored_with_its_provenance(tmp_path: Path, frames, contract) -> None:
    d, s = subset(frames, ("drift", "act-firm"))
    files = write(tmp_path / "in", "halvik", d, s)
    db = tmp_path / "m.duckdb"
    res = ingest(files, db, contract, by="team-h", note="first run")
    assert (res.status, res.exit_code, res.submission_id, res.model) == ("accepted", 0, 1, MODEL)
    assert res.scenarios == ["act-firm", "drift"] and res.rows == len(d)
    sub = query(db, "SELECT * FROM submissions").iloc[0]
    digests = [hashlib.sha256(p.read_bytes()).hexdigest() for p in files]  # hashlib as the outside reference
    assert [f["sha256"] for f in json.loads(sub["files"])] == digests
    assert [f["name"] for f in json.loads(sub["files"])] == ["halvik.csv", "halvik-scenarios.csv"]
    assert sub["sha256"] == hashlib.sha256("\n".join(sorted(digests)).encode()).hexdigest() == res.sha256
    assert (sub["contract_name"], sub["contract_hash"]) == (contract.name, contract.hash)
    assert (sub["milepost_version"], sub["submitted_by"], sub["note"], sub["status"]) == (
        __version__,
        "team-h",
        "first run",
        "accepted",
    )
    assert (sub["rows"], sub["errors"], sub["warnings"]) == (len(d), 0, 0)
    # The stored rows are the file's rows (read back independently with pandas), values unchanged.
    stored = query(db, "SELECT model, scenario, region, variable, unit, year, value FROM current_data")
    left = d.sort_values(KEY).reset_index(drop=True)
    right = stored.sort_values(KEY).reset_index(drop=True)
    pd.testing.assert_frame_equal(left, right, check_dtype=False)
    scen = query(db, "SELECT scenario, reference, attributes FROM current_scenarios ORDER BY scenario")
    assert scen["scenario"].tolist() == ["act-firm", "drift"]
    assert scen["reference"].tolist()[0] == "drift" and pd.isna(scen["reference"].tolist()[1])
    attrs = json.loads(scen["attributes"][0])
    assert attrs["family"] == "immediate" and attrs["reference"] == "drift"
    kinds = set(query(db, "SELECT DISTINCT kind FROM current_indicators")["kind"])
    assert {"value", "rate_cagr", "cumulative", "loss_pct", "npv"} <= kinds


def test_rejected_submission_keeps_findings_and_none_of_its_rows(tmp_path: Path, contract) -> None:
    data, scen = demo.flawed_frames()
    files = write(tmp_path / "in", "vossel", data, scen)
    db = tmp_path / "m.duckdb"
    res = ingest(files, db, contract)
    assert (res.status, res.exit_code) == ("rejected", 1)
    assert res.counts["error"] > 0 and "no rows were stored" in res.reason
    sub = query(db, "SELECT status, rows, errors FROM submissions WHERE id = ?", [res.submission_id]).iloc[0]
    assert (sub["status"], sub["rows"], sub["errors"]) == ("rejected", 0, res.counts["error"])
    n = query(
        db,
        "SELECT count(*) AS n, count(DISTINCT rule) AS rules FROM findings WHERE submission_id = ?",
        [res.submission_id],
    ).iloc[0]
    assert n["n"] == res.counts["error"] and n["rules"] >= 2
    for table in ("data", "scenarios", "indicators"):
        assert query(db, f"SELECT count(*) AS n FROM {table}")["n"][0] == 0
    assert query(db, "SELECT count(*) AS n FROM current_data")["n"][0] == 0


def test_the_same_files_twice_is_a_no_op(tmp_path: Path, frames, contract) -> None:
    d, s = subset(frames, ("drift",))
    files = write(tmp_path / "in", "h", d, s)
    db = tmp_path / "m.duckdb"
    assert ingest(files, db, contract).status == "accepted"
    before = (db.stat().st_ino, db.stat().st_mtime_ns, db.read_bytes())
    again = ingest(list(reversed(files)), db, contract)  # order of the files does not matter
    assert (again.status, again.duplicate_of, again.duplicate_status, again.exit_code) == (
        "unchanged",
        1,
        "accepted",
        0,
    )
    assert "already ingested as submission 1" in again.reason
    assert (db.stat().st_ino, db.stat().st_mtime_ns, db.read_bytes()) == before
    bad_data, bad_scen = demo.flawed_frames()
    bad = write(tmp_path / "bad", "v", bad_data, bad_scen)
    assert ingest(bad, db, contract).status == "rejected"
    repeat = ingest(bad, db, contract)
    assert (repeat.status, repeat.duplicate_of, repeat.exit_code) == ("unchanged", 2, 1)
    assert query(db, "SELECT count(*) AS n FROM submissions")["n"][0] == 2


def test_warnings_reject_unless_accepted_and_the_retry_is_not_a_no_op(tmp_path: Path, frames, contract) -> None:
    d, s = subset(frames, ("drift",))
    d = pd.concat([d, d.iloc[[5]]], ignore_index=True)  # an exact repeat: duplicate-row is a warning
    files = write(tmp_path / "in", "h", d, s)
    db = tmp_path / "m.duckdb"
    first = ingest(files, db, contract)
    assert first.status == "rejected" and first.counts == {"error": 0, "warning": 1, "note": 0}
    assert "--accept-warnings" in first.reason
    assert ingest(files, db, contract).status == "unchanged"
    second = ingest(files, db, contract, accept_warnings=True)
    assert (second.status, second.submission_id, second.rows) == ("accepted", 2, len(d) - 1)
    f = query(db, "SELECT submission_id, rule, severity FROM findings ORDER BY submission_id")
    assert f.values.tolist() == [[1, "duplicate-row", "warning"], [2, "duplicate-row", "warning"]]
    assert ingest(files, db, contract, accept_warnings=True).status == "unchanged"


def test_a_new_version_supersedes_per_scenario_and_keeps_history(tmp_path: Path, frames, contract) -> None:
    db = tmp_path / "m.duckdb"
    d1, s1 = subset(frames, ("drift", "act-firm", "wait-firm"))
    assert ingest(write(tmp_path / "v1", "h", d1, s1), db, contract).submission_id == 1
    d2, s2 = demo.revision_frames()  # act-firm and wait-firm re-run
    res2 = ingest(write(tmp_path / "v2", "h", d2, s2), db, contract)
    assert [r["scenario"] for r in res2.replaced] == ["act-firm", "wait-firm"] and res2.superseded == []
    cur = query(db, "SELECT scenario, min(submission_id) AS sid FROM current_data GROUP BY 1 ORDER BY 1")
    assert cur.values.tolist() == [["act-firm", 2], ["drift", 1], ["wait-firm", 2]]
    assert query(db, "SELECT status FROM submissions ORDER BY id")["status"].tolist() == ["accepted", "accepted"]
    # The first version is still stored.
    old = query(db, "SELECT count(*) AS n FROM data WHERE submission_id = 1 AND scenario = 'act-firm'")["n"][0]
    assert old == (d1["scenario"] == "act-firm").sum()
    new_firm = d2[(d2["scenario"] == "act-firm") & (d2["variable"] == "price.carbon") & (d2["region"] == "World")]
    shown = query(
        db,
        "SELECT year, value FROM current_data WHERE scenario = 'act-firm' AND variable = "
        "'price.carbon' AND region = 'World' ORDER BY year",
    )
    np.testing.assert_allclose(shown["value"], new_firm.sort_values("year")["value"])
    # Replace the last scenario of submission 1: it becomes superseded, by the newest submission.
    d3 = d1[d1["scenario"] == "drift"].iloc[::-1]  # the same rows in another order: new bytes, same content
    res3 = ingest(write(tmp_path / "v3", "h", d3, s1[s1["scenario"] == "drift"]), db, contract)
    assert res3.superseded == [1]
    subs = query(db, "SELECT id, status, superseded_by FROM submissions ORDER BY id")
    assert subs["status"].tolist() == ["superseded", "accepted", "accepted"]
    assert subs["superseded_by"].tolist()[0] == 3
    assert query(db, "SELECT count(*) AS n FROM data WHERE submission_id = 1")["n"][0] == len(d1)
    assert query(db, "SELECT count(*) AS n FROM current_data")["n"][0] == len(d2) + len(d3)


def losses(data: pd.DataFrame, scenario: str, reference: str, years: tuple[int, ...]) -> pd.DataFrame:
    """(reference - scenario) / reference * 100 at reported years, computed in pandas, apart from the SQL.

    The relative loss against a no-policy reference is the usual way to state mitigation costs (common practice).
    """
    keys = ["region", "variable", "year"]
    econ = data[data["variable"].isin(["gdp.ppp", "gdp.mer", "consumption"]) & data["year"].isin(years)]
    s = econ[econ["scenario"] == scenario].set_index(keys)["value"]
    r = econ[econ["scenario"] == reference].set_index(keys)["value"]
    return ((r - s) / r * 100).rename("expected").reset_index()


def test_loss_uses_a_reference_submitted_earlier_and_follows_its_revision(tmp_path: Path, frames, contract) -> None:
    db = tmp_path / "m.duckdb"
    d_ref, s_ref = subset(frames, ("drift",))
    d_pol, s_pol = subset(frames, ("act-firm",))
    assert ingest(write(tmp_path / "a", "ref", d_ref, s_ref), db, contract).submission_id == 1
    res = ingest(write(tmp_path / "b", "pol", d_pol, s_pol), db, contract)
    assert res.submission_id == 2
    sql = (
        "SELECT submission_id, region, variable, year_to AS year, value FROM current_indicators "
        "WHERE kind = 'loss_pct' AND scenario = 'act-firm'"
    )
    got = query(db, sql)
    assert set(got["submission_id"]) == {2}
    want = losses(pd.concat([d_ref, d_pol]), "act-firm", "drift", contract.milestones)
    m = want.merge(got, on=["region", "variable", "year"], how="outer", indicator=True)
    assert (m["_merge"] == "both").all() and len(m) == len(want) > 0
    np.testing.assert_allclose(m["value"], m["expected"], rtol=1e-9)
    # Only the new submission's scenarios get indicator rows (the reference's own stay with submission 1).
    per = query(db, "SELECT submission_id, list(DISTINCT scenario) AS s FROM indicators GROUP BY 1 ORDER BY 1")
    assert [list(x) for x in per["s"]] == [["drift"], ["act-firm"]]
    # A revised reference: the stored policy scenario's losses are recomputed against it.
    d_ref2 = d_ref.copy()
    d_ref2.loc[d_ref2["variable"] == "consumption", "value"] *= 1.1
    res3 = ingest(write(tmp_path / "c", "ref2", d_ref2, s_ref), db, contract)
    assert res3.refreshed == [{"model": MODEL, "scenario": "act-firm", "submission_id": 2}]
    got = query(db, sql)
    assert set(got["submission_id"]) == {2}
    want = losses(pd.concat([d_ref2, d_pol]), "act-firm", "drift", contract.milestones)
    m = want.merge(got, on=["region", "variable", "year"])
    assert len(m) == len(want)
    np.testing.assert_allclose(m["value"], m["expected"], rtol=1e-9)
    n = query(db, "SELECT count(*) AS n FROM indicators WHERE submission_id = 2 AND kind = 'loss_pct'")["n"][0]
    assert n == len(got)


def test_one_submission_may_span_several_files(tmp_path: Path, frames, contract) -> None:
    d, s = subset(frames, ("drift", "act-firm"))
    folder = tmp_path / "in"
    part1 = write(folder, "part1", d[d["scenario"] == "drift"])
    part2 = write(folder, "part2", d[d["scenario"] == "act-firm"], s)
    db = tmp_path / "m.duckdb"
    res = ingest([*part1, *part2], db, contract)
    assert res.status == "accepted" and res.rows == len(d)
    assert [f["kind"] for f in res.files] == ["data", "data", "scenarios"]
    assert query(db, "SELECT count(*) AS n FROM submissions")["n"][0] == 1
    assert res.sha256 == submission_digest([f["sha256"] for f in res.files])


def test_usage_errors(tmp_path: Path, frames, contract) -> None:
    d, s = subset(frames, ("drift",))
    files = write(tmp_path / "in", "h", d, s)
    with pytest.raises(UsageError, match="not a file"):
        ingest([tmp_path / "missing.csv"], tmp_path / "m.duckdb", contract)
    with pytest.raises(UsageError, match="more than once"):
        ingest([files[0], files[0]], tmp_path / "m.duckdb", contract)
    with pytest.raises(UsageError, match="no files"):
        ingest([], tmp_path / "m.duckdb", contract)
    assert not (tmp_path / "m.duckdb").exists()
