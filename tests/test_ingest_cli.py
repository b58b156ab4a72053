"""The database commands end to end through the real Typer app: output lines and exact exit codes."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from milepost.example_db import generate as demo
from milepost.validate.cli import app

CONTRACT = str(demo.CONTRACT_DIR)


@pytest.fixture(scope="module")
def subs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, list[str]]:
    folder = tmp_path_factory.mktemp("cli")
    data, scen = demo.ensemble_frame(), demo.scenario_frame()
    pick = data["model"].eq("Halvik") & data["scenario"].isin(["drift", "act-firm"])
    pick_s = scen["model"].eq("Halvik") & scen["scenario"].isin(["drift", "act-firm"])
    v2, v2_s = demo.revision_frames()
    bad, bad_s = demo.flawed_frames()
    out = {}
    for name, d, s in (
        ("halvik", data[pick], scen[pick_s]),
        ("halvik-v2", v2[v2["scenario"] == "act-firm"], v2_s[v2_s["scenario"] == "act-firm"]),
        ("vossel", bad, bad_s),
    ):
        paths = [folder / f"{name}.csv", folder / f"{name}-scenarios.csv"]
        d.to_csv(paths[0], index=False, lineterminator="\n")
        s.to_csv(paths[1], index=False, lineterminator="\n")
        out[name] = [str(p) for p in paths]
        out[name + ":rows"] = [str(len(d))]
    return out


def run(*args: str, env: dict[str, str] | None = None):
    return CliRunner().invoke(app, list(args), env=env)


def test_ingest_accept_repeat_reject_and_list(tmp_path: Path, subs) -> None:
    db = str(tmp_path / "m.duckdb")
    rows = int(subs["halvik:rows"][0])
    r = run("ingest", *subs["halvik"], "--db", db, "-c", CONTRACT, "--by", "team-h")
    assert r.exit_code == 0, r.output
    assert r.stdout.splitlines() == [
        f"Accepted as submission 1: model Halvik, 2 scenarios (act-firm, drift), {rows:,} rows stored in {db}.",
        "Findings: 0 errors, 0 warnings, 0 notes (stored with the submission).",
    ]
    r = run("ingest", *subs["halvik"], "--db", db, "-c", CONTRACT)
    assert r.exit_code == 0
    assert r.stdout == (
        f"Unchanged: these files were already ingested as submission 1 (accepted); nothing was written to {db}.\n"
    )
    r = run("ingest", *subs["vossel"], "--db", db, "-c", CONTRACT, "--limit", "2")
    assert r.exit_code == 1
    lines = r.stdout.splitlines()
    assert lines[0].startswith("Rejected as submission 2: model Vossel, 2 scenarios (act-firm, drift): ")
    assert lines[0].endswith(" errors; no rows were stored.")
    assert len(lines) == 5 and lines[3].startswith("... all findings are stored: milepost export --what findings")
    r = run("ingest", *subs["halvik-v2"], "--db", db, "-c", CONTRACT, "--format", "json")
    assert r.exit_code == 0
    payload = json.loads(r.stdout)
    assert (payload["status"], payload["submission_id"], payload["exit_code"]) == ("accepted", 3, 0)
    assert payload["replaced"] == [{"model": "Halvik", "scenario": "act-firm", "submission_id": 1}]
    r = run("submissions", "--db", db)
    assert r.exit_code == 0
    table = r.stdout.splitlines()
    assert table[0].split()[:4] == ["id", "status", "model", "ver"]
    assert [line.split()[:4] for line in table[1:]] == [
        ["1", "accepted", "Halvik", "v1"],
        ["2", "rejected", "Vossel", "rejected,"],
        ["3", "accepted", "Halvik", "v2"],
    ]
    # a rejected submission has no version, said in the words the dashboard uses (exports.version_label)
    assert "  rejected, no version  " in table[2]
    assert table[0].index("ver") + 3 == table[1].index("v1") + 2  # the column widens, right-aligned
    r = run("submissions", "--db", db, "--format", "json")
    listed = json.loads(r.stdout)
    assert [s["status"] for s in listed] == ["accepted", "rejected", "accepted"]
    # JSON keeps the number (null: no version) and carries the label the text table printed above
    assert [s["version"] for s in listed] == [1, None, 2]
    assert [s["version_label"] for s in listed] == ["v1", "rejected, no version", "v2"]
    assert all(f"  {s['version_label']}  " in line for s, line in zip(listed, table[1:], strict=True))


def test_export_snapshot_and_diff_commands(tmp_path: Path, subs) -> None:
    db = str(tmp_path / "m.duckdb")
    assert run("ingest", *subs["halvik"], "--db", db, "-c", CONTRACT).exit_code == 0
    assert run("ingest", *subs["halvik-v2"], "--db", db, "-c", CONTRACT).exit_code == 0
    out = tmp_path / "d.csv"
    r = run(
        "export",
        "--db",
        db,
        "--what",
        "data",
        "--model",
        "Halvik",
        "--scenario",
        "drift",
        "--region",
        "World",
        "--format",
        "csv",
        "-o",
        str(out),
    )
    assert r.exit_code == 0
    n = len(pd.read_csv(out))
    assert r.stderr == f"Wrote {n:,} rows to {out}.\n" and n > 0
    r = run("snapshot", str(tmp_path / "snap"), "--db", db)
    assert r.exit_code == 0 and (tmp_path / "snap" / "manifest.json").exists()
    r = run("snapshot", str(tmp_path / "snap"), "--db", db)
    assert r.exit_code == 2
    assert r.stderr == (
        f"Error: {tmp_path / 'snap'} exists and is not an empty folder; choose a new folder for the snapshot\n"
    )
    r = run("diff", "1", "2", "--db", db, "-c", CONTRACT, "--limit", "1")
    assert r.exit_code == 0
    lines = r.stdout.splitlines()
    assert lines[0] == "Compared submission 1 (Halvik v1) with submission 2 (Halvik v2)."
    assert (
        lines[1].startswith("Submission 1 -> 2: 0 added, 0 removed, ") and "relative 0.01, absolute 0.001" in lines[1]
    )
    assert lines[1].endswith(" untouched.")
    assert lines[2] == "Scenarios only in 1 (untouched by 2: still current, not removed): Halvik | drift"
    r = run("diff", "1", "2", "--db", db, "-c", CONTRACT, "--common", "--format", "json")
    d = json.loads(r.stdout)
    assert d["counts"]["removed"] == 0 and d["counts"]["changed"] > 0 and d["scenarios_only_in_a"] == ["Halvik | drift"]


def test_errors_are_one_line_with_their_exit_code(tmp_path: Path, subs) -> None:
    db = str(tmp_path / "m.duckdb")
    r = run("submissions", "--db", db)
    assert (r.exit_code, r.stderr) == (3, f"Error: no database at {db} (create one with `milepost ingest`)\n")
    r = run("export", "--db", db, "--what", "data", "--format", "csv", "-o", str(tmp_path / "x.csv"))
    assert r.exit_code == 3 and r.stderr.startswith("Error: no database at")
    bad = tmp_path / "badcontract"
    bad.mkdir()
    (bad / "contract.toml").write_text("name = [unclosed\n")
    r = run("ingest", *subs["halvik"], "--db", db, "-c", str(bad))
    assert r.exit_code == 2 and r.stderr.startswith("Error: ") and len(r.stderr.splitlines()) == 1
    r = run("ingest", str(tmp_path / "missing.csv"), "--db", db)
    assert r.exit_code == 2
    r = run("diff", "1", "1", "--db", db)
    assert (r.exit_code, r.stderr) == (2, "Error: give two different submission ids\n")
    assert not Path(db).exists()


def test_db_from_environment(tmp_path: Path, subs) -> None:
    db = tmp_path / "env.duckdb"
    r = run("ingest", *subs["halvik"], "-c", CONTRACT, env={"MILEPOST_DB": str(db)})
    assert r.exit_code == 0 and db.exists()
    r = run("submissions", "--format", "json", env={"MILEPOST_DB": str(db)})
    assert [s["id"] for s in json.loads(r.stdout)] == [1]


def test_module_entry_point_exit_codes(tmp_path: Path, subs) -> None:
    db = str(tmp_path / "m.duckdb")
    base = [sys.executable, "-m", "milepost.validate"]
    rejected = subprocess.run(
        [*base, "ingest", *subs["vossel"], "--db", db, "-c", CONTRACT], capture_output=True, text=True, timeout=120
    )
    assert rejected.returncode == 1 and "Traceback" not in rejected.stderr
    listed = subprocess.run(
        [*base, "submissions", "--db", db, "--format", "json"], capture_output=True, text=True, timeout=120
    )
    assert listed.returncode == 0 and json.loads(listed.stdout)[0]["status"] == "rejected"
