"""Reports of a check run: text for terminals and CI logs, JSON for machines, XLSX for the modelling team."""

from __future__ import annotations

import json
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any, cast

from milepost.validate.cells import one_line, set_text, xlsx_text
from milepost.validate.findings import SEVERITIES, Finding, plural, tally
from milepost.validate.outputs import check_target, save_workbook
from milepost.validate.runner import CheckResult

TEXT_LIMIT = 200
XLSX_COPY_ROWS = 100_000
FILL = {"error": "FFF4B6B6", "warning": "FFFFE699", "note": "FFDDEBF7"}


def summary(result: CheckResult, fail_on: str = "error") -> dict[str, Any]:
    """The summary block shared by every report format."""
    return {
        "rows": result.rows,
        "usable_rows": result.usable_rows,
        "errors": result.counts.get("error", 0),
        "warnings": result.counts.get("warning", 0),
        "notes": result.counts.get("note", 0),
        "passed": result.passed(fail_on),
        "fail_on": fail_on,
        "by_rule": [{"rule": r, "severity": s, "count": n} for r, s, n in result.rule_counts],
        "truncated": result.truncated,
    }


def to_dict(result: CheckResult, fail_on: str = "error") -> dict[str, Any]:
    """The JSON report as plain data."""
    return {
        "milepost": result.version,
        "contract": {"name": result.contract.name, "hash": result.contract.hash},
        "inputs": [
            {"path": i.path, "sha256": i.sha256, "rows": i.rows, "kind": i.kind, "sheet": i.sheet}
            for i in result.inputs
        ],
        "summary": summary(result, fail_on),
        "findings": [_human(f.to_dict()) for f in result.findings],
    }


def _human(row: dict[str, Any]) -> dict[str, Any]:
    """A finding with its sentences (message, hint) safe to print; the data fields keep the file's text."""
    for key in ("message", "hint"):
        if row.get(key) is not None:
            row[key] = one_line(row[key])
    return row


def to_json(result: CheckResult, fail_on: str = "error") -> str:
    """The JSON report (findings capped per rule; `summary.truncated` says whether any were left out)."""
    return json.dumps(to_dict(result, fail_on), indent=2, ensure_ascii=False)


def finding_line(f: Finding) -> str:
    """One finding as a compiler-style line: `file:line: severity rule: message (hint)`."""
    where = one_line(f.path or "-")
    if f.line is not None:
        where += f":{f.line}"
    if f.sheet:
        where += f" [{one_line(f.sheet)}]"
    text = f"{where}: {f.severity} {f.rule}: {one_line(f.message)}"
    if f.hint:
        text += f" — {one_line(f.hint)}"
    return text


def _collapse(findings: list[Finding], keep: int = 3) -> list[tuple[Finding, list[Finding]]]:
    """Runs of the same rule and message in one file: the first `keep` are shown, the rest folded into a count."""
    out: list[tuple[Finding, list[Finding]]] = []
    run: list[Finding] = []

    def flush() -> None:
        out.extend((f, []) for f in run[:keep])
        if len(run) > keep:
            out[-1] = (out[-1][0], run[keep:])

    for f in findings:
        if run and (f.path, f.rule, f.message) != (run[0].path, run[0].rule, run[0].message):
            flush()
            run = []
        run.append(f)
    flush()
    return out


def folded_lines(findings: list[Finding]) -> Iterator[str]:
    """Findings as lines, runs of the same rule and message in one file folded: the way every command lists them."""
    for f, repeats in _collapse(findings):
        yield finding_line(f)
        if repeats:
            yield f"  … and {len(repeats)} more like it on lines {_ranges([r.line for r in repeats])}"


def _ranges(lines: list[int | None]) -> str:
    nums = sorted({n for n in lines if n is not None})
    parts, start = [], None
    for a, b in zip(nums, [*nums[1:], None], strict=True):
        start = a if start is None else start
        if b != a + 1:
            parts.append(f"{start}–{a}" if a != start else f"{a}")
            start = None
    return ", ".join(parts[:6]) + (" …" if len(parts) > 6 else "")


