"""A check run in a child process with a memory and time budget, for callers that must survive any upload.

The dashboard's Self-check runs every upload through `check_in_child`: the child sets its own address-space limit
(RLIMIT_AS) before it reads anything and DuckDB's memory limit below it, and the parent kills it when the time
budget is spent. Whatever happens in the child (a limit, a crash, a kill), the parent gets a `ChildCheck` with
the findings, or with `failure` saying what stopped it (`failure_finding`: one `check-aborted` finding). The
files the child wrote, DuckDB's spill files among them, stay in `out_dir` for the caller to remove.

    python -m milepost.validate.isolated OUT_DIR CONTRACT_DIR MEMORY_BYTES SPILL_BYTES FILE...   (the child's side)
"""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import threading
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any

from milepost.validate.cells import one_line
from milepost.validate.errors import UsageError

DEFAULT_MEMORY_MB = 2048
DEFAULT_SECONDS = 120
DEFAULT_SPILL_MB = 4096
ENV_MEMORY = "MILEPOST_SELFCHECK_MEMORY_MB"
ENV_SECONDS = "MILEPOST_SELFCHECK_SECONDS"
ENV_SPILL = "MILEPOST_SELFCHECK_SPILL_MB"
STDERR_TAIL_BYTES = 64 << 10  # of the child's stderr, enough for a traceback and DuckDB's advice
ABORTED_RULE = "check-aborted"


def budget() -> tuple[int, float]:
    """(memory in bytes, seconds) for a child check: from the environment, else the defaults. A setting that is
    not a positive number raises UsageError naming it."""
    mb = _setting(ENV_MEMORY, DEFAULT_MEMORY_MB, int, "a whole number of megabytes")
    seconds = _setting(ENV_SECONDS, DEFAULT_SECONDS, float, "a number of seconds")
    return int(mb) << 20, float(seconds)


def spill_budget() -> int:
    """Bytes of disk a child check may spill to (DuckDB's max_temp_directory_size; without it, 90 % of the free
    disk): from the environment, else the default."""
    return int(_setting(ENV_SPILL, DEFAULT_SPILL_MB, int, "a whole number of megabytes")) << 20


def _setting(name: str, default: float, kind: type[int] | type[float], what: str) -> float:
    raw = os.environ.get(name, "").strip()
    if not raw:
        return default
    try:
        value: float = kind(raw)
    except ValueError:
        value = -1.0
    if not math.isfinite(value) or value <= 0:
        raise UsageError(f"{name}={one_line(raw)!r} is not {what} above 0")
    return value


@dataclass
class ChildCheck:
    """What a child check left: its summary, the path of its findings (Parquet), its JSON and XLSX reports, or
    `failure`: why the child did not finish (out of memory or time, a crash), which `findings` then holds."""

    summary: dict[str, Any] = field(default_factory=dict)
    findings_path: Path | None = None
    json_path: Path | None = None
    xlsx_path: Path | None = None
    failure: str | None = None
    failure_kind: str | None = None  # "memory", "time", "crash" or "setting" (the server's budget setting)


