"""The check in a child process (the Self-check's): the same findings as in-process, and a finding of its own
when the memory or time budget runs out; the parent always comes back."""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path

import duckdb

from milepost.validate.bench import bombs
from milepost.validate.findings import RULES
from milepost.validate.isolated import STDERR_TAIL_BYTES, check_in_child, failure_finding, run_child

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT


def test_the_child_finds_what_the_checker_finds(tmp_path, check, basic):
    rows = consistent_rows(basic)
    rows[2]["variable"] = "no.such.variable"
    path = write_csv(tmp_path / "x.csv", rows)
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out")
    assert child.failure is None
    here = check(path, basic)
    assert child.summary["counts"] == here.counts
    assert child.summary["rows"] == here.rows
    stored = duckdb.connect().execute("SELECT rule, line FROM read_parquet(?) ORDER BY ALL", [str(child.findings_path)])
    assert stored.fetchall() == sorted((f.rule, f.line) for f in here.findings)
    assert json.loads(child.json_path.read_text())["summary"]["errors"] == here.counts["error"]
    assert child.xlsx_path is not None and child.xlsx_path.stat().st_size > 0
    # DuckDB spills inside the job's folder, which the caller removes, never into the server's working directory,
    # and no more than the disk budget (DuckDB's own default is 90 % of the free disk)
    assert Path(child.summary["temp_directory"]).is_relative_to(tmp_path / "out")
    assert child.summary["max_temp_directory_size"] == "4.0 GiB"  # DEFAULT_SPILL_MB
    smaller = check_in_child([path], BASIC_CONTRACT, tmp_path / "out2", spill_bytes=300 << 20)
    assert smaller.summary["max_temp_directory_size"] == "300.0 MiB"


def test_a_child_beyond_its_time_budget_is_stopped(tmp_path):
    path = bombs.empty_rows_csv(tmp_path / "empty.csv", rows=50_000)
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out", seconds=0.05)
    assert child.failure is not None and "time budget of 0.05 s" in child.failure
    assert child.findings_path is None
    assert child.failure_kind == "time"
    assert failure_finding(child, ["empty.csv"])["rule"] == "check-aborted"


def test_a_child_beyond_its_memory_budget_says_so(tmp_path):
    path = bombs.empty_rows_csv(tmp_path / "empty.csv", rows=1_000)
    # 150 MB of address space: not enough for the interpreter with DuckDB and pandas, so the child fails
    # however it fails (MemoryError, an allocation failure, a signal) and the parent names the budget
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out", memory_bytes=150 << 20)
    assert child.failure is not None and "memory budget of 150 MB" in child.failure, child.failure
    assert child.failure_kind == "memory"
    finding = failure_finding(child, ["empty.csv"])
    assert finding["rule"] == "check-aborted" and finding["message"] == child.failure


def test_a_crashed_child_is_aborted_not_a_limit_and_names_its_exit_code(tmp_path, basic):
    path = write_csv(tmp_path / "x.csv", consistent_rows(basic))
    # a contract folder that is not there: the child fails with a ContractError before it checks anything
    child = check_in_child([path], tmp_path / "no-contract", tmp_path / "out")
    assert child.failure_kind == "crash"
    assert child.failure.startswith("the check crashed (exit code 1: ") and "ContractError" in child.failure
    finding = failure_finding(child, ["x.csv"])
    assert finding["rule"] == "check-aborted" and "check-aborted" in RULES
    assert finding["severity"] == RULES["check-aborted"].severity == "error"
    assert finding["path"] == "x.csv" and "milepost check" in finding["hint"]


def test_a_chatty_child_leaves_only_the_end_of_its_stderr(tmp_path):
    # 20 MB on stderr, then a last line: the parent keeps the last 64 KiB, with that line, and the exit code
    script = (
        "import sys\nfor _ in range(20_000): sys.stderr.write('x' * 999 + '\\n')\n"
        "sys.stderr.write('END\\n')\nsys.exit(3)"
    )
    ran = run_child([sys.executable, "-c", script], 60, dict(os.environ))
    assert ran.returncode == 3 and not ran.timed_out
    assert len(ran.stderr_tail) == STDERR_TAIL_BYTES == 64 << 10
    assert ran.stderr_tail.endswith(b"x\nEND\n")


def test_a_wrong_budget_setting_is_said_without_running_and_the_command_line_setting_stays_behind(
    tmp_path, monkeypatch, basic
):
    path = write_csv(tmp_path / "x.csv", consistent_rows(basic))
    for name, raw in (("MILEPOST_SELFCHECK_MEMORY_MB", "lots"), ("MILEPOST_SELFCHECK_SECONDS", "-5")):
        with monkeypatch.context() as m:
            m.setenv(name, raw)
            child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out")
        assert child.failure_kind == "setting", child.failure
        assert name in child.failure and repr(raw) in child.failure
        assert not (tmp_path / "out").exists()  # nothing was run
        assert name.removeprefix("MILEPOST_") in failure_finding(child, ["x.csv"])["hint"]
    # the command line's budget does not reach the child, which sets its own: a bad one would fail it
    monkeypatch.setenv("MILEPOST_MEMORY_MB", "not-a-number")
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out")
    assert child.failure is None, child.failure


def test_a_child_killed_mid_check_leaves_no_spill_folder_outside_its_job(tmp_path, monkeypatch):
    # The command line's private spill folder is removed at exit, which a killed child never reaches; the child
    # spills only into its job folder, which the caller removes.
    tmp = tmp_path / "tmp"
    tmp.mkdir()
    monkeypatch.setenv("TMPDIR", str(tmp))
    path = bombs.blank_lines_csv(tmp_path / "slow.csv", lines=68_000_000, every=1_000_000)  # reads for 10 s or more
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out", seconds=5)  # past its imports, mid-read
    assert child.failure_kind == "time", child.failure
    assert list(tmp.iterdir()) == []