def to_text(result: CheckResult, fail_on: str = "error", limit: int = TEXT_LIMIT) -> Iterator[str]:
    """Plain lines: inputs, a count per rule, the findings (up to `limit`, 0 = all), and a one-line verdict."""
    c = result.contract
    yield f"milepost {result.version} · contract {c.name} ({c.hash[:12]})"
    for i in result.inputs:
        sheet = f" [{one_line(i.sheet)}]" if i.sheet else ""
        notes = f" ({one_line('; '.join(i.notes))})" if i.notes else ""
        yield f"  {one_line(i.path)}{sheet}: {i.kind}, {i.rows} rows{notes}"
    if result.rule_counts:
        yield ""
        yield "rule                    severity   count"
        for rule, sev, n in result.rule_counts:
            yield f"{rule:<24}{sev:<11}{n}"
        yield ""
    shown = result.findings[: limit or None]
    yield from folded_lines(shown)
    total = sum(result.counts.values())
    if total > len(shown):
        yield f"… {plural(total - len(shown), 'more finding')} (see --format json or xlsx)"
    verdict = "PASSED" if result.passed(fail_on) else "FAILED"
    yield (f"{verdict}: {tally(result.counts)} in {plural(result.rows, 'row')} (fail on {fail_on})")


def print_text(result: CheckResult, fail_on: str = "error", limit: int = TEXT_LIMIT, file: Any = None) -> None:
    """Print the text report with rich colours where the terminal has them (plain in CI logs)."""
    from rich.console import Console
    from rich.markup import escape

    console = Console(file=file, highlight=False, soft_wrap=True)
    style = {"error": "red", "warning": "yellow", "note": "cyan"}
    for line in to_text(result, fail_on, limit):
        marked = escape(line)
        for sev in SEVERITIES:
            marked = marked.replace(f": {sev} ", f": [{style[sev]}]{sev}[/] ", 1)
        if line.startswith(("PASSED", "FAILED")):
            marked = f"[bold {'green' if line.startswith('PASSED') else 'red'}]{marked}[/]"
        console.print(marked)


def _raw_rows(
    result: CheckResult, path: str, sheet: str | None, limit: int
) -> tuple[list[str], list[tuple[int, list[Any]]]]:
    """Header and (line, cells) of a submission file as it stands, for the highlighted copy."""
    p = Path(path)
    rows: list[tuple[int, list[Any]]] = []
    if p.suffix.lower() in (".xlsx", ".xlsm"):
        from milepost.validate.xlsx import open_workbook

        # The checker's own streaming reader: the same rows and lines as the check, within the same limits
        # (a sheet that claims a million rows is not expanded here either).
        wb = open_workbook(str(p), result.contract.limits)
        try:
            it = wb.rows(sheet or wb.worksheets()[0])
            first = next(it, None)
            header = [h if h is not None else "" for h in first[1]] if first else []
            for n, r in it:
                if len(rows) >= limit:
                    break
                rows.append((n, list(r)))
        finally:
            wb.close()
        return header, rows
    if p.suffix.lower() in (".parquet", ".pq"):
        rel = result.con.execute("SELECT * FROM read_parquet(?) LIMIT ?", [str(p), limit])
        return [d[0] for d in rel.description], [(n, list(r)) for n, r in enumerate(rel.fetchall(), start=2)]
    import csv

    from milepost.validate.readers import sniff_csv

    d = sniff_csv(p)
    # The csv module keeps physical line numbers (reader.line_num), so the copy's rows are the file's lines.
    with p.open(encoding="utf-8-sig" if d.encoding == "utf-8" else d.encoding, newline="") as f:
        reader = csv.reader(f, delimiter=d.delimiter)
        header = next(reader, [])
        while len(rows) < limit:
            start = reader.line_num + 1  # a record with a quoted newline is marked on its first line, as found
            cells = next(reader, None)
            if cells is None:
                break
            if cells:
                rows.append((start, cells))
    return header, rows


