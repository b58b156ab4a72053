"""What text from a submission becomes when we write it out: safe in spreadsheets, visible on terminals.

A spreadsheet program runs a cell that starts with `=`, `+`, `-` or `@` (and, after a paste, a tab or a carriage
return) as a formula, so a model named `=HYPERLINK("http://...")` would become a live link in a reviewer's copy.
In XLSX a cell can say "this is text" (type string, quote prefix), so the text stays exact; CSV cannot, so text
cells that start so get a leading `'`, as spreadsheet programs do for text typed that way. Text that is a plain
number (`-5.2`, `+3`) is no formula and is left as it is.

Control characters (ESC, BEL, NUL, DEL, the C1 range) and the bidirectional overrides in names or cells would
reach a terminal as commands (`ESC ] 0 ; ... BEL` retitles the window, `ESC [ 2 J` clears it) and cannot be
stored in XLSX at all, so human text shows them as `\\u001b`-style escapes.
"""

from __future__ import annotations

import re
from typing import Any

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
# SQL (DuckDB regular expressions, RE2) for the same two tests, used on whole columns.
SQL_FORMULA_START = "^[=+@\\t\\r-]"
SQL_PLAIN_NUMBER = "^[+-]?([0-9]+([.][0-9]*)?|[.][0-9]+)([eE][+-]?[0-9]+)?$"
# C0 controls but newline, DEL, C1, and the bidirectional embedding/override/isolate characters.
_CONTROL = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_CONTROL_LINE = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
# What XML 1.0, and so XLSX, cannot hold (openpyxl raises IllegalCharacterError on them).
_XLSX_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f]")
_NAMED = {"\t": "\\t", "\n": "\\n", "\r": "\\r"}


def _escape(m: re.Match[str]) -> str:
    ch = m.group(0)
    return _NAMED.get(ch) or f"\\u{ord(ch):04x}"


def escape_controls(text: str, *, keep_newlines: bool = True) -> str:
    """`text` with control characters written as escapes (`\\u001b`, `\\t`); newlines kept unless told otherwise.

    The escapes are valid inside JSON strings too, so JSON printed through this reads back as the same data.
    """
    return (_CONTROL if keep_newlines else _CONTROL_LINE).sub(_escape, text)


def one_line(text: Any) -> str:
    """Text for one line of a report or a terminal: every control character, newlines included, escaped."""
    return _CONTROL_LINE.sub(_escape, str(text))


def formula_like(text: str) -> bool:
    """Whether a spreadsheet program would take this text for a formula (a plain number is not one)."""
    return text.startswith(FORMULA_START) and _PLAIN_NUMBER.fullmatch(text) is None


def neutralise(value: Any) -> Any:
    """A CSV cell: text a spreadsheet would run as a formula gets a leading `'`; anything else is unchanged."""
    if isinstance(value, str) and formula_like(value):
        return "'" + value
    return value


def neutralise_sql(column: str) -> str:
    """A SQL expression doing `neutralise` to a VARCHAR column (`column` must already be a quoted identifier)."""
    return (
        f"CASE WHEN regexp_matches({column}, '{SQL_FORMULA_START}') "
        f"AND NOT regexp_matches({column}, '{SQL_PLAIN_NUMBER}') THEN '''' || {column} ELSE {column} END"
    )


def neutralise_frame(frame: Any) -> Any:
    """A copy of a pandas frame with `neutralise` applied to its text columns (numbers stay numbers)."""
    out = frame.copy()
    for name in out.columns:
        column = out[name]
        if column.dtype.kind in "biufcmM":
            continue
        try:
            text = column.str
        except AttributeError:  # not one text in the column (only numbers, None, lists ...): nothing to do
            continue
        # cells that are not text come out of the string methods as NA, which `na=False` makes "no formula"
        starts = text.startswith(FORMULA_START, na=False).to_numpy(dtype=bool)
        if not starts.any():
            continue
        maybe = column[starts]
        formula = ~maybe.str.fullmatch(_PLAIN_NUMBER.pattern, na=False).to_numpy(dtype=bool)
        if not formula.any():
            continue
        values = column.astype(object)
        # by position, not index label: a frame's index may repeat
        values.iloc[starts.nonzero()[0][formula]] = ("'" + maybe[formula].astype(object)).to_numpy()
        out[name] = values
    return out


def csv_bytes(frame: Any, *, raw_text: bool = False) -> bytes:
    """A frame as UTF-8 CSV for a download: formula-safe unless `raw_text` (the dashboard's CSV buttons)."""
    text: str = (frame if raw_text else neutralise_frame(frame)).to_csv(index=False)
    return text.encode("utf-8")


def xlsx_text(text: str) -> str:
    """Text an XLSX cell can hold: the characters XML forbids are written as escapes, the rest kept."""
    return _XLSX_ILLEGAL.sub(_escape, text)


def xlsx_value(value: Any) -> Any:
    """A value for an openpyxl cell: text made storable; numbers, dates and None as they are."""
    return xlsx_text(value) if isinstance(value, str) else value


def text_cell(ws: Any, value: Any) -> Any:
    """A cell for a write-only sheet's `append`: text is stored as text (never a formula), numbers as numbers."""
    if not isinstance(value, str):
        return value
    if not value.startswith(FORMULA_START):
        return xlsx_text(value)  # openpyxl stores it as text already; only '=' would make a formula
    from openpyxl.cell import WriteOnlyCell

    cell = WriteOnlyCell(ws, value=xlsx_text(value))
    cell.data_type = "s"
    if formula_like(value):
        cell.quotePrefix = True  # edited in Excel or LibreOffice, the cell stays text
    return cell


def set_text(cell: Any, value: Any) -> Any:
    """Put `value` into a normal sheet's cell the way `text_cell` does; returns the cell."""
    if isinstance(value, str):
        cell.value = xlsx_text(value)
        cell.data_type = "s"
        if formula_like(value):
            cell.quotePrefix = True
    else:
        cell.value = value
    return cell


def safe_row(ws: Any, values: list[Any]) -> list[Any]:
    """`values` ready for `ws.append` on a write-only sheet (see `text_cell`)."""
    return [text_cell(ws, v) for v in values]
