"""Readers: CSV/TSV, XLSX and Parquet submissions into DuckDB tables that remember each row's source line.

Every data file becomes one TEMP table `obs_<n>` with the long-format columns (cells kept as text where they are
not clean numbers, so a finding can quote them) and a `line` column: the physical CSV line (header = 1), the
XLSX sheet row, or the 1-based Parquet row. Scenario tables (model, scenario and attributes, no variable or
value) are read into pandas: they are small.
"""

from __future__ import annotations

import codecs
import csv
import hashlib
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import duckdb

from milepost.validate import wide as wide_table
from milepost.validate.errors import ReadError
from milepost.validate.sql import identifier, literal, literal_list

LONG_COLUMNS = ("model", "scenario", "region", "variable", "unit", "year", "value")
KEY_TEXT = ("model", "scenario", "region", "variable", "unit")
DELIMITERS = (",", ";", "\t", "|")
SAMPLE_BYTES = 1 << 20
# Cells that mean "no value" in common exports; they are reported as missing, not as malformed numbers.
MISSING_TOKENS = ("", "na", "n/a", "nan", "null", "none", "-", "--", "#n/a")


@dataclass
class InputFile:
    """One file given to a check: what it was recognised as, how it was read, and how many rows it had."""

    path: str
    sha256: str
    kind: str  # 'data' | 'scenarios' | 'unreadable'
    rows: int = 0
    table: str | None = None
    sheet: str | None = None
    columns: dict[str, str] = field(default_factory=dict)  # long-format name -> column name in the file
    extra_columns: list[str] = field(default_factory=list)
    missing_columns: list[str] = field(default_factory=list)
    error: str | None = None
    error_line: int | None = None
    notes: list[str] = field(default_factory=list)
    rejects: list[tuple[int, str]] = field(default_factory=list)  # (line, why) rows the CSV parser could not split
    scenarios: Any = None  # pandas DataFrame for a scenarios table
    wide: list[wide_table.YearColumn] = field(default_factory=list)  # year columns of a wide table, else []