# The findings sheet, for people: where, what was found against what was expected, then the row's key. `found` is
# the offending cell as written; `value` is the row's value (from the copy), so an unknown variable's name is
# never shown as a value.
XLSX_FINDING_COLUMNS = (
    "severity",
    "rule",
    "path",
    "sheet",
    "line",
    "cell",
    "column_name",
    "found",
    "expected",
    "message",
    "hint",
    "model",
    "scenario",
    "region",
    "variable",
    "unit",
    "year",
    "value",
)
XLSX_WIDTHS = {"path": 24, "message": 70, "hint": 50, "expected": 22, "found": 22, "rule": 20, "variable": 26}
_INTEGER = re.compile(r"[+-]?\d+")
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_YEAR_HEADER = re.compile(r"\d{4}")


def _number(text: Any, whole: bool) -> Any:
    """A cell of a numeric column as a number where its text is a clean one (years whole); else the text."""
    if not isinstance(text, str):
        return text
    t = text.strip()
    if whole and _INTEGER.fullmatch(t):
        return int(t)
    if _NUMBER.fullmatch(t):
        number = float(t)
        return int(number) if whole and number.is_integer() else number
    return text


def _found(text: Any, column: str | None) -> Any:
    """The offending cell for the findings sheet: a number where it is one of a numeric column, else the text."""
    name = (column or "").strip().lower()
    if name in ("value", "year") or _YEAR_HEADER.fullmatch(name):
        return _number(text, name == "year")
    return text


def _widths(sheet: Any, header: list[str], rows: list[tuple[int, list[Any]]], fixed: dict[str, int]) -> None:
    from openpyxl.utils import get_column_letter

    for j, name in enumerate(header, start=1):
        width = fixed.get(name)
        if width is None:
            sample = [len(str(r[j - 1])) for _, r in rows[:200] if j - 1 < len(r) and r[j - 1] is not None]
            width = min(max([len(str(name)), *sample]) + 2, 60)
        sheet.column_dimensions[get_column_letter(j)].width = max(width, 6)


def _copy_sheet(wb: Any, title: str, header: list[str], rows: list[tuple[int, list[Any]]]) -> dict[str, int]:
    """A copy of a data file: lines kept, years and values as numbers, text as text; returns column -> index."""
    from openpyxl.styles import Font

    sheet = wb.create_sheet(title)
    lower = {str(h).strip().lower(): j for j, h in enumerate(header, start=1)}
    whole = {lower[c] for c in ("year",) if c in lower}
    numeric = whole | {lower["value"]} if "value" in lower else set(whole)
    numeric |= {j for h, j in lower.items() if _YEAR_HEADER.fullmatch(h)}  # wide tables: one column per year
    for j, h in enumerate(header, start=1):
        set_text(sheet.cell(row=1, column=j), h).font = Font(bold=True)
    width = len(header)
    for line, cells in rows:
        for j, v in enumerate(cells[:width], start=1):
            if v is None or v == "":
                continue
            value = _number(v, j in whole) if j in numeric else v
            set_text(sheet.cell(row=line, column=j), value)
    sheet.freeze_panes = "A2"
    _widths(sheet, header, rows, {})
    return lower


