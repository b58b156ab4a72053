"""Writing a harmonisation out: the harmonised submission in the long format and the table of methods."""

from __future__ import annotations

import os
from pathlib import Path

import duckdb

from milepost.validate.errors import UsageError
from milepost.validate.harmonise.notes import METHOD_COLUMNS
from milepost.validate.outputs import writing
from milepost.validate.sql import literal

FORMATS = {".csv": "csv", ".parquet": "parquet", ".xlsx": "xlsx"}
LONG_COLUMNS = ("model", "scenario", "region", "variable", "unit", "year", "value")
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


def write_table(con: duckdb.DuckDBPyConnection, table: str, path: Path) -> int:
    """Write `harmonised` or `harmonise_methods` to `path` (format from its suffix); returns the rows written.

    The file is written beside its target and renamed into place, so a failed write never leaves half a file;
    a write that fails (no space, no permission) is an OutputError.
    """
    path = Path(path)
    fmt = file_format(path)
    tmp = path.with_name(f"{path.name}.tmp-{os.getpid()}")
    sql = _query(table)
    try:
        with writing(path):
            if fmt == "xlsx":
                n = _write_xlsx(con, sql, tmp, "data" if table == "harmonised" else "methods")
            else:
                options = "FORMAT csv, HEADER" if fmt == "csv" else "FORMAT parquet, COMPRESSION zstd"
                n = int(con.execute(f"COPY ({sql}) TO {literal(str(tmp))} ({options})").fetchall()[0][0])
            os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return n


def _write_xlsx(con: duckdb.DuckDBPyConnection, sql: str, tmp: Path, sheet: str) -> int:
    import pandas as pd  # only here: pandas costs a second of start-up the other formats do not need

    df = con.execute(sql).df()
    with pd.ExcelWriter(tmp, engine="openpyxl") as xl:
        df.to_excel(xl, sheet_name=sheet, index=False)
        pd.DataFrame({"note": [CAUTION]}).to_excel(xl, sheet_name="about", index=False)
    return len(df)
