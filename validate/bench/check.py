"""`make bench`: speed and memory of the main jobs, as ratios to a floor measured in the same run.

Every step runs as a fresh process (as a user would run it), timed as the median of a few runs, with its peak
resident memory. The floor is DuckDB's own typed `read_csv` of the same file, also in a fresh Python process,
so interpreter start-up is on both sides of the ratio.
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[2]
DEMO_CONTRACT = ROOT / "example_db" / "contract"
ROWS = 2_000_000
FLOOR = (
    'import duckdb, sys; duckdb.connect().execute("SELECT count(*) FROM read_csv(?, header = true, columns = '
    "{'model': 'VARCHAR', 'scenario': 'VARCHAR', 'region': 'VARCHAR', 'variable': 'VARCHAR', 'unit': 'VARCHAR', "
    "'year': 'INTEGER', 'value': 'DOUBLE'})\", [sys.argv[1]]).fetchall()"
)


def timed(cmd: list[str], repeat: int = 3, env: dict[str, str] | None = None) -> dict[str, Any]:
    """Median wall time and the largest peak RSS of `repeat` runs of a command."""
    times, peaks, code = [], [], 0
    for _ in range(repeat):
        t = time.perf_counter()
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)  # noqa: S603 - the bench's own argv lists, no shell
        _, status, usage = os.wait4(proc.pid, 0)
        times.append(time.perf_counter() - t)
        peaks.append(usage.ru_maxrss / 1024)  # kB -> MB on Linux
        code = os.waitstatus_to_exitcode(status)
    return {"seconds": statistics.median(times), "peak_mb": max(peaks), "exit": code}


def clean_file(workdir: Path, rows: int = ROWS) -> Path:
    """A consistent submission of about `rows` rows (the demo generator's many-scenario ensemble, one CSV)."""
    import duckdb

    from milepost.example_db.generate import write_many_scenarios
    from milepost.validate.sql import literal, literal_list

    out = workdir / f"clean-{rows}.csv"
    if out.exists():
        return out
    per_scenario = 6 * 32 * 17  # regions x variables x years of the demo contract
    parts = write_many_scenarios(workdir / "clean-parts", n_scenarios=max(1, rows // per_scenario), fmt="csv")
    data = [str(p) for p in parts if "scenarios" not in p.name]
    duckdb.connect().execute(
        f"COPY (SELECT * FROM read_csv({literal_list(data)}, header = true, all_varchar = true)) "  # noqa: S608 - paths via validate.sql
        f"TO {literal(str(out))} (HEADER)"
    )
    return out


def dirty_file(workdir: Path, rows: int = ROWS) -> Path:
    """A submission whose values do not add up (hundreds of thousands of findings)."""
    from milepost.example_db.generate import write_synthetic

    out = workdir / f"dirty-{rows}.csv"
    if not out.exists():
        write_synthetic(out, rows)
    return out


def bench_check(workdir: Path, repeat: int = 3) -> list[dict[str, Any]]:
    """`milepost check` on a clean and a dirty 2M-row file, against DuckDB's read_csv of the same file."""
    results = []
    for kind, path in (("clean", clean_file(workdir)), ("dirty", dirty_file(workdir))):
        floor = timed([sys.executable, "-c", FLOOR, str(path)], repeat)
        check = timed(
            [
                sys.executable,
                "-m",
                "milepost.validate",
                "check",
                str(path),
                "--contract",
                str(DEMO_CONTRACT),
                "--format",
                "json",
                "--output",
                str(workdir / f"report-{kind}.json"),
            ],
            repeat,
        )
        report = json.loads((workdir / f"report-{kind}.json").read_text())
        results.append(
            {
                "step": f"milepost check, {kind} {report['summary']['rows']:,} rows "
                f"({report['summary']['errors']:,} errors)",
                "seconds": check["seconds"],
                "floor_seconds": floor["seconds"],
                "ratio": check["seconds"] / floor["seconds"],
                "peak_mb": check["peak_mb"],
                "floor": "DuckDB read_csv count(*) of the same file, fresh process",
                "target": 3.0 if kind == "clean" else None,
            }
        )
    return results


SECTIONS = {
    "check": "milepost.validate.bench.check:bench_check",
    "ingest": "milepost.validate.bench.ingest:run",
    "dashboard": "milepost.validate.bench.dashboard:run",
    "bombs": "milepost.validate.bench.bombs:run",
}


def _load(spec: str) -> Any:
    module, name = spec.split(":")
    return getattr(importlib.import_module(module), name)


def describe(r: dict[str, Any]) -> str:
    """One line per result; the sections name their floor differently (floor, DuckDB load, full scan)."""
    step = r.get("step") or r.get("name", "?")
    floor = r.get("floor_seconds") or r.get("duckdb_seconds") or r.get("baseline_seconds")
    label = r.get("floor") or r.get("baseline") or ("DuckDB CREATE TABLE AS read_csv" if "duckdb_seconds" in r else "")
    target = r.get("target") or r.get("limit")
    text = f"{step}: {r['seconds']:.2f} s"
    if floor and r.get("ratio") is not None:
        text += f" = {r['ratio']:.2f}x floor ({floor:.2f} s, {label})"
    if target:
        text += f" (target ≤ {target:g}x)"
    if r.get("peak_mb"):
        text += f", peak {r['peak_mb']:.0f} MB"
    return text


def main(argv: list[str] | None = None) -> int:
    """Run the sections, print one line per step, and write bench-out/results.json."""
    ap = argparse.ArgumentParser(prog="python -m milepost.validate.bench", description=__doc__)
    ap.add_argument("--workdir", type=Path, default=ROOT / "bench-out")
    ap.add_argument("--only", choices=sorted(SECTIONS), action="append")
    args = ap.parse_args(argv)
    args.workdir.mkdir(parents=True, exist_ok=True)
    rows: list[dict[str, Any]] = []
    for name in args.only or list(SECTIONS):
        print(f"[{name}] running …", file=sys.stderr, flush=True)
        for r in _load(SECTIONS[name])(args.workdir):
            r.setdefault("section", name)
            rows.append(r)
            print(describe(r), flush=True)
    (args.workdir / "results.json").write_text(json.dumps(rows, indent=2))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
