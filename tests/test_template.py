"""The XLSX submission template: drop-downs on every row, each variable's own units, the scenario attributes."""

from __future__ import annotations

import re
from pathlib import Path

import openpyxl
import pytest
from openpyxl.utils import column_index_from_string

from milepost.validate.template import SHEET_ROWS, unit_choices, write_template

from builders import consistent_rows


@pytest.fixture(scope="module")
def template(tmp_path_factory: pytest.TempPathFactory, demo_contract) -> openpyxl.Workbook:
    out = write_template(demo_contract, tmp_path_factory.mktemp("tpl") / "t.xlsx")
    return openpyxl.load_workbook(out)


def _validations(wb: openpyxl.Workbook) -> dict[str, tuple[str, str]]:
    """Column letter -> (range, formula1) of the data sheet's validations."""
    out = {}
    for dv in wb["data"].data_validations.dataValidation:
        ref = str(dv.sqref)
        out[ref[0]] = (ref, dv.formula1)
    return out


def test_every_row_of_the_sheet_has_the_drop_downs(template) -> None:
    v = _validations(template)
    assert sorted(v) == ["C", "D", "E", "F", "G"]  # region, variable, unit, year, value
    assert all(ref.endswith(f"2:{letter}{SHEET_ROWS}") for letter, (ref, _) in v.items())
    assert SHEET_ROWS == 1_048_576  # the rows of an Excel sheet (Microsoft's "Excel specifications and limits")


def test_the_unit_list_follows_the_variable_of_its_row(template, demo_contract) -> None:
    _, formula = _validations(template)["E"]
    m = re.fullmatch(r'=INDIRECT\("unit_"&MATCH\(\$D2,lists!\$B\$2:\$B\$(\d+),0\)\)', formula)
    assert m, formula
    variables = [c.value for c in template["lists"]["B"][1 : int(m.group(1))]]
    assert variables == list(demo_contract.variables)
    units = template["units"]
    assert units.sheet_state == "hidden"
    # Follow the formula as a spreadsheet would: MATCH gives the variable's position n, unit_n its range.
    for n, variable in enumerate(variables, start=1):
        target = template.defined_names[f"unit_{n}"].attr_text
        sheet, cells = target.split("!")
        first, last = cells.replace("$", "").split(":")
        col = column_index_from_string(re.sub(r"\d", "", first))
        listed = [
            units.cell(row=r, column=col).value
            for r in range(int(re.sub(r"\D", "", first)), int(re.sub(r"\D", "", last)) + 1)
        ]
        assert sheet.strip("'") == "units" and units.cell(row=1, column=col).value == variable
        assert listed[0] == demo_contract.variables[variable].unit
        assert listed == unit_choices(demo_contract)[variable]


def test_the_scenarios_sheet_has_the_contract_attributes(template, demo_contract) -> None:
    header = [c.value for c in template["scenarios"][1]]
    assert header[:3] == ["model", "scenario", "reference"]
    assert set(demo_contract.pairs.match) | {demo_contract.pairs.order} <= set(header)
    (reference,) = template["scenarios"].data_validations.dataValidation
    assert str(reference.sqref) == f"C2:C{SHEET_ROWS}" and reference.formula1 == f"=$B$2:$B${SHEET_ROWS}"


def test_a_listed_unit_is_one_the_checker_converts(tmp_path: Path, basic, check) -> None:
    """A template filled in with a listed unit other than the contract's passes, converted by its SI prefix:
    1 kt = 10^-3 Mt (BIPM, The International System of Units, 9th ed., table 7: k = 10^3, M = 10^6)."""
    choices = unit_choices(basic)
    variable = "emissions.co2.fossil.other"
    assert choices[variable][0] == "Mt CO2/yr" and "kt CO2/yr" in choices[variable]
    out = write_template(basic, tmp_path / "t.xlsx")
    wb = openpyxl.load_workbook(out)
    data = wb["data"]
    rows = consistent_rows(basic)
    columns = ["model", "scenario", "region", "variable", "unit", "year", "value"]
    for i, r in enumerate(rows, start=2):
        if r["variable"] == variable:
            r = {**r, "unit": "kt CO2/yr", "value": r["value"] * 1000}
        for j, k in enumerate(columns, start=1):
            data.cell(row=i, column=j, value=r[k])
    wb.save(out)
    result = check(out, basic)
    assert result.counts["error"] == 0
    converted = [f for f in result.findings if f.rule == "converted-unit"]
    assert converted and all(f.variable == variable for f in converted)
    assert "(factor 0.001)" in converted[0].message
    stored = result.con.execute("SELECT sum(value) FROM checked WHERE variable = ?", [variable]).fetchone()[0]
    assert stored == pytest.approx(sum(r["value"] for r in rows if r["variable"] == variable))


def test_a_csv_template_is_the_header_and_can_be_written_again(tmp_path: Path, basic) -> None:
    out = write_template(basic, tmp_path / "t.csv")
    assert out.read_text() == "model,scenario,region,variable,unit,year,value\n"
    write_template(basic, out)  # our own template: no --force needed
    out.write_text("model,scenario,region,variable,unit,year,value\nM,S,World,x,y,2020,1\n")
    from milepost.validate.errors import UsageError

    with pytest.raises(UsageError, match="--force"):
        write_template(basic, out)  # it holds data now
