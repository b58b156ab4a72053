"""`make bench` end to end on small inputs: every step has its floor, its ratio and its verdict; no timing is
asserted (speed is what the bench reports, never what a test checks)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from milepost.validate.bench import check, ingest
from milepost.validate.bench.__main__ import main
from milepost.validate.bench.files import PER_SCENARIO, clean_submission, dirty_submission
from milepost.validate.bench.timing import Run, ratio_step, run_once, table

pytestmark = pytest.mark.slow


def test_ratio_step_takes_medians_and_the_largest_peak() -> None:
    jobs = [Run(3.0, 100, 0), Run(1.0, 300, 0), Run(2.0, 200, 0)]
    floors = [Run(1.0, 50, 0), Run(0.5, 50, 0), Run(2.0, 50, 0)]
    s = ratio_step("x", 10, jobs, floors, "floor", 2.5, 250)
    assert (s.seconds, s.floor_seconds, s.ratio, s.peak_mb) == (2.0, 1.0, 2.0, 300)
    assert s.met is False  # the ratio is within 2.5x, the peak is not within 250 MiB
    assert ratio_step("x", 10, jobs, floors, "floor", 2.0).met is True
    lines = table([s]).splitlines()
    assert lines[0].split("|")[1].strip() == "step" and "NO" in lines[2]


def test_peak_memory_is_the_jobs_own_not_the_bench_process() -> None:
    """Linux carries a forked child's starting size (its parent's) into its peak: a bench grown to 300 MiB must not
    report a 30 MiB job as 300 MiB. The bound is from the job's own allocation plus an interpreter (about 10 MiB)."""
    import sys

    held = bytearray(300 << 20)
    held[::4096] = b"\1" * len(held[::4096])  # touch every page so it is resident
    job = "x = bytearray(30 << 20); x[::4096] = b'\\1' * len(x[::4096])"
    run = run_once([sys.executable, "-c", job])
    assert 30 <= run.peak_mb < 120, run
    assert run_once([sys.executable, "-c", "import sys; sys.exit(3)"], ok=(3,)).exit == 3
    del held


def test_dirty_file_breaks_thirty_percent_of_rows(tmp_path: Path) -> None:
    import duckdb

    clean, _ = clean_submission(tmp_path, 8 * PER_SCENARIO)
    dirty, _ = dirty_submission(tmp_path, 8 * PER_SCENARIO)
    con = duckdb.connect()
    a = con.execute("SELECT * FROM read_csv(?, all_varchar = true)", [str(clean)]).fetchall()
    b = con.execute("SELECT * FROM read_csv(?, all_varchar = true)", [str(dirty)]).fetchall()
    assert len(a) == len(b) >= 8 * PER_SCENARIO  # the ensemble rounds up to whole scenarios per model
    changed = sum(x != y for x, y in zip(a, b, strict=True)) / len(a)
    assert 0.27 < changed < 0.33


def test_check_and_ingest_steps_on_small_files(tmp_path: Path) -> None:
    rows = 8 * PER_SCENARIO  # two scenarios per model; the ingest's larger database gets four
    steps = check.run(tmp_path, repeat=1, rows=rows)
    clean, dirty, bound = steps
    assert clean.rows == dirty.rows == bound.rows >= rows
    assert clean.detail["errors"] == 0 and dirty.detail["errors"] > 0.2 * rows
    for s in (clean, dirty):
        assert s.ratio == pytest.approx(s.seconds / s.floor_seconds) and s.peak_mb > 0 and s.met in (True, False)
    # the lower bound has no target: it says how much of the check's ratio DuckDB's own passes take
    assert (
        bound.met is None and bound.target == "-" and bound.ratio == pytest.approx(bound.seconds / bound.floor_seconds)
    )
    new, inc = ingest.run(tmp_path, repeat=1, rows=rows)
    assert new.rows == clean.rows and {"check", "commit_and_swap", "total"} <= set(new.detail["stages"])
    assert inc.rows == 3 * PER_SCENARIO and inc.detail["db_rows_large"] > inc.detail["db_rows_small"] >= rows


def test_main_writes_the_table_and_results(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--workdir", str(tmp_path), "--only", "check", "--repeat", "1", "--rows", str(4 * PER_SCENARIO)]) == 0
    out = json.loads((tmp_path / "results.json").read_text(encoding="utf-8"))
    assert [s["step"].split(" (")[0] for s in out["steps"]] == [
        "check, clean",
        "check, dirty",
        "lower bound of any check reading the rows twice: DuckDB storing the clean file as a table and grouping it "
        "by its keys once",
    ]
    assert out["machine"]["cores"] and out["table"] in capsys.readouterr().out
