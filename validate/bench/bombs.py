"""Hostile files (small on disk, huge once read) and `make bench`'s "bombs" step: peak memory and time of
`milepost check` on each, against the 1 GiB target and a floor measured in the same run.

The generators are plain functions so the tests build the same files (smaller) and assert their findings.
"""

from __future__ import annotations

import sys
import zipfile
from collections.abc import Callable, Iterable, Sequence
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

HEADER = ("model", "scenario", "region", "variable", "unit", "year", "value")
MEMORY_TARGET_MB = 1024  # the target for every file of the bad-input corpus

_CONTENT_TYPES = (
    '<?xml version="1.0" encoding="UTF-8"?>'
    '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
    '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
    '<Default Extension="xml" ContentType="application/xml"/>'
    '<Override PartName="/xl/workbook.xml" '
    'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
    "{sheets}</Types>"
)
_ROOT_RELS = (
    '<?xml version="1.0" encoding="UTF-8"?>'
    '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
    '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/'
    'officeDocument" Target="xl/workbook.xml"/></Relationships>'
)
_NS = 'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"'
_RNS = 'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"'
_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/"


def _column(i: int) -> str:
    name = ""
    i += 1
    while i:
        i, rem = divmod(i - 1, 26)
        name = chr(65 + rem) + name
    return name


def sheet_xml(rows: Iterable[Sequence[Any]], dimension: str | None = None, start: int = 1) -> Iterable[str]:
    """A worksheet's XML in pieces: inline strings and numbers, `dimension` written as given (it may lie)."""
    yield f'<?xml version="1.0" encoding="UTF-8"?><worksheet {_NS}>'
    if dimension:
        yield f'<dimension ref="{dimension}"/>'
    yield "<sheetData>"
    for n, row in enumerate(rows, start=start):
        cells = []
        for i, v in enumerate(row):
            ref = f"{_column(i)}{n}"
            if v is None:
                continue
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                cells.append(f'<c r="{ref}"><v>{v}</v></c>')
            else:
                cells.append(f'<c r="{ref}" t="inlineStr"><is><t>{escape(str(v))}</t></is></c>')
        yield f'<row r="{n}">{"".join(cells)}</row>'
    yield "</sheetData></worksheet>"


def write_xlsx(
    path: Path,
    sheets: dict[str, Iterable[str] | str],
    *,
    chartsheets: Sequence[str] = (),
    extra: dict[str, str] | None = None,
) -> Path:
    """A minimal workbook written part by part: `sheets` maps sheet names to their XML (a string or pieces, so
    a huge part streams into the zip without being held), `extra` adds parts such as xl/sharedStrings.xml."""
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        overrides = "".join(
            f'<Override PartName="/xl/worksheets/sheet{i}.xml" '
            'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            for i in range(1, len(sheets) + 1)
        )
        z.writestr("[Content_Types].xml", _CONTENT_TYPES.format(sheets=overrides))
        z.writestr("_rels/.rels", _ROOT_RELS)
        entries, rels = [], []
        names = [*chartsheets, *sheets]  # chartsheets first: a reader must skip them to find the data
        for i, name in enumerate(names, start=1):
            entries.append(f'<sheet name="{escape(name, {chr(34): "&quot;"})}" sheetId="{i}" r:id="rId{i}"/>')
            if name in sheets:
                rels.append(f'<Relationship Id="rId{i}" Type="{_REL}worksheet" Target="worksheets/sheet{i}.xml"/>')
            else:
                rels.append(f'<Relationship Id="rId{i}" Type="{_REL}chartsheet" Target="chartsheets/sheet{i}.xml"/>')
        z.writestr(
            "xl/workbook.xml",
            f'<?xml version="1.0" encoding="UTF-8"?><workbook {_NS} {_RNS}><sheets>{"".join(entries)}</sheets>'
            "</workbook>",
        )
        z.writestr(
            "xl/_rels/workbook.xml.rels",
            '<?xml version="1.0" encoding="UTF-8"?>'
            f'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">{"".join(rels)}'
            "</Relationships>",
        )
        for i, name in enumerate(names, start=1):
            if name in sheets:
                body = sheets[name]
                with z.open(f"xl/worksheets/sheet{i}.xml", "w", force_zip64=True) as f:
                    for piece in [body] if isinstance(body, str) else body:
                        f.write(piece.encode("utf-8"))
            else:
                z.writestr(f"xl/chartsheets/sheet{i}.xml", f"<chartsheet {_NS}/>")
        for part, text in (extra or {}).items():
            z.writestr(part, text)
    return path


