"""Readers: CSV/TSV, XLSX and Parquet submissions into DuckDB tables that remember each row's source line.

Every data file becomes one TEMP table `obs_<n>` with the long-format columns (cells kept as text where they are
not clean numbers, so a finding can quote them) and a `line` column: the physical CSV line (header = 1), the
XLSX sheet row, or the 1-based Parquet row. Scenario tables (model, scenario and attributes, no variable or
value) become a TEMP table of text cells with the line of each row, read by SQL like the data: a check of a
clean submission never imports pandas.
"""

from __future__ import annotations

import codecs
import csv
import errno
import hashlib
import re
import stat
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import duckdb

from milepost.schema.limits import Limits
from milepost.validate import wide as wide_table
from milepost.validate.cells import one_line
from milepost.validate.errors import LimitExceeded, ReadError
from milepost.validate.sql import identifier, literal, literal_list
from milepost.validate.xlsx import ZIP_ERRORS, open_workbook

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
    reject_total: int = 0  # rejected lines in all; `rejects` keeps the first ones only
    limits_hit: list[str] = field(default_factory=list)  # what stopped the reading early (limit-exceeded findings)
    ambiguous_commas: tuple[int, int] = (0, 0)  # (count, first line) of values like 51,169 under decimal commas
    scenarios_table: str | None = None  # TEMP table (line, model, scenario, attributes...) of a scenarios table
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


def _number(cell: str) -> str:
    """SQL reading a text cell as a number. DuckDB's cast skips ASCII whitespace itself, so trim() (which also
    strips Unicode spaces, e.g. the no-break space of spreadsheet exports) runs only on the cells the plain cast
    refuses: coalesce evaluates its second argument for those rows alone. Trimming every cell first built a
    second string of each (measured: a sixth of the typed read's CPU at 2M rows)."""
    return f"coalesce(TRY_CAST({cell} AS DOUBLE), TRY_CAST(trim({cell}) AS DOUBLE))"