def check_in_child(
    paths: list[Path],
    contract_dir: Path,
    out_dir: Path,
    memory_bytes: int | None = None,
    seconds: float | None = None,
    spill_bytes: int | None = None,
) -> ChildCheck:
    """Check `paths` against the contract folder in a fresh process within the budget (default: `budget()` and
    `spill_budget()`)."""
    try:
        default_memory, default_seconds = budget()
        spill = spill_bytes or spill_budget()
    except UsageError as e:  # the server's setting, not the upload: said as such, and nothing is run
        return ChildCheck(failure=f"the dashboard's budget setting is wrong: {e}", failure_kind="setting")
    memory_bytes = memory_bytes or default_memory
    seconds = seconds or default_seconds
    out_dir.mkdir(parents=True, exist_ok=True)
    cmd = [
        *(sys.executable, "-m", "milepost.validate.isolated"),
        *(str(out_dir), str(contract_dir), str(memory_bytes), str(spill)),
    ]
    # Thread pools reserve address space per thread (OpenBLAS through numpy, glibc's malloc arenas): with a
    # budget on address space, one thread each leaves the budget to the data. The child sets its own DuckDB
    # budget from its share, so the command line's memory setting is not passed on (a bad one would fail it).
    from milepost.validate.memory import ENV_MEMORY as MAIN_MEMORY

    env = {k: v for k, v in os.environ.items() if k != MAIN_MEMORY}
    env |= {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MALLOC_ARENA_MAX": "2"}
    ran = run_child([*cmd, *map(str, paths)], seconds, env)
    if ran.timed_out:
        return ChildCheck(
            failure=f"the check took longer than its time budget of {seconds:g} s and was stopped "
            f"(${ENV_SECONDS} raises it)",
            failure_kind="time",
        )
    lines = ran.stderr_tail.decode("utf-8", "replace").strip().splitlines()
    if ran.returncode != 0 or not (out_dir / "summary.json").exists():
        return _failed(ran.returncode, lines, memory_bytes, spill)
    xlsx = out_dir / "report.xlsx"
    return ChildCheck(
        summary=json.loads((out_dir / "summary.json").read_text(encoding="utf-8")),
        findings_path=out_dir / "findings.parquet",
        json_path=out_dir / "report.json",
        xlsx_path=xlsx if xlsx.exists() else None,
    )


@dataclass(frozen=True)
class Ran:
    """How a child process ended: its exit code (negative: the signal), the end of its stderr, and whether the
    time budget stopped it."""

    returncode: int
    stderr_tail: bytes
    timed_out: bool


def run_child(cmd: list[str], seconds: float, env: dict[str, str], keep: int = STDERR_TAIL_BYTES) -> Ran:
    """Run `cmd` in a session of its own for at most `seconds`, keeping only the last `keep` bytes of its stderr."""
    # A session of its own, so a kill reaches DuckDB's threads and anything the child started.
    proc = subprocess.Popen(  # noqa: S603 - callers pass our own interpreter and module, paths as separate arguments
        cmd,
        stdin=subprocess.DEVNULL,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        start_new_session=True,
        env=env,
    )
    tail = bytearray()
    # drained beside the wait, so a chatty child neither blocks on a full pipe nor fills the parent's memory
    reader = threading.Thread(target=_drain, args=(proc.stderr, tail, keep), daemon=True)
    reader.start()
    timed_out = False
    try:
        proc.wait(timeout=seconds)
    except subprocess.TimeoutExpired:
        timed_out = True
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    # a grandchild that left the session could hold the pipe open: do not wait for it forever
    reader.join(timeout=5)
    return Ran(proc.returncode, bytes(tail[-keep:]), timed_out)


def _drain(stream: IO[bytes], tail: bytearray, keep: int) -> None:
    with stream:
        while chunk := stream.read(1 << 16):
            tail += chunk
            if len(tail) > 2 * keep:
                del tail[:-keep]


def _failed(returncode: int, lines: list[str], memory_bytes: int, spill_bytes: int) -> ChildCheck:
    """Why the child ended without its results, from its exit code and the end of its stderr."""
    budget_words = f"its memory budget of {memory_bytes >> 20:,} MB (${ENV_MEMORY} raises it)"
    # DuckDB's out-of-memory error ends with several lines of advice after the one that says what happened
    text = " ".join(lines[-20:]).lower()
    if "max_temp_directory_size" in text:  # DuckDB says out of memory, but it is the disk budget that ran out
        return ChildCheck(
            failure=f"the check needed more than its disk budget of {spill_bytes >> 20:,} MB (${ENV_SPILL} raises "
            f"it) for the data beyond {budget_words}",
            failure_kind="memory",
        )
    if any(w in text for w in ("memoryerror", "out of memory", "cannot allocate", "memory allocation")):
        return ChildCheck(failure=f"the check needed more than {budget_words}", failure_kind="memory")
    if returncode in (-signal.SIGKILL, -signal.SIGSEGV):
        # under an address-space limit a failed allocation in C code ends in SIGSEGV, and the kernel's
        # out-of-memory killer sends SIGKILL: both are most likely the budget, but the message says what was seen
        name = signal.Signals(-returncode).name
        return ChildCheck(
            failure=f"the check was killed by {name}, most likely for needing more than {budget_words}",
            failure_kind="memory",
        )
    # the child's last line may quote a cell or a path: shown on one line, escaped and shortened
    last = one_line(lines[-1])[:300] if lines else ""
    if returncode < 0:
        how = f"killed by signal {signal.Signals(-returncode).name}"
    elif returncode:
        how = f"exit code {returncode}"
    else:
        how = "exit code 0 without its results"
    return ChildCheck(failure=f"the check crashed ({how}{': ' + last if last else ''})", failure_kind="crash")


_HINTS = {
    "memory": "Split the submission into smaller files, or check it with `milepost check` on your own machine.",
    "time": "Split the submission into smaller files, or check it with `milepost check` on your own machine.",
    "crash": "Check the files with `milepost check` on your own machine; if that fails too, report the message.",
    "setting": f"Whoever runs the dashboard sets ${ENV_MEMORY}, ${ENV_SECONDS} and ${ENV_SPILL}; meanwhile "
    "`milepost check` checks the files on your own machine.",
}


def failure_finding(child: ChildCheck, names: list[str]) -> dict[str, Any]:
    """The one finding that stands for a child that did not finish (rule `check-aborted`), for files `names`."""
    return {
        "rule": ABORTED_RULE,
        "severity": "error",
        "path": ", ".join(names),
        "message": child.failure,
        "hint": _HINTS.get(child.failure_kind or "crash", _HINTS["crash"]),
    }


def _child(argv: list[str]) -> int:
    import resource

    out_dir, contract_dir, memory, spill = Path(argv[0]), Path(argv[1]), int(argv[2]), int(argv[3])
    # Before anything is read: beyond this the child gets MemoryError (or DuckDB an out-of-memory error), and
    # the parent reports the budget; the server's own memory is never at stake.
    resource.setrlimit(resource.RLIMIT_AS, (memory, memory))

    from milepost.schema.contract import load
    from milepost.validate import reports
    from milepost.validate.runner import run_check
    from milepost.validate.sql import literal
    from milepost.validate.store.database import connect_memory

    contract = load(contract_dir)
    # DuckDB allocates outside Python's heap: give it a share of the budget so it fails cleanly, not by signal.
    # Spills go into out_dir, which the caller removes: the process's own spill folder (validate/memory.py) is
    # removed at exit, which a child killed by its budget never reaches.
    con = connect_memory(max(64, (memory >> 20) // 3), out_dir / "duckdb-tmp")
    con.execute("SET threads = 2")
    con.execute(f"SET max_temp_directory_size = '{spill >> 20}MiB'")  # a server's disk is not the upload's to fill
    result = run_check([Path(p) for p in argv[4:]], contract, con=con)
    (out_dir / "report.json").write_text(reports.to_json(result), encoding="utf-8")
    con.execute(f"COPY findings TO {literal(str(out_dir / 'findings.parquet'))} (FORMAT parquet)")
    summary = {
        "counts": result.counts,
        "rows": result.rows,
        "usable_rows": result.usable_rows,
        "truncated": result.truncated,
        "rule_counts": result.rule_counts,
        "temp_directory": con.execute("SELECT current_setting('temp_directory')").fetchall()[0][0],
        "max_temp_directory_size": con.execute("SELECT current_setting('max_temp_directory_size')").fetchall()[0][0],
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