def empty_rows_csv(path: Path, rows: int = 1_000_000) -> Path:
    """A header and `rows` lines of empty cells (7 MB for a million): every cell is a finding."""
    with path.open("w") as f:
        f.write(",".join(HEADER) + "\n")
        chunk = ",,,,,,\n" * 10_000
        for _ in range(rows // 10_000):
            f.write(chunk)
        f.write(",,,,,,\n" * (rows % 10_000))
    return path


def unknown_variables_csv(path: Path, n: int = 300_000) -> Path:
    """`n` rows, each with its own variable name the contract does not know (11 MB for 300,000)."""
    with path.open("w") as f:
        f.write(",".join(HEADER) + "\n")
        for start in range(0, n, 10_000):
            f.write(
                "".join(
                    f"M,S,World,Made|Up|Name {i:07d},Mt CO2/yr,2020,1\n" for i in range(start, min(n, start + 10_000))
                )
            )
    return path


def huge_cell_xlsx(path: Path, chars: int = 300_000_000) -> Path:
    """One cell of `chars` characters (300 MB of text in a zip of about 300 KB)."""

    def pieces() -> Iterable[str]:
        head = list(sheet_xml([HEADER]))
        yield from head[:-1]
        yield '<row r="2"><c r="A2" t="inlineStr"><is><t>'
        block = "a" * (1 << 20)
        for _ in range(chars // len(block)):
            yield block
        yield "a" * (chars % len(block))
        yield "</t></is></c></row>"
        yield head[-1]

    return write_xlsx(path, {"data": pieces()})


def lying_dimension_xlsx(path: Path) -> Path:
    """A two-row sheet whose dimension claims every row Excel allows, and one far-away empty row (1.7 KB)."""
    rows = [HEADER, ("M", "S", "World", "Emissions|CO2", "Mt CO2/yr", 2020, 1.0)]
    body = "".join(sheet_xml(rows, dimension="A1:XFD1048576"))
    body = body.replace("</sheetData>", '<row r="1048576"/></sheetData>')
    return write_xlsx(path, {"data": body})


def many_columns_csv(path: Path, columns: int = 100_000) -> Path:
    """A header of the long-format names plus `columns` more, and one row."""
    names = [*HEADER, *(f"x{i}" for i in range(columns))]
    path.write_text(",".join(names) + "\n" + ",".join(["1"] * len(names)) + "\n")
    return path


def blank_lines_csv(path: Path, lines: int = 100_000_000, every: int = 500_000) -> Path:
    """A header and rows, each followed by `every` empty lines, `lines` of them in all (100 MB): DuckDB skips the
    empty lines, so the physical line of each row has to be counted through all of them. (A run of more than a
    million empty lines is one line too long for DuckDB, `max_line_bytes`.)"""
    row = "M,S,World,Made|Up|Name,Mt CO2/yr,2020,1\n"
    with path.open("w") as f:
        f.write(",".join(HEADER) + "\n")
        block = row + "\n" * every
        for _ in range(lines // every):
            f.write(block)
        f.write(row)
    return path


BOMBS: dict[str, Callable[[Path], Path]] = {
    "empty-rows.csv": empty_rows_csv,
    "blank-lines.csv": blank_lines_csv,
    "unknown-variables.csv": unknown_variables_csv,
    "huge-cell.xlsx": huge_cell_xlsx,
    "lying-dimension.xlsx": lying_dimension_xlsx,
    "many-columns.csv": many_columns_csv,
}


def run(workdir: Path, repeat: int = 1) -> list[dict[str, Any]]:
    """`milepost check` of each bomb in a fresh process: time, peak memory against the 1 GiB target, exit code."""
    import json

    from milepost.validate.bench.check import DEMO_CONTRACT, timed

    folder = workdir / "bombs"
    folder.mkdir(parents=True, exist_ok=True)
    floor = timed([sys.executable, "-c", "import duckdb"], 3)
    results = []
    for name, make in BOMBS.items():
        path = folder / name
        if not path.exists():
            make(path)
        report = folder / f"{name}.json"
        cmd = [sys.executable, "-m", "milepost.validate", "check", str(path), "--contract", str(DEMO_CONTRACT)]
        got = timed([*cmd, "-f", "json", "-o", str(report)], repeat)
        rules = sorted({f["rule"] for f in json.loads(report.read_text())["findings"]}) if report.exists() else []
        results.append(
            {
                "step": f"milepost check, bomb {name} ({path.stat().st_size / 1e6:.1f} MB on disk; exit {got['exit']}; "
                f"{', '.join(rules[:3]) or 'no report'}; memory target {MEMORY_TARGET_MB} MB)",
                "seconds": got["seconds"],
                "floor_seconds": floor["seconds"],
                "ratio": got["seconds"] / floor["seconds"],
                "peak_mb": got["peak_mb"],
                "floor": "python -c 'import duckdb', fresh process",
                "within_memory_target": got["peak_mb"] <= MEMORY_TARGET_MB,
            }
        )
    # Time grows linearly with the file: 10x the distinct unknown names should take about 10x (start-up aside).
    small = folder / "unknown-variables-30000.csv"
    if not small.exists():
        unknown_variables_csv(small, 30_000)
    base = timed(
        [
            sys.executable,
            "-m",
            "milepost.validate",
            "check",
            str(small),
            "--contract",
            str(DEMO_CONTRACT),
            "-f",
            "json",
            "-o",
            str(folder / "small.json"),
        ],
        repeat,
    )
    big = next(r for r in results if "unknown-variables" in r["step"])
    results.append(
        {
            "step": "milepost check, 300,000 against 30,000 distinct unknown variables (time, start-up included)",
            "seconds": big["seconds"],
            "floor_seconds": base["seconds"],
            "ratio": big["seconds"] / base["seconds"],
            "peak_mb": big["peak_mb"],
            "floor": "the same check of 30,000 names; linear is at most 10x",
            "target": 10.0,
        }
    )
    return results
