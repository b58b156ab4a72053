"""The contract of a database is the default for ingesting into it; another one must be asked for, and a file
checked against the wrong contract is told so. Rejected attempts that were retried are folded in the list."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from milepost.example_db import generate as demo
from milepost.validate.cli import app

CONTRACT = str(demo.CONTRACT_DIR)


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, list[str]]:
    folder = tmp_path_factory.mktemp("contract")
    data, scen = demo.ensemble_frame(), demo.scenario_frame()
    out = {}
    for name, scenarios in (("one", ["drift", "act-firm"]), ("two", ["drift", "wait-firm"])):
        d = data[data["model"].eq("Halvik") & data["scenario"].isin(scenarios)]
        s = scen[scen["model"].eq("Halvik") & scen["scenario"].isin(scenarios)]
        paths = [folder / f"{name}.csv", folder / f"{name}-scenarios.csv"]
        d.to_csv(paths[0], index=False, lineterminator="\n")
        s.to_csv(paths[1], index=False, lineterminator="\n")
        out[name] = [str(p) for p in paths]
    return out


def run(*args: str):
    return CliRunner().invoke(app, list(args))


def test_ingest_uses_the_databases_contract_unless_told(tmp_path: Path, files) -> None:
    db = str(tmp_path / "m.duckdb")
    assert run("ingest", *files["one"], "--db", db, "-c", CONTRACT).exit_code == 0
    # no --contract: the database's own (the demo's), said on stderr
    r = run("ingest", *files["two"], "--db", db)
    assert r.exit_code == 0, r.output
    assert r.stderr.startswith(f"Contract: {demo_name()}, the database's (from ")
    # another contract is refused without the flag ...
    r = run("ingest", *files["one"], "--db", db, "-c", core_dir())
    assert r.exit_code == 2
    assert r.stderr.startswith(f"Error: the database {db} was made with the contract {demo_name()}, not core: ")
    assert "--switch-contract" in r.stderr
    # ... and with it, the contract is recorded with the submission (here rejected: the regions are not core's)
    r = run("ingest", *files["one"], "--db", db, "-c", core_dir(), "--switch-contract", "--format", "json")
    assert r.exit_code == 1
    out = json.loads(r.stdout)
    first = next(f for f in out["findings"] if f["rule"] == "unknown-region")
    assert "unknown to the contract core: was another contract meant (--contract FOLDER)?" in first["hint"]
    subs = json.loads(run("submissions", "--db", db, "--format", "json", "--all").stdout)
    assert [(s["id"], s["status"], s["contract_name"]) for s in subs] == [
        (1, "accepted", demo_name()),
        (2, "accepted", demo_name()),
        (3, "rejected", "core"),
    ]
    # the rejected attempt is not followed by anything: it stays listed until the model submits again
    assert len(run("submissions", "--db", db).stdout.splitlines()) == 4
    assert run("ingest", *files["one"], "--db", db).exit_code == 0  # unchanged: stored before as 1
    r = run("ingest", *files["two"], "--db", db, "--note", "again")
    assert r.exit_code == 0


def test_a_retried_rejection_is_folded_in_the_list(tmp_path: Path, files) -> None:
    db = str(tmp_path / "m.duckdb")
    # a new database: the core contract, the attempt is rejected; then the right contract
    r = run("ingest", *files["one"], "--db", db, "--limit", "4")
    assert r.exit_code == 1
    lines = r.stdout.splitlines()
    # one folding for every command: three lines of a run, then the rest counted
    assert lines[1].split(": ", 1)[1].startswith("error unknown-region: region ")
    assert lines[4].startswith("  … and 1 more like it on lines ")
    assert run("ingest", *files["one"], "--db", db, "-c", CONTRACT).exit_code == 0
    r = run("submissions", "--db", db)
    listed = r.stdout.splitlines()
    assert [line.split()[:2] for line in listed[1:-1]] == [["2", "accepted"]]
    assert listed[-1] == "(1 rejected attempt followed by a later submission not listed: 1; --all lists them)"
    assert [line.split()[:2] for line in run("submissions", "--db", db, "--all").stdout.splitlines()[1:]] == [
        ["1", "rejected"],
        ["2", "accepted"],
    ]


def test_check_without_contract_asks_whether_another_was_meant(files) -> None:
    r = run("check", files["one"][0], "--limit", "1")
    assert r.exit_code == 1
    finding = r.stdout.splitlines()[
        next(i for i, x in enumerate(r.stdout.splitlines()) if "unknown-region" in x and ": error " in x)
    ]
    assert "are unknown to the contract core: was another contract meant (--contract FOLDER)?" in finding


def demo_name() -> str:
    from milepost.schema.contract import load

    return load(CONTRACT).name


def core_dir() -> str:
    from milepost.schema.contract import CORE_DIR

    return str(CORE_DIR)
