"""Reports of a check run: text for terminals and CI logs, JSON for machines, XLSX for the modelling team."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any, cast

from milepost.validate.findings import FINDING_COLUMNS, SEVERITIES, Finding
from milepost.validate.outputs import save_workbook
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
        "findings": [f.to_dict() for f in result.findings],
    }


def to_json(result: CheckResult, fail_on: str = "error") -> str:
    """The JSON report (findings capped per rule; `summary.truncated` says whether any were left out)."""
    return json.dumps(to_dict(result, fail_on), indent=2, ensure_ascii=False)


def finding_line(f: Finding) -> str:
    """One finding as a compiler-style line: `file:line: severity rule: message (hint)`."""
    where = f.path or "-"
    if f.line is not None:
        where += f":{f.line}"
    if f.sheet:
        where += f" [{f.sheet}]"
    text = f"{where}: {f.severity} {f.rule}: {f.message}"
    if f.hint:
        text += f" — {f.hint}"
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
    """Plain lines: inputs, a count per rule, the findings (up to `limit`), and a one-line verdict."""
    c = result.contract
    yield f"milepost {result.version} · contract {c.name} ({c.hash[:12]})"
    for i in result.inputs:
        sheet = f" [{i.sheet}]" if i.sheet else ""
        yield f"  {i.path}{sheet}: {i.kind}, {i.rows} rows" + (f" ({'; '.join(i.notes)})" if i.notes else "")
    if result.rule_counts:
        yield ""
        yield "rule                    severity   count"
        for rule, sev, n in result.rule_counts:
            yield f"{rule:<24}{sev:<11}{n}"
        yield ""
    shown = result.findings[:limit]
    for f, repeats in _collapse(shown):
        yield finding_line(f)
        if repeats:
            yield f"  … and {len(repeats)} more like it on lines {_ranges([r.line for r in repeats])}"
    total = sum(result.counts.values())
    if total > len(shown):
        yield f"… {total - len(shown)} more findings (see --format json or xlsx)"
    verdict = "PASSED" if result.passed(fail_on) else "FAILED"
    yield (
        f"{verdict}: {result.counts.get('error', 0)} errors, {result.counts.get('warning', 0)} warnings, "
        f"{result.counts.get('note', 0)} notes in {result.rows} rows (fail on {fail_on})"
    )


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
        import openpyxl

        wb = openpyxl.load_workbook(p, read_only=True, data_only=True)
        try:
            it = wb[sheet or wb.sheetnames[0]].iter_rows(values_only=True)
            header = [str(h) if h is not None else "" for h in next(it)]
            for n, r in enumerate(it, start=2):
                if n > limit + 1:
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
        for cells in reader:
            if len(rows) >= limit:
                break
            rows.append((reader.line_num, cells))
    return header, rows


def to_xlsx(result: CheckResult, path: str | Path, fail_on: str = "error") -> Path:
    """Workbook: `summary`, `findings`, and per data file a copy with the offending cells coloured and commented."""
    import openpyxl
    from openpyxl.comments import Comment
    from openpyxl.styles import Font, PatternFill
    from openpyxl.worksheet.worksheet import Worksheet

    path = Path(path)
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
        ws.append(row)
    for i in result.inputs:
        ws.append([i.path, i.kind, i.rows, i.sha256])
    ws.append([])
    ws.append(["rule", "severity", "count"])
    for r, sev, n in result.rule_counts:
        ws.append([r, sev, n])
    if result.truncated:
        ws.append([])
        ws.append(["Only the first findings of each rule are listed; the counts above are complete."])
    fs = wb.create_sheet("findings")
    cols = list(FINDING_COLUMNS)
    fs.append(cols)
    for c in fs[1]:
        c.font = Font(bold=True)
    for f in result.findings:
        fs.append([f.to_dict()[c] for c in cols])
    fs.auto_filter.ref = fs.dimensions
    fs.freeze_panes = "A2"

    by_file: dict[str, list[tuple[int, Finding]]] = {}
    for f in result.findings:
        if f.path and f.line is not None:
            by_file.setdefault(f.path, []).append((f.line, f))
    for n, inp in enumerate(i for i in result.inputs if i.kind == "data"):
        title = f"copy {n + 1}"
        sheet = wb.create_sheet(title)
        if inp.rows > XLSX_COPY_ROWS:
            sheet.append(
                [
                    f"{inp.path} has {inp.rows} rows; copies are made up to {XLSX_COPY_ROWS} rows. "
                    "Use the findings sheet (file and line) instead."
                ]
            )
            continue
        header, rows = _raw_rows(result, inp.path, inp.sheet, XLSX_COPY_ROWS)
        sheet.append(header)
        width = len(header)
        for line, cells in rows:
            for j, v in enumerate(cells[:width], start=1):
                sheet.cell(row=line, column=j, value=v)
        lower = {h.strip().lower(): j for j, h in enumerate(header, start=1)}
        notes: dict[tuple[int, int], list[Finding]] = {}
        for at, f in by_file.get(inp.path, []):
            # A finding about a row but no particular cell (an unsplittable line) marks the value cell.
            j = lower.get(f.column_name or "value", 1) if at > 1 else 1
            notes.setdefault((at, j), []).append(f)
        for (line, j), found in notes.items():
            cell = sheet.cell(row=line, column=j)
            worst = min((f.severity for f in found), key=SEVERITIES.index)
            cell.fill = PatternFill("solid", fgColor=FILL[worst])
            text = "\n".join(f"{f.rule}: {f.message}" + (f" ({f.hint})" if f.hint else "") for f in found)
            cell.comment = Comment(text[:2000], "milepost")
        sheet.freeze_panes = "A2"
        sheet["A1"].font = Font(bold=True)
        ws.append([])
        ws.append([f"sheet '{title}' is a copy of {inp.path}: row numbers are the file's lines"])
    save_workbook(wb, path)
    return path