def to_xlsx(result: CheckResult, path: str | Path, fail_on: str = "error", *, force: bool = False) -> Path:
    """Workbook: `summary`, `findings` (each line a link to its cell), and per data file a copy with the
    offending cells coloured and commented. Refuses to overwrite an input or a file that is not ours."""
    import openpyxl
    from openpyxl.comments import Comment
    from openpyxl.styles import Font, PatternFill
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.hyperlink import Hyperlink
    from openpyxl.worksheet.worksheet import Worksheet

    path = Path(path)
    check_target(path, inputs=[i.path for i in result.inputs], force=force)
    wb = openpyxl.Workbook()
    ws = cast(Worksheet, wb.active)  # a new workbook's active sheet is its one worksheet
    ws.title = "summary"
    s = summary(result, fail_on)
    for row in (
        ["milepost", result.version],
        ["contract", result.contract.name],
        ["contract hash", result.contract.hash],
        ["verdict", "PASSED" if s["passed"] else "FAILED"],
        ["rows", s["rows"]],
        ["errors", s["errors"]],
        ["warnings", s["warnings"]],
        ["notes", s["notes"]],
        [],
        ["input", "kind", "rows", "sha256"],
    ):
        ws.append([xlsx_text(v) if isinstance(v, str) else v for v in row])
    for i in result.inputs:
        ws.append([xlsx_text(i.path), i.kind, i.rows, i.sha256])
    ws.append([])
    ws.append(["rule", "severity", "count"])
    for r, sev, n in result.rule_counts:
        ws.append([r, sev, n])
    if result.truncated:
        ws.append([])
        ws.append(["Only the first findings of each rule are listed; the counts above are complete."])
    for letter, width in zip("ABCD", (40, 12, 12, 66), strict=True):
        ws.column_dimensions[letter].width = width

    fs = wb.create_sheet("findings")
    fs.append(list(XLSX_FINDING_COLUMNS))
    for c in fs[1]:
        c.font = Font(bold=True)
    fs.freeze_panes = "A2"

    copies: dict[tuple[str, str | None], tuple[str, dict[str, int], dict[int, list[Any]]]] = {}
    notes: dict[str, dict[tuple[int, int], list[Finding]]] = {}
    for n, inp in enumerate(i for i in result.inputs if i.kind == "data"):
        title = f"copy {n + 1}"
        if inp.rows > XLSX_COPY_ROWS:
            sheet = wb.create_sheet(title)
            sheet.append(
                [
                    f"{xlsx_text(inp.path)} has {inp.rows} rows; copies are made up to {XLSX_COPY_ROWS} rows. "
                    "Use the findings sheet (file and line) instead."
                ]
            )
            continue
        header, rows = _raw_rows(result, inp.path, inp.sheet, XLSX_COPY_ROWS)
        lower = _copy_sheet(wb, title, header, rows)
        copies[(inp.path, inp.sheet)] = (title, lower, dict(rows))
        notes[title] = {}
        ws.append([])
        ws.append([f"sheet '{title}' is a copy of {xlsx_text(inp.path)}: row numbers are the file's lines"])

    link_font = Font(color="FF0563C1", underline="single")
    line_col = XLSX_FINDING_COLUMNS.index("line") + 1
    cell_col = XLSX_FINDING_COLUMNS.index("cell") + 1
    for at, f in enumerate(result.findings, start=2):
        copy = copies.get((f.path or "", f.sheet)) or copies.get((f.path or "", None))
        ref = row_value = None
        if copy is not None and f.line is not None:
            title, lower, lines = copy
            # A finding about a row but no particular cell (an unsplittable line) marks the value cell.
            j = lower.get((f.column_name or "value").lower(), 1) if f.line > 1 else 1
            ref = f"{get_column_letter(j)}{f.line}"
            notes[title].setdefault((f.line, j), []).append(f)
            cells = lines.get(f.line)
            if cells is not None and "value" in lower and lower["value"] - 1 < len(cells):
                row_value = _number(cells[lower["value"] - 1], False)
        record = f.to_dict()
        values = {
            **record,
            "cell": ref,
            "found": _found(record["value"], f.column_name),
            "value": row_value,
            "message": one_line(f.message),
            "hint": one_line(f.hint) if f.hint else None,
        }
        for j, name in enumerate(XLSX_FINDING_COLUMNS, start=1):
            set_text(fs.cell(row=at, column=j), values[name])
        if ref is not None and copy is not None:
            location = f"'{copy[0]}'!{ref}"
            for j in (line_col, cell_col):
                c = fs.cell(row=at, column=j)
                c.hyperlink = Hyperlink(ref=c.coordinate, location=location, tooltip=f"go to {location}")
                c.font = link_font
    fs.auto_filter.ref = fs.dimensions
    for j, name in enumerate(XLSX_FINDING_COLUMNS, start=1):
        fs.column_dimensions[get_column_letter(j)].width = XLSX_WIDTHS.get(name, max(len(name) + 3, 9))

    for title, marks in notes.items():
        sheet = wb[title]
        for (line, j), found in marks.items():
            cell = sheet.cell(row=line, column=j)
            worst = min((f.severity for f in found), key=SEVERITIES.index)
            cell.fill = PatternFill("solid", fgColor=FILL[worst])
            text = "\n".join(
                f"{f.rule}: {one_line(f.message)}" + (f" ({one_line(f.hint)})" if f.hint else "") for f in found
            )
            cell.comment = Comment(xlsx_text(text[:2000]), "milepost")
    save_workbook(wb, path, "report")
    return path