def sha256_of(path: Path) -> str:
    """Hex sha256 of a file's bytes, read in chunks."""
    h = hashlib.sha256()
    with path.open("rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _match_columns(header: list[str]) -> tuple[dict[str, str], list[str]]:
    """Map long-format names to the file's own headers, ignoring case and surrounding/inner whitespace."""
    found: dict[str, str] = {}
    extra: list[str] = []
    for h in header:
        key = re.sub(r"\s+", "", str(h)).lower()
        if key in LONG_COLUMNS and key not in found:
            found[key] = h
        else:
            extra.append(str(h))
    return found, extra


def _is_scenarios_table(found: dict[str, str]) -> bool:
    return "model" in found and "scenario" in found and "variable" not in found and "value" not in found


def _typed_select(cols: dict[str, str], src: str, line: str, decimal_comma: bool = False) -> str:
    """SELECT turning raw text cells into typed year/value columns, keeping the text only where it is not clean."""
    key = ", ".join(f"CAST({identifier(cols[c])} AS VARCHAR) AS {c}" for c in KEY_TEXT)
    year = f"CAST({identifier(cols['year'])} AS VARCHAR)"
    value = f"CAST({identifier(cols['value'])} AS VARCHAR)"
    if decimal_comma:
        value = f"replace({value}, ',', '.')"
    inner = (
        f"SELECT {line} AS line, {key}, {year} AS y_text, {value} AS v_text, "  # noqa: S608 - generated names; headers and paths via validate.sql
        f"TRY_CAST(trim({year}) AS DOUBLE) AS y_num, TRY_CAST(trim({value}) AS DOUBLE) AS v_num FROM {src}"
    )
    whole = "y_num = floor(y_num) AND abs(y_num) < 1e6"
    return (
        f"SELECT line, {', '.join(KEY_TEXT)}, "  # noqa: S608 - generated names; headers and paths via validate.sql
        f"CASE WHEN {whole} THEN CAST(y_num AS INTEGER) END AS year, "
        f"CASE WHEN {whole} THEN NULL ELSE trim(y_text) END AS year_raw, "
        "CASE WHEN isfinite(v_num) THEN v_num END AS value, "
        "CASE WHEN isfinite(v_num) THEN NULL ELSE trim(v_text) END AS value_raw "
        f"FROM ({inner})"
    )


# --- CSV ----------------------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class CsvDialect:
    encoding: str
    delimiter: str
    decimal_comma: bool
    header: list[str]


def sniff_csv(path: Path) -> CsvDialect:
    """Encoding (UTF-8, UTF-8 with BOM, else Latin-1), delimiter and decimal comma, from the first megabyte."""
    raw = path.read_bytes()[:SAMPLE_BYTES] if path.stat().st_size <= SAMPLE_BYTES else _head(path)
    if not raw.strip():
        raise ReadError("the file is empty")
    if b"\x00" in raw[:4096]:
        raise ReadError(
            "the file holds binary data (NUL bytes), not text; is it an Excel or Parquet file with the wrong extension?"
        )
    if raw.startswith(codecs.BOM_UTF8):
        raw, encoding = raw[len(codecs.BOM_UTF8) :], "utf-8"
    else:
        encoding = "utf-8"
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        # A cut in the middle of a multi-byte character at the sample's end is not an encoding problem.
        if e.start >= len(raw) - 3 and len(raw) >= SAMPLE_BYTES:
            text = raw[: e.start].decode("utf-8")
        else:
            text, encoding = raw.decode("latin-1"), "latin-1"
    lines = text.splitlines()
    head = lines[0]
    counts = {d: head.count(d) for d in DELIMITERS}
    delimiter = max(DELIMITERS, key=lambda d: counts[d])
    if counts[delimiter] == 0:
        delimiter = ","
    header = next(csv.reader([head], delimiter=delimiter))
    decimal_comma = False
    if delimiter != ",":
        found, _ = _match_columns(header)
        years = wide_table.year_columns(header, found)
        if "value" in found or years:
            idx = header.index(found["value"]) if "value" in found else years[0].position
            cells = [r[idx] for r in csv.reader(lines[1:200], delimiter=delimiter) if len(r) > idx]
            commas = sum(bool(re.fullmatch(r"-?\d+,\d+([eE][-+]?\d+)?", c.strip())) for c in cells)
            dots = sum(bool(re.fullmatch(r"-?\d*\.\d+([eE][-+]?\d+)?", c.strip())) for c in cells)
            decimal_comma = commas > 0 and dots == 0
    return CsvDialect(encoding, delimiter, decimal_comma, header)


def _head(path: Path) -> bytes:
    with path.open("rb") as f:
        return f.read(SAMPLE_BYTES)


def _read_csv(con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str) -> None:
    d = sniff_csv(path)
    found, extra = _match_columns(d.header)
    if _is_scenarios_table(found):
        inp.kind = "scenarios"
        inp.scenarios = _scenario_frame(
            con.execute(
                "SELECT * FROM read_csv(?, header = true, all_varchar = true, delim = ?, encoding = ?)",
                [str(path), d.delimiter, d.encoding],
            ).df()
        )
        inp.rows = len(inp.scenarios)
        return
    _set_columns(inp, found, extra, d.header)
    # Positional names: DuckDB trims and dedupes header names, which would break the case/space-insensitive match.
    positional = [f"c{i}" for i in range(len(d.header))]
    by_position = {k: positional[d.header.index(v)] for k, v in found.items()}
    if d.encoding == "latin-1":
        inp.notes.append("read as Latin-1 (not valid UTF-8)")
    if d.decimal_comma:
        inp.notes.append("decimal commas read as decimal points")
    if inp.missing_columns:
        inp.rows = _count_lines(path) - 1
        return
    rejects = f"{table}_rejects"
    src = (
        f"read_csv({literal(str(path))}, header = true, all_varchar = true, delim = {literal(d.delimiter)}, "
        f"encoding = {literal(d.encoding)}, store_rejects = true, rejects_table = {literal(rejects)}, "
        f"rejects_scan = {literal(rejects + '_scan')}, "
        f"names = {literal_list(positional)})"
    )
    if inp.wide:
        select = wide_table.wide_select(by_position, inp.wide, positional, src, "NULL::BIGINT")
    else:
        select = _typed_select(by_position, src, "NULL::BIGINT", d.decimal_comma)
    con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {select}")
    bad = con.execute(
        f"SELECT line, string_agg(DISTINCT error_message, '; ') FROM {rejects} GROUP BY line ORDER BY line"  # noqa: S608 - generated names; headers and paths via validate.sql
    ).fetchall()
    inp.rejects = [(int(line), str(msg)) for line, msg in bad]
    # Rows are stored in file order, so the row id gives the line (the runner's view adds 2 where `line` is
    # empty); only rejected lines, which shift the rows after them, need the lines written out.
    if inp.rejects:
        con.execute(f"UPDATE {table} SET line = rowid + 2")  # noqa: S608 - generated names; headers and paths via validate.sql
        con.execute(
            f"CREATE TEMP TABLE {table}_shift AS SELECT line - (row_number() OVER (ORDER BY line) - 1) AS at "  # noqa: S608 - generated names; headers and paths via validate.sql
            f"FROM (SELECT DISTINCT line FROM {rejects})"
        )
        con.execute(f"UPDATE {table} SET line = line + (SELECT count(*) FROM {table}_shift s WHERE s.at <= line)")  # noqa: S608 - generated names; headers and paths via validate.sql
    if inp.wide:
        _wide_to_long(con, inp, table, d.decimal_comma)
    inp.rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names; headers and paths via validate.sql


def _count_lines(path: Path) -> int:
    with path.open("rb") as f:
        return sum(chunk.count(b"\n") for chunk in iter(lambda: f.read(1 << 20), b""))


def _set_columns(inp: InputFile, found: dict[str, str], extra: list[str], header: list[Any]) -> None:
    inp.kind = "data"
    inp.columns = found
    inp.wide = wide_table.year_columns(header, found)
    years = {y.header for y in inp.wide}
    inp.extra_columns = [e for e in extra if e.strip() and e not in years]
    inp.missing_columns = [] if inp.wide else [c for c in LONG_COLUMNS if c not in found]
    if inp.wide:
        inp.notes.append(wide_table.note(inp.wide))


def _wide_to_long(con: duckdb.DuckDBPyConnection, inp: InputFile, table: str, decimal_comma: bool = False) -> None:
    """Replace the wide TEMP `table` a reader built (see `milepost.validate.wide`) by the long table."""
    con.execute(f"ALTER TABLE {table} RENAME TO {table}_wide")
    source = wide_table.long_source(f"{table}_wide", inp.wide)
    cols = {c: c for c in LONG_COLUMNS}
    con.execute(f"CREATE TEMP TABLE {table} AS {_typed_select(cols, source, 'line', decimal_comma)}")
    con.execute(f"DROP TABLE {table}_wide")
    inp.rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names


# --- XLSX ---------------------------------------------------------------------------------------------------------


def _cell_text(v: Any) -> str | None:
    if v is None:
        return None
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v)


