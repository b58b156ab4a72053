"""Writing a harmonisation out: the harmonised submission in the long format and the table of methods."""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import duckdb

from milepost.validate.cells import safe_row
from milepost.validate.errors import OutputError, UsageError, one_line
from milepost.validate.harmonise.notes import METHOD_COLUMNS
from milepost.validate.outputs import MARK, building, check_target, ours, register_csv_header, replacing, save_workbook
from milepost.validate.sql import literal

FORMATS = {".csv": "csv", ".parquet": "parquet", ".xlsx": "xlsx"}
LONG_COLUMNS = ("model", "scenario", "region", "variable", "unit", "year", "value")
register_csv_header(METHOD_COLUMNS)  # a harmonised CSV is a submission (its header is not a mark of ours)
CAUTION = "Harmonised values are model projections aligned with a historical reference, not forecasts."


def file_format(path: Path) -> str:
    """csv, parquet or xlsx, from the file name; anything else is a usage error."""
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise UsageError(f"{path}: the file name must end in {', '.join(FORMATS)} (it picks the format)")
    if not path.parent.is_dir():
        raise UsageError(f"the folder of {path} does not exist")
    return fmt


def default_methods_path(output: Path) -> Path:
    """Where the methods table goes when no path is given: beside the output, `<stem>-methods.<same suffix>`."""
    return output.with_name(f"{output.stem}-methods{output.suffix}")


def _query(table: str) -> str:
    if table == "harmonised":
        cols = ", ".join(f"{c}::VARCHAR AS {c}" if c not in ("year", "value") else c for c in LONG_COLUMNS)
        return f"SELECT {cols} FROM harmonised ORDER BY model, scenario, region, variable, year"  # noqa: S608 - fragments of this package
    if table == "harmonise_methods":
        return f"SELECT {', '.join(METHOD_COLUMNS)} FROM harmonise_methods ORDER BY model, scenario, region, variable"  # noqa: S608 - fragments of this package
    raise ValueError(f"not a harmonisation table: {table}")


def earlier_output(output: Path, methods: Path) -> bool:
    """Whether `output` is the harmonised file of an earlier run: its header is the long format and the methods
    table written with it lies beside it (a harmonised CSV alone cannot be told from a submission)."""
    if output.suffix.lower() != ".csv" or not (output.is_file() and methods.is_file() and ours(methods)):
        return False
    with output.open(encoding="utf-8", errors="replace") as f:
        return f.readline().strip() == ",".join(LONG_COLUMNS)


def write_table(
    con: duckdb.DuckDBPyConnection,
    table: str,
    path: Path,
    *,
    inputs: Iterable[str | Path] = (),
    force: bool = False,
) -> int:
    """Write `harmonised` or `harmonise_methods` to `path` (format from its suffix); returns the rows written.

    Never over an input, a database or (without `force`) a file Milepost did not write; the file is written
    beside its target and renamed into place, so a failed write never leaves half a file; a write that fails
    (no space, no permission) is an OutputError. The harmonised CSV stays a submission file, exact to the
    character (formula-like text is protected in XLSX only, where a cell can be marked as text).
    """
    path = Path(path)
    fmt = file_format(path)
    check_target(path, inputs=inputs, force=force)
    sql = _query(table)
    if fmt == "xlsx":  # save_workbook writes beside the target and renames
        return _write_xlsx(con, sql, path, "data" if table == "harmonised" else "methods")
    with replacing(path) as tmp:
        parquet = f"FORMAT parquet, COMPRESSION zstd, KV_METADATA {{'{MARK}': 'harmonised'}}"
        options = "FORMAT csv, HEADER" if fmt == "csv" else parquet
        try:
            rows = con.execute(f"COPY ({sql}) TO {literal(str(tmp))} ({options}, USE_TMP_FILE false)").fetchall()
        except duckdb.IOException as e:
            raise OutputError(f"cannot write {path}: {one_line(e)}") from None
        return int(rows[0][0])


def _write_xlsx(con: duckdb.DuckDBPyConnection, sql: str, path: Path, sheet: str) -> int:
    from openpyxl import Workbook

    wb = Workbook(write_only=True)
    with building(wb, path):
        ws = wb.create_sheet(sheet)
        cur = con.execute(sql)
        ws.append([d[0] for d in cur.description])
        ws.freeze_panes = "A2"
        n = 0
        while chunk := cur.fetchmany(10_000):
            for row in chunk:
                ws.append(safe_row(ws, list(row)))
            n += len(chunk)
        about = wb.create_sheet("about")
        about.append(["note"])
        about.append([CAUTION])
        save_workbook(wb, path, "harmonised")
    return n
