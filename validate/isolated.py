"""A check run in a child process with a memory and time budget, for callers that must survive any upload.

The dashboard's Self-check runs every upload through `check_in_child`: the child sets its own address-space limit
(RLIMIT_AS) before it reads anything and DuckDB's memory limit below it, and the parent kills it when the time
budget is spent. Whatever happens in the child (a limit, a crash, a kill), the parent gets a `ChildCheck` with
the findings (or one finding saying which budget ran out), and the files the child wrote stay in `out_dir` for
the caller to remove.

    python -m milepost.validate.isolated OUT_DIR CONTRACT_DIR MEMORY_BYTES FILE...   (the child's side)
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from milepost.validate.cells import one_line

DEFAULT_MEMORY_MB = 2048
DEFAULT_SECONDS = 120
ENV_MEMORY = "MILEPOST_SELFCHECK_MEMORY_MB"
ENV_SECONDS = "MILEPOST_SELFCHECK_SECONDS"


def budget() -> tuple[int, float]:
    """(memory in bytes, seconds) for a child check: from the environment, else the defaults."""
    mb = int(os.environ.get(ENV_MEMORY) or DEFAULT_MEMORY_MB)
    seconds = float(os.environ.get(ENV_SECONDS) or DEFAULT_SECONDS)
    return mb << 20, seconds


@dataclass
class ChildCheck:
    """What a child check left: its summary, the path of its findings (Parquet), its JSON and XLSX reports, or
    `failure`: why the child did not finish (out of memory or time, a crash), which `findings` then holds."""

    summary: dict[str, Any] = field(default_factory=dict)
    findings_path: Path | None = None
    json_path: Path | None = None
    xlsx_path: Path | None = None
    failure: str | None = None


def check_in_child(
    paths: list[Path], contract_dir: Path, out_dir: Path, memory_bytes: int | None = None, seconds: float | None = None
) -> ChildCheck:
    """Check `paths` against the contract folder in a fresh process within the budget (default: `budget()`)."""
    default_memory, default_seconds = budget()
    memory_bytes = memory_bytes or default_memory
    seconds = seconds or default_seconds
    out_dir.mkdir(parents=True, exist_ok=True)
    cmd = [sys.executable, "-m", "milepost.validate.isolated", str(out_dir), str(contract_dir), str(memory_bytes)]
    # A session of its own, so a kill reaches DuckDB's threads and anything the child started.
    proc = subprocess.Popen(  # noqa: S603 - our own interpreter and module, paths as separate arguments
        [*cmd, *map(str, paths)],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        start_new_session=True,
        # Thread pools reserve address space per thread (OpenBLAS through numpy, glibc's malloc arenas): with a
        # budget on address space, one thread each leaves the budget to the data.
        env={**os.environ, "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MALLOC_ARENA_MAX": "2"},
    )
    try:
        _, err = proc.communicate(timeout=seconds)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        return ChildCheck(
            failure=f"the check took longer than its time budget of {seconds:g} s and was stopped "
            f"(${ENV_SECONDS} raises it)"
        )
    lines = err.decode("utf-8", "replace").strip().splitlines() if err else []
    tail = lines[-1:]
    if proc.returncode != 0 or not (out_dir / "summary.json").exists():
        # DuckDB's out-of-memory error ends with several lines of advice after the one that says what happened
        text = " ".join(lines[-20:]).lower()
        if proc.returncode in (-signal.SIGKILL, -signal.SIGSEGV) or any(
            w in text for w in ("memoryerror", "out of memory", "cannot allocate", "memory allocation")
        ):
            why = f"the check needed more than its memory budget of {memory_bytes >> 20:,} MB (${ENV_MEMORY} raises it)"
        else:
            # the child's last line may quote a cell or a path: shown on one line, escaped and shortened
            last = one_line(tail[0])[:300] if tail else ""
            why = f"the check stopped (exit {proc.returncode}{': ' + last if last else ''})"
        return ChildCheck(failure=why)
    xlsx = out_dir / "report.xlsx"
    return ChildCheck(
        summary=json.loads((out_dir / "summary.json").read_text(encoding="utf-8")),
        findings_path=out_dir / "findings.parquet",
        json_path=out_dir / "report.json",
        xlsx_path=xlsx if xlsx.exists() else None,
    )


def _child(argv: list[str]) -> int:
    import resource

    out_dir, contract_dir, memory = Path(argv[0]), Path(argv[1]), int(argv[2])
    # Before anything is read: beyond this the child gets MemoryError (or DuckDB an out-of-memory error), and
    # the parent reports the budget; the server's own memory is never at stake.
    resource.setrlimit(resource.RLIMIT_AS, (memory, memory))

    from milepost.schema.contract import load
    from milepost.validate import reports
    from milepost.validate.runner import run_check
    from milepost.validate.sql import literal
    from milepost.validate.store.database import connect_memory

    contract = load(contract_dir)
    con = connect_memory()
    # DuckDB allocates outside Python's heap: give it a share of the budget so it fails cleanly, not by signal.
    con.execute(f"SET memory_limit = '{max(64, (memory >> 20) // 3)}MB'")
    con.execute("SET threads = 2")
    result = run_check([Path(p) for p in argv[3:]], contract, con=con)
    (out_dir / "report.json").write_text(reports.to_json(result), encoding="utf-8")
    con.execute(f"COPY findings TO {literal(str(out_dir / 'findings.parquet'))} (FORMAT parquet)")
    summary = {
        "counts": result.counts,
        "rows": result.rows,
        "usable_rows": result.usable_rows,
        "truncated": result.truncated,
        "rule_counts": result.rule_counts,
    }
    try:
        reports.to_xlsx(result, out_dir / "report.xlsx")
    except (MemoryError, OSError) as e:
        summary["xlsx_failure"] = f"{type(e).__name__}: {e}"
        (out_dir / "report.xlsx").unlink(missing_ok=True)
    # written last: its presence tells the parent that the check finished
    (out_dir / "summary.json").write_text(json.dumps(summary), encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(_child(sys.argv[1:]))
