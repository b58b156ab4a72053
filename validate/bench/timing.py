"""Timing for `make bench`: fresh processes, medians alternating with a floor, peak memory, one row per step.

Every step of the table is a `Step`: the seconds of the job, the seconds of the floor it is compared with (measured
in the same run, on the same data, alternating with the job so that load from other processes on a shared machine
hits both), their ratio, the job's peak resident memory, and whether the target was met.
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

REPEATS = 3

# Columns of a long-format CSV and the types DuckDB is told, so the floor parses every field as what it is.
LONG_TYPES = (
    "{'model': 'VARCHAR', 'scenario': 'VARCHAR', 'region': 'VARCHAR', 'variable': 'VARCHAR', 'unit': 'VARCHAR', "
    "'year': 'INTEGER', 'value': 'DOUBLE'}"
)
# A bare count(*) may skip parsing fields, so the floor aggregates every column: it has to read each cell.
# ignore_errors: a dirty file's cells that are not numbers are parsed and their rows skipped, not a failed read.
READ_ALL = (
    "SELECT count(*), min(model), min(scenario), min(region), min(variable), min(unit), sum(year), sum(value) "  # noqa: S608 - constants
    f"FROM read_csv(?, header = true, columns = {LONG_TYPES}, ignore_errors = true)"
)
READ_FLOOR = f'import duckdb, sys; duckdb.connect().execute("{READ_ALL}", [sys.argv[1]]).fetchall()'
READ_FLOOR_LABEL = "DuckDB read_csv of the file, every column aggregated, fresh process"
# The least any check does that reads the rows more than once: DuckDB alone, in the check's memory budget, storing
# the typed file as a table and grouping it by its key columns once (every check groups at least once: key
# combinations, repeats, sums). Not a floor but a lower bound of the job, shown to say how much of a ratio no
# change of the check's own statements can remove.
STORE_AND_GROUP = (
    "import duckdb, sys; "  # noqa: S608 - constants; the path and budget are argv of the bench's own child
    "con = duckdb.connect(config={'memory_limit': sys.argv[2] + 'MB'}); "
    'con.execute("CREATE TEMP TABLE t AS SELECT * FROM read_csv(?, header = true, '
    f'columns = {LONG_TYPES}, ignore_errors = true)", [sys.argv[1]]); '
    "con.execute('SELECT model, scenario, region, variable, unit, count(*) FROM t GROUP BY ALL').fetchall()"
)
LOAD_FLOOR = (
    "import duckdb, sys; con = duckdb.connect(sys.argv[2]); "
    "con.execute('CREATE TABLE data AS SELECT * FROM read_csv(?, header = true)', [sys.argv[1]]); con.close()"
)
LOAD_FLOOR_LABEL = "DuckDB CREATE TABLE AS read_csv into a new file, fresh process"


@dataclass
class Run:
    """One fresh process: wall seconds, peak resident memory (MiB), exit code."""

    seconds: float
    peak_mb: float
    exit: int


# Linux keeps a process's peak resident memory across exec, and a child made by fork (or vfork) starts with its
# parent's: a job started straight from this process would report at least the bench's own size (seen: every bomb
# "peaked" at the 1,006 MiB the bench had grown to). A small launcher process starts the job and measures it, so the
# peak is the job's alone; it times the job too, so its own start-up is not counted.
_LAUNCHER = (
    "import os, subprocess, sys, time; "
    "t = time.perf_counter(); p = subprocess.Popen(sys.argv[2:]); _, s, u = os.wait4(p.pid, 0); "
    "d = time.perf_counter() - t; "
    "open(sys.argv[1], 'w').write(f'{d} {u.ru_maxrss} {os.waitstatus_to_exitcode(s)}')"
)


def run_once(
    cmd: Sequence[str],
    env: dict[str, str] | None = None,
    before: Callable[[], None] | None = None,
    stdout: Path | None = None,
    ok: tuple[int, ...] = (0,),
) -> Run:
    """Run `cmd` as a fresh process and measure it; `before` runs first, untimed; standard output goes to
    `stdout` (a file) or nowhere, standard error to a file shown when the command fails."""
    if before is not None:
        before()
    with (
        tempfile.TemporaryFile() as err,
        open(stdout or os.devnull, "wb") as out,
        tempfile.TemporaryDirectory() as tmp,
    ):
        measured = Path(tmp) / "run"
        launcher = [sys.executable, "-c", _LAUNCHER, str(measured), *cmd]
        subprocess.run(launcher, stdout=out, stderr=err, env=env, check=False)  # noqa: S603 - the bench's own argv lists, no shell
        err.seek(0)
        text = err.read().decode(errors="replace")
        if not measured.exists():
            raise RuntimeError(f"{' '.join(cmd[:4])} … did not start: {text[-800:]}")
        seconds, maxrss_kib, code = measured.read_text().split()
    if int(code) not in ok:
        raise RuntimeError(f"{' '.join(cmd[:4])} … exited {code}: {text[-800:]}")
    return Run(float(seconds), int(maxrss_kib) / 1024, int(code))  # ru_maxrss is in KiB on Linux


def alternate(
    job: Sequence[str],
    floor: Sequence[str],
    repeat: int = REPEATS,
    *,
    before_job: Callable[[], None] | None = None,
    before_floor: Callable[[], None] | None = None,
    job_stdout: Path | None = None,
) -> tuple[list[Run], list[Run]]:
    """`repeat` runs of the floor and the job, alternating (floor first, so the file is in the page cache for both)."""
    jobs, floors = [], []
    for _ in range(repeat):
        floors.append(run_once(floor, before=before_floor))
        # 1 = findings at the fail level, which a dirty file is meant to have
        jobs.append(run_once(job, before=before_job, stdout=job_stdout, ok=(0, 1)))
    return jobs, floors


@dataclass
class Step:
    """One row of the bench table."""

    step: str
    rows: int
    seconds: float
    floor_seconds: float | None
    floor: str
    target: str
    met: bool | None
    peak_mb: float | None = None
    ratio: float | None = None
    runs: list[float] = field(default_factory=list)
    floor_runs: list[float] = field(default_factory=list)
    detail: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """Plain data for results.json (seconds rounded to milliseconds)."""
        d = asdict(self)
        for k in ("seconds", "floor_seconds", "ratio"):
            if d[k] is not None:
                d[k] = round(d[k], 3)
        if d["peak_mb"] is not None:
            d["peak_mb"] = round(d["peak_mb"], 1)
        d["runs"] = [round(x, 3) for x in d["runs"]]
        d["floor_runs"] = [round(x, 3) for x in d["floor_runs"]]
        return d


def ratio_step(
    name: str,
    rows: int,
    jobs: list[Run],
    floors: list[Run],
    floor_label: str,
    max_ratio: float | None,
    max_peak_mb: float | None = None,
    detail: dict[str, Any] | None = None,
) -> Step:
    """A step compared with its floor: median against median, the largest peak of the job's runs."""
    seconds = statistics.median(r.seconds for r in jobs)
    floor = statistics.median(r.seconds for r in floors)
    peak = max(r.peak_mb for r in jobs)
    ratio = seconds / floor
    targets, met = [], []
    if max_ratio is not None:
        targets.append(f"≤ {max_ratio:g}x")
        met.append(ratio <= max_ratio)
    if max_peak_mb is not None:
        targets.append(f"≤ {max_peak_mb:g} MiB")
        met.append(peak <= max_peak_mb)
    return Step(
        step=name,
        rows=rows,
        seconds=seconds,
        floor_seconds=floor,
        floor=floor_label,
        target=", ".join(targets) or "-",
        met=all(met) if met else None,
        peak_mb=peak,
        ratio=ratio,
        runs=[r.seconds for r in jobs],
        floor_runs=[r.seconds for r in floors],
        detail=detail or {},
    )


