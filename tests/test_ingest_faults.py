"""Faults around `milepost ingest`, with real processes: SIGKILL mid-write, two writers, a reader held open."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pandas as pd
import pytest

from milepost.example_db import generate as demo
from milepost.schema.contract import load
from milepost.validate.store.database import ENV_PAUSE_AT, ENV_PAUSE_FILE, PAUSE_STAGES, open_reader
from milepost.validate.store.ingest import ingest

MODEL = "Halvik"


@pytest.fixture(scope="module")
def contract():
    return load(demo.CONTRACT_DIR)


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, list[Path]]:
    """Three single-scenario submissions of one model, as CSV data + scenarios files."""
    data, scen = demo.ensemble_frame(), demo.scenario_frame()
    folder = tmp_path_factory.mktemp("subs")
    out = {}
    for name in ("drift", "act-firm", "act-bold"):
        d = data[(data["model"] == MODEL) & (data["scenario"] == name)]
        s = scen[(scen["model"] == MODEL) & (scen["scenario"] == name)]
        out[name] = [folder / f"{name}.csv", folder / f"{name}-scenarios.csv"]
        d.to_csv(out[name][0], index=False, lineterminator="\n")
        s.to_csv(out[name][1], index=False, lineterminator="\n")
    return out


def cli(*args: str | Path) -> list[str]:
    return [sys.executable, "-m", "milepost.validate", "ingest", *map(str, args), "-c", str(demo.CONTRACT_DIR)]


def wait_for(path: Path, proc: subprocess.Popen, timeout: float = 60) -> None:
    deadline = time.monotonic() + timeout
    while not path.exists():
        if proc.poll() is not None:
            raise AssertionError(f"ingest ended before pausing: rc={proc.returncode} {proc.communicate()}")
        if time.monotonic() > deadline:
            raise AssertionError("ingest never reached the pause point")
        time.sleep(0.02)


def state(db: Path) -> tuple[list[tuple], int]:
    with open_reader(db) as r:
        subs = r.con.execute("SELECT id, status, rows FROM submissions ORDER BY id").fetchall()
        n = r.con.execute("SELECT count(*) FROM data").fetchall()[0][0]
    return subs, n


@pytest.mark.parametrize("stage", PAUSE_STAGES)
def test_sigkill_at_any_stage_leaves_the_old_file_or_the_whole_submission(
    tmp_path: Path, files, contract, stage: str
) -> None:
    db = tmp_path / "m.duckdb"
    first = ingest(files["drift"], db, contract)
    before_bytes = db.read_bytes()
    before = state(db)
    signal_file = tmp_path / "paused"
    env = {**os.environ, ENV_PAUSE_AT: stage, ENV_PAUSE_FILE: str(signal_file)}
    proc = subprocess.Popen(
        cli(*files["act-firm"], "--db", db), env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    wait_for(signal_file, proc)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert proc.returncode == -signal.SIGKILL
    subs, n = state(db)  # readable
    if stage == "after-replace":
        assert [s[:2] for s in subs] == [(1, "accepted"), (2, "accepted")]
        assert n == first.rows + subs[1][2]
    else:
        assert (subs, n) == before
        assert db.read_bytes() == before_bytes
    # The lock died with the process, and the next ingest cleans up and works without waiting.
    res = ingest(files["act-bold"], db, contract, lock_timeout=0)
    assert res.status == "accepted"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.duckdb", "m.duckdb.lock", "paused"]
    subs, n = state(db)
    assert n == sum(s[2] for s in subs)


def test_sigkill_while_creating_a_new_database_leaves_no_database(tmp_path: Path, files) -> None:
    db = tmp_path / "m.duckdb"
    signal_file = tmp_path / "paused"
    env = {**os.environ, ENV_PAUSE_AT: "in-transaction", ENV_PAUSE_FILE: str(signal_file)}
    proc = subprocess.Popen(
        cli(*files["drift"], "--db", db), env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    wait_for(signal_file, proc)
    proc.kill()
    proc.wait()
    assert not db.exists()


def test_two_concurrent_ingests_both_end_correctly(tmp_path: Path, files, contract) -> None:
    db = tmp_path / "m.duckdb"
    procs = [
        subprocess.Popen(
            cli(*files[name], "--db", db, "--wait", "60"), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
        )
        for name in ("drift", "act-firm")
    ]
    outs = [p.communicate(timeout=120) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outs
    assert not any("Traceback" in out + err for out, err in outs)
    subs, n = state(db)
    assert [s[:2] for s in subs] == [(1, "accepted"), (2, "accepted")]
    with open_reader(db) as r:
        scen = r.con.execute("SELECT DISTINCT scenario FROM current_data ORDER BY 1").fetchall()
    assert scen == [("act-firm",), ("drift",)]
    assert n == sum(s[2] for s in subs)


def test_a_reference_stored_while_waiting_for_the_lock_counts(tmp_path: Path, files) -> None:
    """act-firm names drift as its reference. Checked while drift is being written by another process, it would
    fail unknown-reference; under the lock drift is current, so the finding is dropped and act-firm accepted."""
    db = tmp_path / "m.duckdb"
    signal_file = tmp_path / "paused"
    env = {**os.environ, ENV_PAUSE_AT: "locked", ENV_PAUSE_FILE: str(signal_file), "MILEPOST_PAUSE_SECONDS": "15"}
    first = subprocess.Popen(cli(*files["drift"], "--db", db), env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    wait_for(signal_file, first)
    second = subprocess.run(
        cli(*files["act-firm"], "--db", db, "--wait", "120", "--format", "json"),
        capture_output=True,
        text=True,
        timeout=180,
    )
    first.communicate(timeout=120)
    assert first.returncode == 0
    # it waited, so it was checked before drift was stored
    assert second.stderr.startswith("Waiting up to 120 s for another milepost process"), second.stderr
    out = json.loads(second.stdout)
    assert (out["status"], second.returncode) == ("accepted", 0), out["findings"][:3]
    assert not any(f["rule"] == "unknown-reference" for f in out["findings"])
    with open_reader(db) as r:
        rules = r.con.execute("SELECT DISTINCT rule FROM findings WHERE submission_id = 2").fetchall()
    assert ("unknown-reference",) not in rules


def test_a_writer_that_cannot_get_the_lock_fails_cleanly(tmp_path: Path, files, contract) -> None:
    db = tmp_path / "m.duckdb"
    ingest(files["drift"], db, contract)
    before = db.read_bytes()
    signal_file = tmp_path / "paused"
    env = {**os.environ, ENV_PAUSE_AT: "in-transaction", ENV_PAUSE_FILE: str(signal_file)}
    holder = subprocess.Popen(
        cli(*files["act-firm"], "--db", db), env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    try:
        wait_for(signal_file, holder)
        second = subprocess.run(
            cli(*files["act-bold"], "--db", db, "--wait", "0.5"), capture_output=True, text=True, timeout=120
        )
    finally:
        holder.kill()
        holder.wait()
    assert second.returncode == 3
    assert second.stderr.splitlines()[0].startswith("Waiting up to 0.5 s for another milepost process")
    assert second.stderr.splitlines()[-1] == (
        f"Error: another milepost process (pid {holder.pid}) is writing {db}; gave up after 0.5 s "
        "(wait longer with --wait or MILEPOST_LOCK_TIMEOUT)"
    )
    assert "Traceback" not in second.stderr and second.stdout == ""
    assert db.read_bytes() == before


READER = textwrap.dedent("""
    import json, sys, time
    from milepost.validate.store.database import open_reader
    r = open_reader(sys.argv[1])
    seen, bad = [], 0
    deadline = time.monotonic() + 60
    print("ready", flush=True)
    # Poll until the ingest's submission shows up (the test fails on the deadline otherwise).
    while time.monotonic() < deadline and (not seen or seen[-1][0] < int(sys.argv[2])):
        r.refresh()
        subs, rows, stored = r.con.execute(
            "SELECT (SELECT count(*) FROM submissions), (SELECT count(*) FROM data), "
            "(SELECT coalesce(sum(rows), 0) FROM submissions)").fetchall()[0]
        bad += rows != stored
        if not seen or seen[-1] != (subs, rows):
            seen.append((subs, rows))
        time.sleep(0.005)
    print(json.dumps([bad, seen]), flush=True)
