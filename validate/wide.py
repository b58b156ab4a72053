"""Wide tables: one column per year beside model, scenario, region, variable and unit, read as the long table.

Most modelling teams keep their results with the years across (`2020, 2030, ...`). A data table whose header
has the five key columns, no `year` or `value`, and year columns (four-digit headers) is read by the same readers
into a wide TEMP table (every cell as text, each row with its own line), which `to_long` turns into the long
table with DuckDB's UNPIVOT. Empty year cells are not reported: a wide table leaves a year blank where the long
table has no row. After the checks, `locate_findings` points each finding about a value at its year column (and,
for XLSX, its cell), so the file's own line and cell are named and the XLSX report marks the right cell.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import duckdb

from milepost.validate.sql import identifier, literal

KEYS = ("model", "scenario", "region", "variable", "unit")
# Four digits, as XLSX number headers come back ("2030", or "2030.0" from a float cell).
_YEAR_HEADER = re.compile(r"\s*(\d{4})(?:\.0+)?\s*")
# Columns of the wide TEMP table that hold the year cells: by position, since headers may repeat or need quoting.
_PREFIX = "y_"


@dataclass(frozen=True)
class YearColumn:
    """A year column of a wide table: its header as in the file, the year it stands for, its 0-based position."""

    header: str
    year: int
    position: int

    @property
    def source(self) -> str:
        """The name of its column in the wide TEMP table."""
        return f"{_PREFIX}{self.position}"

    @property
    def letter(self) -> str:
        """The spreadsheet column letter (A, B, ..., AA, ...)."""
        n, out = self.position + 1, ""
        while n:
            n, r = divmod(n - 1, 26)
            out = chr(65 + r) + out
        return out


def year_columns(header: Sequence[Any], found: dict[str, str]) -> list[YearColumn]:
    """The year columns of a wide table, or [] when the header is not one (a key column missing, or a `year` or
    `value` column present: then it is read, and checked, as a long table)."""
    if "year" in found or "value" in found or any(k not in found for k in KEYS):
        return []
    out = []
    for i, h in enumerate(header):
        m = _YEAR_HEADER.fullmatch(str(h))
        if m:
            out.append(YearColumn(str(h), int(m.group(1)), i))
    return out


def wide_select(keys: dict[str, str], years: Sequence[YearColumn], columns: Sequence[str], src: str, line: str) -> str:
    """SELECT of the wide TEMP table from a reader's source: `line`, the key cells as text, and each year column
    as text under `YearColumn.source`. `keys` maps the long names to the source's column names, `columns` gives
    the source's column name at each position of the header."""
    key = ", ".join(f"CAST({identifier(keys[c])} AS VARCHAR) AS {c}" for c in KEYS)
    cells = ", ".join(f"CAST({identifier(columns[y.position])} AS VARCHAR) AS {y.source}" for y in years)
    return f"SELECT {line} AS line, {key}, {cells} FROM {src}"  # noqa: S608 - generated names; headers and paths via validate.sql


def long_source(table: str, years: Sequence[YearColumn]) -> str:
    """A query over the wide TEMP `table` giving the long columns as text (line, keys, year, value), one row per
    non-empty year cell: the source the readers' typed select reads, as it reads a long file."""
    year = "CASE ycol " + " ".join(f"WHEN {literal(y.source)} THEN {literal(str(y.year))}" for y in years) + " END"
    on = ", ".join(y.source for y in years)
    # `line` is empty where the reader leaves it to the row id (CSV): it is fixed here, before rows multiply.
    lined = f"SELECT coalesce(line, rowid + 2) AS line, * EXCLUDE (line) FROM {table}"  # noqa: S608 - generated names
    return (
        f"(SELECT line, {', '.join(KEYS)}, {year} AS year, cell AS value "  # noqa: S608 - generated names; headers via validate.sql
        f"FROM (UNPIVOT ({lined}) ON {on} INTO NAME ycol VALUE cell) WHERE trim(cell) <> '')"
    )


def fit_long_rows(con: duckdb.DuckDBPyConnection, table: str, years: Sequence[YearColumn], max_rows: int) -> str | None:
    """Keep the wide TEMP `table` within `max_rows` long rows (one per non-empty year cell, as `long_source` makes
    them): count the cells of each wide row before anything is unpivoted, delete the rows from the first one that
    would go beyond the limit, and say so (the text of a `limit-exceeded` finding); None when everything fits.
    The limit is the contract's on long rows: 100,000 wide rows of 90 years are 9 million of them."""
    if not years:
        return None
    cells = " + ".join(f"(coalesce(trim({y.source}), '') <> '')::BIGINT" for y in years)
    # one pass over the wide rows (at most max_rows of them): a running count of the long rows each one ends at
    first_over, total, kept_rows, kept_long = con.execute(
        f"SELECT min(rowid) FILTER (WHERE upto > $max), max(upto), count(*) FILTER (WHERE upto <= $max), "  # noqa: S608 - generated names
        f"coalesce(max(upto) FILTER (WHERE upto <= $max), 0) "
        f"FROM (SELECT rowid, sum({cells}) OVER (ORDER BY rowid ROWS UNBOUNDED PRECEDING) AS upto FROM {table})",
        {"max": max_rows},
    ).fetchall()[0]
    if first_over is None:
        return None
    con.execute(f"DELETE FROM {table} WHERE rowid >= ?", [first_over])  # noqa: S608 - generated names
    return (
        f"more than {max_rows:,} rows (max_rows, counted as long rows: one per non-empty year cell; the wide table "
        f"holds {int(total):,}): only its first {int(kept_rows):,} rows ({int(kept_long):,} long rows) were read"
    )


def note(years: Sequence[YearColumn]) -> str:
    """The note a wide table's input gets in the report."""
    ys = sorted(y.year for y in years)
    span = f"{ys[0]}–{ys[-1]}" if len(ys) > 1 else str(ys[0])
    n = len(ys)
    return f"wide table: {n} year column{'s' if n != 1 else ''} ({span}) read as long rows"


def locate_findings(con: duckdb.DuckDBPyConnection, inputs: Sequence[Any]) -> None:
    """Point the findings about a year's value in a wide input at its year column (`column_name` = the header, as
    the XLSX report looks cells up by header) and name that column, and for XLSX the cell, in the message."""
    wide = [(i.path, i.sheet, y) for i in inputs if getattr(i, "wide", None) for y in i.wide]
    if not wide:
        return
    con.execute(
        "CREATE OR REPLACE TEMP TABLE wide_columns (path VARCHAR, sheet VARCHAR, year INTEGER, header VARCHAR, "
        "letter VARCHAR)"
    )
    con.executemany(
        "INSERT INTO wide_columns VALUES (?, ?, ?, ?, ?)",
        [(p, s, y.year, y.header, y.letter if s is not None else None) for p, s, y in wide],
    )
    con.execute(
        "UPDATE findings AS f SET column_name = w.header, message = f.message || ' (column ' || w.header "
        "|| CASE WHEN w.letter IS NOT NULL AND f.line IS NOT NULL THEN ', cell ' || w.letter || f.line ELSE '' END "
        "|| ')' FROM wide_columns AS w WHERE f.path = w.path AND f.sheet IS NOT DISTINCT FROM w.sheet "
        "AND f.year = w.year AND f.column_name IN ('value', 'year')"
    )


__all__ = ["YearColumn", "fit_long_rows", "locate_findings", "long_source", "note", "wide_select", "year_columns"]