def _read_xlsx(con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str) -> list[InputFile]:
    import openpyxl
    import pyarrow as pa

    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except (zipfile.BadZipFile, OSError, KeyError, ValueError) as e:
        raise ReadError(f"not a readable XLSX workbook ({type(e).__name__}: {e})") from None
    try:
        names = wb.sheetnames
        data_sheet = "data" if "data" in names else names[0]
        extra_inputs: list[InputFile] = []
        if "scenarios" in names and data_sheet != "scenarios":
            rows = list(wb["scenarios"].iter_rows(values_only=True))
            if rows:
                import pandas as pd

                header = [str(h) if h is not None else "" for h in rows[0]]
                frame = pd.DataFrame([[_cell_text(v) for v in r] for r in rows[1:]], columns=header, dtype="str")
                sc = InputFile(path=inp.path, sha256=inp.sha256, kind="scenarios", sheet="scenarios")
                sc.scenarios = _scenario_frame(frame)
                sc.rows = len(sc.scenarios)
                extra_inputs.append(sc)
        inp.sheet = data_sheet
        it = wb[data_sheet].iter_rows(values_only=True)
        header_row = next(it, None)
        if header_row is None:
            raise ReadError(f"sheet {data_sheet!r} is empty")
        header = [str(h) if h is not None else "" for h in header_row]
        found, extra = _match_columns(header)
        if _is_scenarios_table(found):
            raise ReadError(f"sheet {data_sheet!r} holds a scenarios table, but no data sheet was found")
        _set_columns(inp, found, extra, header)
        idx = {c: header.index(found[c]) for c in found}
        idx.update({y.source: y.position for y in inp.wide})
        columns: dict[str, list[str | None]] = {c: [] for c in idx}
        lines: list[int] = []
        width = len(header)
        for n, r in enumerate(it, start=2):
            if not any(v is not None for v in r):
                continue
            r = tuple(r) + (None,) * (width - len(r))
            lines.append(n)
            for c, i in idx.items():
                columns[c].append(_cell_text(r[i]))
    except (zipfile.BadZipFile, OSError, KeyError, EOFError) as e:
        raise ReadError(f"the XLSX workbook is damaged ({type(e).__name__}: {e})") from None
    finally:
        wb.close()
    inp.rows = len(lines)
    if inp.missing_columns:
        return extra_inputs
    arrow = pa.table({"line": pa.array(lines, pa.int64()), **{c: pa.array(v, pa.string()) for c, v in columns.items()}})
    view = f"{table}_arrow"
    con.register(view, arrow)
    try:
        if inp.wide:
            by_source = {c: c for c in idx}
            positions = {i: c for c, i in idx.items()}
            columns_at = [positions.get(i, "") for i in range(width)]
            select = wide_table.wide_select(by_source, inp.wide, columns_at, view, "line")
        else:
            select = _typed_select(found, view, "line")
        con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {select}")
    finally:
        con.unregister(view)
    if inp.wide:
        _wide_to_long(con, inp, table)
    return extra_inputs


