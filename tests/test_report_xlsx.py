"""The XLSX report a modelling team fixes its file in: numbers as numbers, links from findings to cells, widths."""

from __future__ import annotations

from pathlib import Path

import openpyxl
import pytest

from milepost.validate.reports import XLSX_FINDING_COLUMNS, to_xlsx

from builders import consistent_rows, line_of, table_of, write_csv, write_xlsx


@pytest.fixture(scope="module")
def report(tmp_path_factory: pytest.TempPathFactory, basic) -> tuple[openpyxl.Workbook, list[dict]]:
    from milepost.validate.runner import run_check

    folder = tmp_path_factory.mktemp("report")
    rows = consistent_rows(basic)
    rows[20]["variable"] = "emisions.co2"
    rows[30]["value"] = "12,5x"
    methane = next(i for i, r in enumerate(rows) if r["variable"] == "emissions.ch4" and r["region"] == "Estrel")
    rows[methane]["value"] = -4.0
    data = write_csv(folder / "sub.csv", rows)
    result = run_check([data], basic)
    out = to_xlsx(result, folder / "report.xlsx")
    result.con.close()
    return openpyxl.load_workbook(out), rows


def _findings(wb: openpyxl.Workbook) -> list[dict]:
    ws = wb["findings"]
    header = [c.value for c in ws[1]]
    assert header == list(XLSX_FINDING_COLUMNS)
    return [dict(zip(header, r, strict=True)) | {"_row": i} for i, r in enumerate(ws.iter_rows(min_row=2), start=2)]


def test_the_copy_holds_years_and_values_as_numbers(report) -> None:
    wb, rows = report
    copy = wb["copy 1"]
    header = [c.value for c in copy[1]]
    year, value = header.index("year") + 1, header.index("value") + 1
    assert copy.cell(row=2, column=year).value == rows[0]["year"]
    assert copy.cell(row=2, column=year).data_type == "n" and isinstance(copy.cell(row=2, column=year).value, int)
    assert copy.cell(row=2, column=value).value == pytest.approx(rows[0]["value"])
    assert isinstance(copy.cell(row=2, column=value).value, float)
    assert copy.cell(row=32, column=value).value == "12,5x"  # text that is no number stays as written
    assert copy.freeze_panes == "A2" and wb["findings"].freeze_panes == "A2"
    assert all(copy.column_dimensions[letter].width >= 6 for letter in "ABCDEFG")
    assert wb["findings"].column_dimensions["J"].width == 70  # the message column is wide enough to read


def test_each_finding_links_to_its_cell_in_the_copy(report) -> None:
    wb, rows = report
    found = _findings(wb)
    unknown = next(f for f in found if f["rule"].value == "unknown-variable")
    line = line_of(rows, variable="emisions.co2")
    assert unknown["line"].value == line and unknown["cell"].value == f"D{line}"
    for key in ("line", "cell"):
        link = unknown[key].hyperlink
        assert link is not None and link.location == f"'copy 1'!D{line}"
    target = wb["copy 1"][f"D{line}"]
    assert target.value == "emisions.co2" and "unknown-variable" in target.comment.text
    bad = next(f for f in found if f["rule"].value == "bad-value")
    assert bad["cell"].value == "G32" and bad["line"].hyperlink.location == "'copy 1'!G32"
    assert bad["found"].value == "12,5x"  # not a number: the text as written
    sign = next(f for f in found if f["rule"].value == "sign")
    assert sign["found"].value == -4 and sign["found"].data_type == "n"  # a negative number stays a number
    assert sign["value"].value == -4 and sign["line"].hyperlink.location == f"'copy 1'!G{sign['line'].value}"


def test_the_offending_text_and_the_rows_value_have_their_own_columns(report) -> None:
    wb, rows = report
    unknown = next(f for f in _findings(wb) if f["rule"].value == "unknown-variable")
    assert unknown["found"].value == "emisions.co2" and unknown["column_name"].value == "variable"
    # the value column holds the row's value (a number), never the variable's name
    assert unknown["value"].value == pytest.approx(rows[20]["value"]) and unknown["value"].data_type == "n"
    assert unknown["year"].value == rows[20]["year"] and unknown["year"].data_type == "n"


def test_an_xlsx_submission_is_copied_with_its_numbers(tmp_path: Path, basic) -> None:
    from milepost.validate.runner import run_check

    rows = consistent_rows(basic)
    rows[4]["region"] = "Atlantis"
    sub = write_xlsx(tmp_path / "sub.xlsx", {"data": table_of(rows)})
    result = run_check([sub], basic)
    out = openpyxl.load_workbook(to_xlsx(result, tmp_path / "r.xlsx"))
    result.con.close()
    f = next(f for f in _findings(out) if f["rule"].value == "unknown-region")
    assert f["line"].value == 6 and f["line"].hyperlink.location == "'copy 1'!C6"
    assert isinstance(out["copy 1"]["F6"].value, int) and isinstance(out["copy 1"]["G6"].value, float)
