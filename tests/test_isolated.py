"""The check in a child process (the Self-check's): the same findings as in-process, and a finding of its own
when the memory or time budget runs out; the parent always comes back."""

from __future__ import annotations

import json

import duckdb

from milepost.validate.bench import bombs
from milepost.validate.isolated import check_in_child

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


def test_a_child_beyond_its_time_budget_is_stopped(tmp_path):
    path = bombs.empty_rows_csv(tmp_path / "empty.csv", rows=50_000)
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out", seconds=0.05)
    assert child.failure is not None and "time budget of 0.05 s" in child.failure
    assert child.findings_path is None


def test_a_child_beyond_its_memory_budget_says_so(tmp_path):
    path = bombs.empty_rows_csv(tmp_path / "empty.csv", rows=1_000)
    # 150 MB of address space: not enough for the interpreter with DuckDB and pandas, so the child fails
    # however it fails (MemoryError, an allocation failure, a signal) and the parent names the budget
    child = check_in_child([path], BASIC_CONTRACT, tmp_path / "out", memory_bytes=150 << 20)
    assert child.failure is not None and "memory budget of 150 MB" in child.failure, child.failure