def _typed_select(cols: dict[str, str], src: str, line: str, decimal_comma: bool = False) -> str:
    """SELECT turning raw text cells into typed year/value columns, keeping the text only where it is not clean."""
    key = ", ".join(f"CAST({identifier(cols[c])} AS VARCHAR) AS {c}" for c in KEY_TEXT)
    year = f"CAST({identifier(cols['year'])} AS VARCHAR)"
    value = f"CAST({identifier(cols['value'])} AS VARCHAR)"
    if decimal_comma:
        value = f"replace({value}, ',', '.')"
    inner = (
        f"SELECT {line} AS line, {key}, {year} AS y_text, {value} AS v_text, "  # noqa: S608 - generated names; headers and paths via validate.sql
        f"{_number(year)} AS y_num, {_number(value)} AS v_num FROM {src}"
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


def _read_csv(con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str, limits: Limits) -> None:
    d = sniff_csv(path)
    if len(d.header) > limits.max_columns:
        raise LimitExceeded(
            f"the header has {len(d.header):,} columns, more than the limit of {limits.max_columns:,} (max_columns)"
        )
    found, extra = _match_columns(d.header)
    shape = scan_lines(path)
    # DuckDB's strict parser refuses a file whose lines end in both LF and CRLF; the lenient one reads it right.
    lenient = ", strict_mode = false" if shape.mixed_endings else ""
    if shape.mixed_endings:
        inp.notes.append(
            f"mixed line endings ({shape.crlf:,} CRLF, {shape.newlines - shape.crlf:,} LF): read either way"
        )
    options = (
        f"header = true, all_varchar = true, delim = {literal(d.delimiter)}, encoding = {literal(d.encoding)}, "
        f"max_line_size = {int(limits.max_line_bytes)}{lenient}"
    )
    if _is_scenarios_table(found):
        positional = [f"c{i}" for i in range(len(d.header))]
        src = (
            f"(SELECT * FROM read_csv({literal(str(path))}, {options}, names = {literal_list(positional)}) "  # noqa: S608 - options from the code and validate.sql
            f"LIMIT {int(limits.max_rows) + 1})"
        )
        _scenarios_table(con, inp, table, d.header, positional, src, "NULL::BIGINT", limits)
        n = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names
        if shape.lines == n + 1:
            con.execute(f"UPDATE {table} SET line = rowid + 2")  # noqa: S608 - generated names
        else:  # blank lines or quoted newlines: the physical lines come from the file itself
            con.execute(f"CREATE OR REPLACE TEMP TABLE {table}_rejects (line BIGINT)")
            _physical_lines(con, inp, path, table, f"{table}_rejects")
            con.execute(f"UPDATE {table} SET line = rowid + 2 WHERE line IS NULL")  # noqa: S608 - generated names
        _settle_scenarios(con, inp, table, limits)
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
        inp.rows = shape.lines - 1
        return
    rejects = f"{table}_rejects"
    for parallel in (True, False):
        if _read_rows(con, inp, path, table, rejects, options, positional, by_position, shape, limits, d, parallel):
            break
        # DuckDB's parallel reader, keeping rejected lines, can read a row twice next to long runs of empty lines
        # (seen: 407 rows from a file of 401, each after 500,000 empty lines). One thread reads it right.
        con.execute(f"DROP TABLE IF EXISTS {rejects}")
        con.execute(f"DROP TABLE IF EXISTS {rejects}_scan")
        inp.notes.append("read again in one thread: reading in parallel gave more rows than the file has records")
    if d.decimal_comma and "value" in by_position:
        _ambiguous_commas(con, inp, path, options, positional, by_position["value"], table)
    if inp.wide:
        _wide_to_long(con, inp, table, limits, d.decimal_comma)
    inp.rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names; headers and paths via validate.sql


def _read_rows(
    con: duckdb.DuckDBPyConnection,
    inp: InputFile,
    path: Path,
    table: str,
    rejects: str,
    options: str,
    positional: list[str],
    by_position: dict[str, str],
    shape: LineShape,
    limits: Limits,
    d: CsvDialect,
    parallel: bool,
) -> bool:
    """Read a long or wide CSV data table into `table` with its rejected lines; False when DuckDB read more rows
    than the file has records (then the caller reads it again in one thread)."""
    src = (
        f"read_csv({literal(str(path))}, {options}, store_rejects = true, "
        f"rejects_table = {literal(rejects)}, rejects_scan = {literal(rejects + '_scan')}, "
        f"names = {literal_list(positional)}{'' if parallel else ', parallel = false'})"
    )
    # A record spans one line or more, so a file of no more lines than the limit cannot hold too many rows. Only
    # a longer file gets the LIMIT, which makes DuckDB read in one thread (measured: 0.7 s against 0.4 s at 2M).
    if shape.lines - 1 > limits.max_rows:
        src = f"(SELECT * FROM {src} LIMIT {int(limits.max_rows) + 1})"  # noqa: S608 - options from the code and validate.sql
    if inp.wide:
        select = wide_table.wide_select(by_position, inp.wide, positional, src, "NULL::BIGINT")
    else:
        select = _typed_select(by_position, src, "NULL::BIGINT", d.decimal_comma)
    con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {select}")
    rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names
    if rows > limits.max_rows:
        con.execute(f"DELETE FROM {table} WHERE rowid >= ?", [limits.max_rows])  # noqa: S608 - generated names
        inp.limits_hit.append(_rows_hit(limits))
    inp.reject_total = con.execute(f"SELECT count(DISTINCT line) FROM {rejects}").fetchall()[0][0]  # noqa: S608 - generated names
    bad = con.execute(
        f"SELECT line, string_agg(DISTINCT error_message, '; ') FROM {rejects} GROUP BY line ORDER BY line LIMIT ?",  # noqa: S608 - generated names; headers and paths via validate.sql
        [limits.findings_stored_per_rule],
    ).fetchall()
    inp.rejects = [(int(line), str(msg)) for line, msg in bad]
    if rows <= limits.max_rows and shape.lines != rows + inp.reject_total + 1:
        # Quoted newlines or blank lines: DuckDB counts records, so the physical lines come from the file itself.
        return _physical_lines(con, inp, path, table, rejects) or not parallel
    if inp.rejects:
        # Rows are stored in file order, so the row id gives the line (the runner's view adds 2 where `line` is
        # empty); only rejected lines, which shift the rows after them, need the lines written out.
        con.execute(f"UPDATE {table} SET line = rowid + 2")  # noqa: S608 - generated names; headers and paths via validate.sql
        con.execute(
            f"CREATE TEMP TABLE {table}_shift AS SELECT line - (row_number() OVER (ORDER BY line) - 1) AS at "  # noqa: S608 - generated names; headers and paths via validate.sql
            f"FROM (SELECT DISTINCT line FROM {rejects})"
        )
        con.execute(f"UPDATE {table} SET line = line + (SELECT count(*) FROM {table}_shift s WHERE s.at <= line)")  # noqa: S608 - generated names; headers and paths via validate.sql
    return True


def _rows_hit(limits: Limits) -> str:
    return f"more than {limits.max_rows:,} rows (max_rows): only the first {limits.max_rows:,} were read"


def _physical_lines(con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str, rejects: str) -> bool:
    """Set each row's (and each rejected line's) physical line, where records and lines differ. False when the
    table has more rows than the file has records (the rows keep their record numbers)."""
    import numpy as np
    import pyarrow as pa

    n = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names
    rejected = np.array(
        [r[0] for r in con.execute(f"SELECT DISTINCT line FROM {rejects}").fetchall()],  # noqa: S608 - generated names
        dtype=np.int64,
    )
    # the header, the rows and the rejected records: the records the read went through
    number, first = logical_lines(path, max_records=n + 1 + len(rejected))
    keep = ~np.isin(number, rejected)
    keep[:1] = False  # the header
    lines = first[keep]
    if len(lines) < n:  # a parse the scan cannot follow (another quote character), or a misread
        return False
    view = f"{table}_lines"
    con.register(view, pa.table({"rid": pa.array(np.arange(n, dtype=np.int64)), "at": pa.array(lines[:n])}))
    try:
        con.execute(f"UPDATE {table} SET line = m.at FROM {view} m WHERE {table}.rowid = m.rid")  # noqa: S608 - generated names
    finally:
        con.unregister(view)
    at = np.searchsorted(number, [k for k, _ in inp.rejects])
    inp.rejects = [
        (int(first[i]) if i < len(number) and number[i] == k else k, why)
        for i, (k, why) in zip(at.tolist(), inp.rejects, strict=True)
    ]
    return True


def _ambiguous_commas(
    con: duckdb.DuckDBPyConnection,
    inp: InputFile,
    path: Path,
    options: str,
    positional: list[str],
    value: str,
    table: str,
) -> None:
    """Values like `51,169` in a file read with decimal commas: 51.169, or 51169 with a thousands separator?"""
    row = con.execute(
        f"SELECT count(*), min(n) FROM (SELECT row_number() OVER () AS n, {identifier(value)} AS v "  # noqa: S608 - options from the code and validate.sql
        f"FROM read_csv(?, {options}, ignore_errors = true, names = {literal_list(positional)})) "
        r"WHERE regexp_full_match(trim(v), '-?\d{1,3},\d{3}')",
        [str(path)],
    ).fetchall()[0]
    if row[0]:
        first = con.execute(
            f"SELECT line FROM (SELECT coalesce(line, rowid + 2) AS line, rowid AS r FROM {table}) WHERE r = ?",  # noqa: S608 - generated names
            [int(row[1]) - 1],
        ).fetchall()
        inp.ambiguous_commas = (int(row[0]), int(first[0][0]) if first else int(row[1]) + 1)


@dataclass(frozen=True)
class LineShape:
    """What one pass over a text file tells: its lines, and how they end."""

    newlines: int
    crlf: int
    lines: int  # newlines, plus one for a last line without its newline

    @property
    def mixed_endings(self) -> bool:
        return 0 < self.crlf < self.newlines


def scan_lines(path: Path) -> LineShape:
    """Count LF and CRLF line ends in one pass of 16 MiB chunks (a chunk boundary between CR and LF is counted)."""
    newlines = crlf = 0
    last, prev = b"", b""
    with path.open("rb") as f:
        for chunk in iter(lambda: f.read(16 << 20), b""):
            newlines += chunk.count(b"\n")
            # most files have no CR at all: `in` stops at the first one (memchr), where counting reads the whole
            # chunk again; measured 0.25 s of a 140 MB file
            if prev == b"\r" or b"\r" in chunk:
                crlf += chunk.count(b"\r\n") + (prev == b"\r" and chunk[:1] == b"\n")
            prev = last = chunk[-1:]
    return LineShape(newlines, crlf, newlines + (last not in (b"", b"\n")))


def logical_lines(path: Path, chunk_bytes: int = 4 << 20, max_records: int | None = None) -> tuple[Any, Any]:
    """For the non-blank records of a CSV file (a line, or several joined by a newline inside double quotes), in
    order: the record's number (from 1, blank records counted, as DuckDB numbers them) and the physical line it
    starts on. Vectorised per chunk: a newline ends a record when the quotes before it are balanced. Blank records
    are only counted and reading stops after `max_records` non-blank ones, so the memory follows the rows asked
    for, not the file (a file of a billion empty lines holds no row)."""
    import numpy as np

    numbers, firsts = [], []
    parity, seen, before_cr, since = 0, 0, False, 0  # quotes so far (mod 2), newlines so far, record length
    records = kept = prev_end = 0  # records so far, non-blank ones, the physical line the last one ended on
    with path.open("rb") as f:
        for chunk in iter(lambda: f.read(chunk_bytes), b""):
            a = np.frombuffer(chunk, np.uint8)
            par = (np.cumsum(a == 34, dtype=np.int32) + parity) & 1
            nl = np.flatnonzero(a == 10)
            ending = np.flatnonzero(par[nl] == 0)
            at = nl[ending]
            ends = seen + ending + 1  # the physical line each record ends on
            # a record is blank when nothing (or a lone CR) stands between its newline and the previous one
            start = np.concatenate(([-1 - since], at[:-1])) if len(at) else at
            length = at - start - 1
            prev_cr = np.zeros(len(at), dtype=bool)
            if len(at):
                prev_cr = np.where(at > 0, a[np.maximum(at - 1, 0)] == 13, before_cr)
            full = ~((length == 0) | ((length == 1) & prev_cr))
            starts = np.concatenate(([prev_end + 1], ends[:-1] + 1)) if len(at) else ends
            numbers.append(records + 1 + np.flatnonzero(full))
            firsts.append(starts[full])
            records += len(at)
            kept += int(full.sum())
            prev_end = int(ends[-1]) if len(at) else prev_end
            since = len(a) - 1 - at[-1] if len(at) else since + len(a)
            before_cr = bool(a[-1] == 13)
            parity = int(par[-1])
            seen += len(nl)
            if max_records is not None and kept >= max_records:
                since = 0  # the rest is not read, so no last record stands open
                break
    if since:  # a last record without its newline
        numbers.append(np.array([records + 1]))
        firsts.append(np.array([prev_end + 1]))
    number = np.concatenate(numbers).astype(np.int64) if numbers else np.zeros(0, np.int64)
    first = np.concatenate(firsts).astype(np.int64) if firsts else np.zeros(0, np.int64)
    if max_records is not None:
        number, first = number[:max_records], first[:max_records]
    return number, first


def _set_columns(inp: InputFile, found: dict[str, str], extra: list[str], header: list[Any]) -> None:
    inp.kind = "data"
    inp.columns = found
    inp.wide = wide_table.year_columns(header, found)
    years = {y.header for y in inp.wide}
    inp.extra_columns = [e for e in extra if e.strip() and e not in years]
    inp.missing_columns = [] if inp.wide else [c for c in LONG_COLUMNS if c not in found]
    if inp.wide:
        inp.notes.append(wide_table.note(inp.wide))


def _wide_to_long(
    con: duckdb.DuckDBPyConnection, inp: InputFile, table: str, limits: Limits, decimal_comma: bool = False
) -> None:
    """Replace the wide TEMP `table` a reader built (see `milepost.validate.wide`) by the long table, within the
    row limit counted in long rows (decided before unpivoting, so memory stays bounded)."""
    if why := wide_table.fit_long_rows(con, table, inp.wide, limits.max_rows):
        inp.limits_hit.append(why)
    con.execute(f"ALTER TABLE {table} RENAME TO {table}_wide")
    source = wide_table.long_source(f"{table}_wide", inp.wide)
    cols = {c: c for c in LONG_COLUMNS}
    con.execute(f"CREATE TEMP TABLE {table} AS {_typed_select(cols, source, 'line', decimal_comma)}")
    con.execute(f"DROP TABLE {table}_wide")
    inp.rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names


# --- XLSX ---------------------------------------------------------------------------------------------------------


def _read_xlsx(
    con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str, limits: Limits
) -> list[InputFile]:
    import pyarrow as pa

    wb = open_workbook(str(path), limits)
    try:
        names = wb.worksheets()
        if not names:
            # the sheet type comes from the workbook's own relationships: escaped like any text from the file
            others = ", ".join(f"{s.name!r} ({one_line(s.kind)})" for s in wb.sheets)
            raise ReadError("the workbook has no worksheet" + (f", only {others}" if others else ""))
        data_sheet = "data" if "data" in names else names[0]
        extra_inputs: list[InputFile] = []
        if "scenarios" in names and data_sheet != "scenarios":
            sc = InputFile(path=inp.path, sha256=inp.sha256, kind="scenarios", sheet="scenarios")
            rows: list[list[str | None]] = []
            at: list[int] = []
            for n, r in wb.rows("scenarios"):
                if len(rows) > limits.max_rows:
                    sc.limits_hit.append(_rows_hit(limits))
                    break
                rows.append(r)
                at.append(n)
            if rows:
                width = max(len(r) for r in rows)
                header = [h if h is not None else "" for h in rows[0]] + [""] * (width - len(rows[0]))
                names = [f"c{i}" for i in range(width)]
                cells = {
                    c: pa.array([r[i] if i < len(r) else None for r in rows[1:]], pa.string())
                    for i, c in enumerate(names)
                }
                view = f"{table}_s_arrow"
                con.register(view, pa.table({"line": pa.array(at[1:], pa.int64()), **cells}))
                try:
                    _scenarios_table(con, sc, f"{table}_s", header, names, view, "line", limits)
                finally:
                    con.unregister(view)
                _settle_scenarios(con, sc, f"{table}_s", limits)
                extra_inputs.append(sc)
        inp.sheet = data_sheet
        it = wb.rows(data_sheet)
        first = next(it, None)
        if first is None:
            raise ReadError(f"sheet {data_sheet!r} is empty")
        header = [h if h is not None else "" for h in first[1]]
        found, extra = _match_columns(header)
        if _is_scenarios_table(found):
            raise ReadError(f"sheet {data_sheet!r} holds a scenarios table, but no data sheet was found")
        _set_columns(inp, found, extra, header)
        idx = {c: header.index(found[c]) for c in found}
        idx.update({y.source: y.position for y in inp.wide})
        columns: dict[str, list[str | None]] = {c: [] for c in idx}
        lines: list[int] = []
        for n, r in it:
            if all(v is None for v in r):
                continue
            if len(lines) >= limits.max_rows:
                inp.limits_hit.append(_rows_hit(limits))
                break
            lines.append(n)
            for c, i in idx.items():
                columns[c].append(r[i] if i < len(r) else None)
    except ZIP_ERRORS as e:
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
            columns_at = [positions.get(i, "") for i in range(len(header))]
            select = wide_table.wide_select(by_source, inp.wide, columns_at, view, "line")
        else:
            select = _typed_select(found, view, "line")
        con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {select}")
    finally:
        con.unregister(view)
    if inp.wide:
        _wide_to_long(con, inp, table, limits)
    return extra_inputs


# --- Parquet ------------------------------------------------------------------------------------------------------


def _read_parquet(con: duckdb.DuckDBPyConnection, inp: InputFile, path: Path, table: str, limits: Limits) -> None:
    try:
        header = [r[0] for r in con.execute("DESCRIBE SELECT * FROM read_parquet(?)", [str(path)]).fetchall()]
    except duckdb.Error as e:
        raise ReadError(f"not a readable Parquet file ({str(e).splitlines()[0]})") from None
    if len(header) > limits.max_columns:
        raise LimitExceeded(
            f"the file has {len(header):,} columns, more than the limit of {limits.max_columns:,} (max_columns)"
        )
    found, extra = _match_columns(header)
    if _is_scenarios_table(found):
        src = (
            f"(SELECT * FROM read_parquet({literal(str(path))}, file_row_number = true) "  # noqa: S608 - path via validate.sql
            f"WHERE file_row_number <= {int(limits.max_rows)})"
        )
        _scenarios_table(con, inp, table, header, header, src, "file_row_number + 1", limits)
        _settle_scenarios(con, inp, table, limits)
        return
    _set_columns(inp, found, extra, header)
    if inp.missing_columns:
        inp.rows = con.execute("SELECT count(*) FROM read_parquet(?)", [str(path)]).fetchall()[0][0]
        return
    src = (
        f"(SELECT * FROM read_parquet({literal(str(path))}, file_row_number = true) "  # noqa: S608 - path via validate.sql
        f"WHERE file_row_number < {int(limits.max_rows)})"
    )
    if inp.wide:
        select = wide_table.wide_select(found, inp.wide, header, src, "file_row_number + 1")
        con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {select}")
        _wide_to_long(con, inp, table, limits)
    else:
        con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS {_typed_select(found, src, 'file_row_number + 1')}")
    total = con.execute("SELECT count(*) FROM read_parquet(?)", [str(path)]).fetchall()[0][0]
    if total > limits.max_rows:
        inp.limits_hit.append(_rows_hit(limits))
    inp.rows = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names; headers and paths via validate.sql


# --- scenarios tables ---------------------------------------------------------------------------------------------


# Python's str.strip() whitespace, as RE2 spells it: spreadsheet exports leave no-break spaces around cells.
_EDGE_SPACE = r"^[\s\p{Z}\x{85}\x{1c}-\x{1f}]+|[\s\p{Z}\x{85}\x{1c}-\x{1f}]+$"


def _scenarios_table(
    con: duckdb.DuckDBPyConnection,
    inp: InputFile,
    table: str,
    header: list[Any],
    columns: list[str],
    src: str,
    line: str,
    limits: Limits,
) -> None:
    """TEMP `table` (line, then one text column per header) of a scenarios table: column names lower-cased with
    inner spaces as underscores (the first of equal names wins, unnamed columns are left out), cells trimmed,
    empty cells missing. `columns`: the source's column for each header."""
    inp.kind = "scenarios"
    names: dict[str, str] = {}
    for h, c in zip(header, columns, strict=True):
        name = re.sub(r"\s+", "_", str(h).strip()).lower()
        if name and name not in names and name != "line":
            names[name] = c
        elif name:  # reported (unexpected-column), never dropped unsaid
            inp.extra_columns.append(str(h))
    cells = ", ".join(
        f"nullif(regexp_replace(CAST({identifier(c)} AS VARCHAR), {literal(_EDGE_SPACE)}, '', 'g'), '') "
        f"AS {identifier(n)}"
        for n, c in names.items()
    )
    con.execute(f"CREATE OR REPLACE TEMP TABLE {table} AS SELECT {line} AS line, {cells} FROM {src}")  # noqa: S608 - generated names; headers and paths via validate.sql


def _settle_scenarios(con: duckdb.DuckDBPyConnection, inp: InputFile, table: str, limits: Limits) -> None:
    """Drop rows without a model or scenario, bound the table to the row limit, and count what is left."""
    con.execute(f"DELETE FROM {table} WHERE model IS NULL OR scenario IS NULL")  # noqa: S608 - generated names
    n = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - generated names
    if n > limits.max_rows:
        con.execute(
            f"DELETE FROM {table} WHERE line > (SELECT line FROM {table} ORDER BY line LIMIT 1 OFFSET ?)",  # noqa: S608 - generated names
            [limits.max_rows - 1],
        )
        inp.limits_hit.append(_rows_hit(limits))
        n = limits.max_rows
    inp.scenarios_table, inp.rows = table, int(n)


# --- entry point --------------------------------------------------------------------------------------------------


def not_a_file(path: Path) -> str | None:
    """Why `path` cannot be read as a file (missing, a folder, a pipe, a link loop), or None when it can."""
    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        return "a link to a file that does not exist" if path.is_symlink() else "no such file"
    except OSError as e:
        if e.errno == errno.ELOOP:
            return "a symbolic link that points back to itself (a link loop)"
        return e.strerror or str(e)
    if stat.S_ISDIR(mode):
        return "a folder, not a file: give the files inside it"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO), not a file: save what it carries to a file first"
    if not stat.S_ISREG(mode):
        return "not a regular file (a device or socket)"
    return None


