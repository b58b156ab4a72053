"""DuckDB's memory budget and spill folder for every connection Milepost opens.

DuckDB takes up to 80 % of the machine's memory by default and spills to `.tmp` in the working directory. A
check of a 10M-row file then holds about 2 GiB, and a spill would write into whatever folder the user ran the
command from. Here each connection gets a budget (`MILEPOST_MEMORY_MB`, default 768 MB: with Python's own share
a check stays near 1 GiB however large the file) and a private spill folder under the system's temporary
folder, removed when the process ends. Past the budget DuckDB writes what it holds to that folder and goes on,
slower; it fails only when even that is not enough (a finding or one line, like any other error).
"""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile
from pathlib import Path

import duckdb

from milepost.validate.errors import UsageError

ENV_MEMORY = "MILEPOST_MEMORY_MB"
DEFAULT_MEMORY_MB = 768
MIN_MEMORY_MB = 64

_spill: list[Path] = []


def memory_mb() -> int:
    """The budget in MB: `MILEPOST_MEMORY_MB` when set, else the default."""
    raw = os.environ.get(ENV_MEMORY, "").strip()
    if not raw:
        return DEFAULT_MEMORY_MB
    try:
        mb = int(raw)
    except ValueError:
        raise UsageError(f"{ENV_MEMORY}={raw!r} is not a whole number of megabytes") from None
    if mb < MIN_MEMORY_MB:
        raise UsageError(f"{ENV_MEMORY}={mb} is below the smallest budget DuckDB can work in ({MIN_MEMORY_MB} MB)")
    return mb


def spill_folder() -> Path:
    """This process's private spill folder (created on first use, removed at exit)."""
    if not _spill:
        path = Path(tempfile.mkdtemp(prefix="milepost-spill-"))
        _spill.append(path)
        atexit.register(shutil.rmtree, path, True)
    return _spill[0]


def budget(
    con: duckdb.DuckDBPyConnection, mb: int | None = None, spill: Path | None = None
) -> duckdb.DuckDBPyConnection:
    """Give `con` the memory budget (`mb`, else `memory_mb()`) and a spill folder (`spill`, else this process's
    private one); returns `con`."""
    con.execute(f"SET memory_limit = '{int(mb or memory_mb())}MB'")
    con.execute("SET temp_directory = ?", [str(spill or spill_folder())])
    return con