def python(*args: str) -> list[str]:
    """A fresh interpreter of this environment."""
    return [sys.executable, *args]


def milepost(*args: str) -> list[str]:
    """The `milepost` command, as a user runs it (a fresh process, start-up included)."""
    return python("-m", "milepost.validate", *args)


COLUMNS = ("step", "rows", "seconds", "floor", "ratio", "peak MiB", "target", "met")


def table(steps: Sequence[Step]) -> str:
    """The one bench table, as Markdown (so README can show it as printed)."""

    def cells(s: Step) -> list[str]:
        met = "-" if s.met is None else ("yes" if s.met else "NO")
        return [
            s.step,
            f"{s.rows:,}" if s.rows else "-",
            f"{s.seconds:.2f}",
            f"{s.floor_seconds:.2f}" if s.floor_seconds is not None else "-",
            f"{s.ratio:.2f}x" if s.ratio is not None else "-",
            f"{s.peak_mb:.0f}" if s.peak_mb is not None else "-",
            s.target,
            met,
        ]

    rows = [list(COLUMNS), *(cells(s) for s in steps)]
    widths = [max(len(r[i]) for r in rows) for i in range(len(COLUMNS))]
    lines = ["| " + " | ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) + " |" for r in rows]
    lines.insert(1, "|" + "|".join("-" * (w + 2) for w in widths) + "|")
    return "\n".join(lines)