def read_file(
    con: duckdb.DuckDBPyConnection,
    path: Path,
    table: str,
    sha256: str | None = None,
    limits: Limits | None = None,
) -> list[InputFile]:
    """Read one file into `table` (data or a scenarios table); unreadable files come back with kind='unreadable'.
    `sha256`: the file's digest when the caller has it already (ingest hashes before it checks)."""
    limits = limits or Limits()
    inp = InputFile(path=str(path), sha256="", kind="unreadable")
    out = [inp]
    try:
        why = not_a_file(path)
        if why:
            raise ReadError(why)
        inp.sha256 = sha256 or sha256_of(path)
        suffix = path.suffix.lower()
        if suffix in (".xlsx", ".xlsm"):
            out += _read_xlsx(con, inp, path, table, limits)
        elif suffix in (".parquet", ".pq"):
            _read_parquet(con, inp, path, table, limits)
        elif suffix == ".xls":
            raise ReadError("old .xls workbooks are not supported; save the file as .xlsx or .csv")
        else:
            _read_csv(con, inp, path, table, limits)
    except LimitExceeded as e:
        inp.kind, inp.error = "unreadable", str(e)
        inp.limits_hit.append(str(e))
    except ReadError as e:
        inp.kind, inp.error = "unreadable", str(e)
    except duckdb.Error as e:
        inp.kind, inp.error = "unreadable", _duckdb_reason(e)
        inp.error_line = _error_line(str(e))
        if "Maximum line size" in str(e):
            inp.error_line = None  # DuckDB names the line it was in, not the long one
            inp.limits_hit.append(
                f"a line is longer than {limits.max_line_bytes:,} bytes (max_line_bytes); the file was not read"
            )
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
