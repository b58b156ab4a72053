"""`milepost check` at assessment scale, against DuckDB reading every column of the same file.

A clean submission (data and scenarios tables) and the same data with 30 % of its rows broken, each checked by
`milepost check --format json --output` as a fresh process, alternating with the floor in a fresh process.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from milepost.schema.limits import Limits
from milepost.validate.bench.files import clean_submission, dirty_submission
from milepost.validate.bench.timing import (
    READ_FLOOR,
    READ_FLOOR_LABEL,
    STORE_AND_GROUP,
    Step,
    alternate,
    milepost,
    python,
    ratio_step,
)
from milepost.validate.memory import memory_mb

DEMO_CONTRACT = Path(__file__).resolve().parents[2] / "example_db" / "contract"
# (rows, clean target, dirty target, memory target MiB): the targets
SIZES = {2_000_000: (3.0, 6.0, None), 10_000_000: (2.5, 6.0, 1024.0)}


def bench_contract(workdir: Path, rows: int) -> Path:
    """The demo contract, or above the default row limit one extending it with a limit that admits `rows` (else
    the check would read only the first 5M rows and measure that)."""
    if rows <= Limits().max_rows:
        return DEMO_CONTRACT
    folder = workdir / f"contract-{rows}"
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "contract.toml").write_text(
        f'name = "bench-{rows}"\nextends = "{DEMO_CONTRACT.as_posix()}"\n\n[limits]\nmax_rows = {2 * rows}\n',
        encoding="utf-8",
    )
    return folder


def check_step(workdir: Path, kind: str, rows: int, repeat: int) -> Step:
    """One file checked against its floor."""
    data, scen = (clean_submission if kind == "clean" else dirty_submission)(workdir, rows)
    report = workdir / f"report-{kind}-{rows}.json"
    contract = bench_contract(workdir, rows)
    cmd = milepost(
        "check", str(data), str(scen), "--contract", str(contract), "--format", "json", "--output", str(report)
    )
    jobs, floors = alternate(cmd, python("-c", READ_FLOOR, str(data)), repeat)
    summary = json.loads(report.read_text(encoding="utf-8"))["summary"]
    clean_target, dirty_target, memory = SIZES.get(rows, (3.0, 6.0, None))
    findings = summary["errors"] + summary["warnings"] + summary["notes"]
    return ratio_step(
        f"check, {kind} ({findings:,} findings)",
        int(summary["rows"]),
        jobs,
        floors,
        READ_FLOOR_LABEL,
        clean_target if kind == "clean" else dirty_target,
        memory,
        {"errors": summary["errors"], "usable_rows": summary["usable_rows"]},
    )


def bound_step(workdir: Path, rows: int, repeat: int, rows_in_file: int) -> Step:
    """DuckDB alone storing the clean file as a table and grouping it once, against the read floor: the part of
    the check's ratio that no change of the check's own statements can remove (no target: a bound, not a job)."""
    data, _ = clean_submission(workdir, rows)
    jobs, floors = alternate(
        python("-c", STORE_AND_GROUP, str(data), str(memory_mb())), python("-c", READ_FLOOR, str(data)), repeat
    )
    return ratio_step(
        "lower bound of any check reading the rows twice: DuckDB storing the clean file as a table and grouping "
        f"it by its keys once ({memory_mb()} MB budget)",
        rows_in_file,
        jobs,
        floors,
        READ_FLOOR_LABEL,
        None,
    )


def run(workdir: Path, full: bool = False, repeat: int = 3, rows: int | None = None) -> list[Step]:
    """Clean and dirty at 2M rows (or `rows`), and the lower bound of a clean check; with `full`, at 10M too."""
    sizes = [rows] if rows else ([2_000_000, 10_000_000] if full else [2_000_000])
    steps = []
    for n in sizes:
        clean, dirty = (check_step(workdir, kind, n, repeat) for kind in ("clean", "dirty"))
        steps += [clean, dirty, bound_step(workdir, n, repeat, clean.rows)]
    return steps


def timed(cmd: list[str], repeat: int = 3) -> dict[str, Any]:
    """Median wall time, largest peak RSS (MB) and last exit code of `repeat` fresh runs (the bombs section)."""
    import statistics

    from milepost.validate.bench.timing import run_once

    runs = [run_once(cmd, ok=(0, 1, 2)) for _ in range(repeat)]
    return {
        "seconds": statistics.median(r.seconds for r in runs),
        "peak_mb": max(r.peak_mb for r in runs),
        "exit": runs[-1].exit,
    }