""")


def test_a_reader_held_open_neither_blocks_the_ingest_nor_sees_a_half_state(tmp_path: Path, files, contract) -> None:
    db = tmp_path / "m.duckdb"
    first = ingest(files["drift"], db, contract)
    reader = subprocess.Popen([sys.executable, "-c", READER, str(db), "2"], stdout=subprocess.PIPE, text=True)
    assert reader.stdout is not None and reader.stdout.readline().strip() == "ready"
    # lock_timeout=0: a reader holding the file open never makes the writer wait
    res = ingest(files["act-firm"], db, contract, lock_timeout=0)
    assert res.status == "accepted"
    out, _ = reader.communicate(timeout=60)
    bad, seen = json.loads(out)
    assert bad == 0  # every state it saw was whole: data rows == the stored submissions' row counts
    assert seen == [[1, first.rows], [2, first.rows + res.rows]]


def test_bad_input_never_reaches_the_data_table(tmp_path: Path, contract) -> None:
    data, scen = demo.flawed_frames()
    folder = tmp_path / "in"
    folder.mkdir()
    # Also a file that is not a table at all, next to the flawed one.
    (folder / "junk.csv").write_bytes(b"\x00\x01\x02 not a table\n")
    data.to_csv(folder / "v.csv", index=False)
    scen.to_csv(folder / "v-scen.csv", index=False)
    db = tmp_path / "m.duckdb"
    for paths in ([folder / "v.csv", folder / "v-scen.csv"], [folder / "junk.csv"]):
        res = ingest(paths, db, contract)
        assert res.status == "rejected"
    with open_reader(db) as r:
        assert r.con.execute("SELECT count(*) FROM data").fetchall() == [(0,)]
        rules = {x[0] for x in r.con.execute("SELECT DISTINCT rule FROM findings").fetchall()}
    assert "unreadable-file" in rules or "missing-column" in rules
    assert pd.Series(sorted(rules)).str.match(r"^[a-z-]+$").all()