# --- Parquet ------------------------------------------------------------------------------------------------------


def _read_parquet(con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str) -> None:
    try:
        header = [r[0] for r in con.execute("DESCRIBE SELECT * FROM read_parquet(?)", [str(path)]).fetchall()]
    except duckdb.Error as e:
        raise ReadError(f"not a readable Parquet file ({str(e).splitlines()[0]})") from None
    found, extra = _match_columns(header)
    if _is_scenarios_table(found):
        inp.kind = "scenarios"
        frame = con.execute("SELECT * FROM read_parquet(?)", [str(path)]).df()
        inp.scenarios = _scenario_frame(frame.astype("str").where(frame.notna(), None))
        inp.rows = len(inp.scenarios)
        return
    _set_columns(inp, found, extra, header)
    if inp.missing_columns:
        inp.rows = con.execute("SELECT count(*) FROM read_parquet(?)", [str(path)]).fetchall()[0][0]
        return
    src = f"read_parquet({literal(str(path))}, file_row_number = true)"
    if inp.wide:
        select = wide_table.wide_select(found, inp.wide, header, src, "file_row_number + 1")
        con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {select}")
        _wide_to_long(con, inp, table)
    else:
        con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {_typed_select(found, src, 'file_row_number + 1')}")
    inp.rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names; headers and paths via validate.sql


# --- scenarios tables ---------------------------------------------------------------------------------------------


def _scenario_frame(frame: Any) -> Any:
    """Normalise a scenarios table: lower-case trimmed column names, text cells, empty -> missing."""
    frame = frame.copy()
    frame.columns = [re.sub(r"\s+", "_", str(c).strip()).lower() for c in frame.columns]
    frame = frame.loc[:, [c for c in frame.columns if c]]
    for c in frame.columns:
        frame[c] = frame[c].astype("str").str.strip().where(frame[c].notna(), None)
        frame.loc[frame[c] == "", c] = None
    return frame.dropna(subset=["model", "scenario"]).reset_index(drop=True)


# --- entry point --------------------------------------------------------------------------------------------------


def read_file(con: duckdb.DuckDBPyConnection, path: Path, table: str, sha256: str | None = None) -> list[InputFile]:
    """Read one file into `table` (data) or a scenarios frame; unreadable files come back with kind='unreadable'.
    `sha256`: the file's digest when the caller has it already (ingest hashes before it checks)."""
    inp = InputFile(path=str(path), sha256="", kind="unreadable")
    out = [inp]
    try:
        if not path.is_file():
            raise ReadError("no such file")
        inp.sha256 = sha256 or sha256_of(path)
        suffix = path.suffix.lower()
        if suffix in (".xlsx", ".xlsm"):
            out += _read_xlsx(con, inp, path, table)
        elif suffix in (".parquet", ".pq"):
            _read_parquet(con, inp, path, table)
        elif suffix == ".xls":
            raise ReadError("old .xls workbooks are not supported; save the file as .xlsx or .csv")
        else:
            _read_csv(con, inp, path, table)
    except ReadError as e:
        inp.kind, inp.error = "unreadable", str(e)
    except duckdb.Error as e:
        inp.kind, inp.error = "unreadable", _duckdb_reason(e)
        inp.error_line = _error_line(str(e))
    except (UnicodeDecodeError, csv.Error, StopIteration) as e:
        inp.kind, inp.error = "unreadable", f"{type(e).__name__}: {e}"
    except OSError as e:  # no permission, a read error of the disk: the file cannot be read, as any other
        inp.kind, inp.error = "unreadable", e.strerror or str(e)
    if inp.kind == "data" and inp.table is None and not inp.missing_columns:
        inp.table = table
    return out


def _duckdb_reason(e: Exception) -> str:
    first = str(e).splitlines()[0]
    return re.sub(r"^[A-Za-z ]+Error: ", "", first)


def _error_line(message: str) -> int | None:
    m = re.search(r"Line: (\d+)", message)
    return int(m.group(1)) if m else None


__all__ = ["LONG_COLUMNS", "InputFile", "read_file", "sha256_of", "sniff_csv"]
