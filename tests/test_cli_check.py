"""`milepost check`, `milepost rules` and `milepost contract ...` end to end: exit codes, output, report files."""

from __future__ import annotations

import json

import openpyxl
import pytest
from typer.testing import CliRunner

from milepost.validate.cli import app
from milepost.validate.findings import FINDING_COLUMNS, RULES
from milepost.validate.reports import XLSX_FINDING_COLUMNS

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT

runner = CliRunner()


@pytest.fixture
def broken(tmp_path, basic):
    rows = consistent_rows(basic)
    rows[20]["variable"] = "emisions.co2"
    return write_csv(tmp_path / "broken.csv", rows)


def _run(*args):
    return runner.invoke(app, [str(a) for a in args])


def test_clean_file_exits_0_with_passed_line(tmp_path, basic):
    path = write_csv(tmp_path / "ok.csv", consistent_rows(basic))
    res = _run("check", path, "--contract", BASIC_CONTRACT)
    assert res.exit_code == 0
    lines = res.stdout.splitlines()
    assert lines[0].startswith("milepost 0.1.0 · contract test-basic (")
    assert lines[1] == f"  {path}: data, 816 rows"
    assert lines[-1] == "PASSED: 0 errors, 0 warnings, 0 notes in 816 rows (fail on error)"


def test_findings_exit_1_with_compiler_style_lines(broken):
    res = _run("check", broken, "--contract", BASIC_CONTRACT)
    assert res.exit_code == 1
    assert (
        f"{broken}:22: error unknown-variable: variable emisions.co2 is not in the contract — "
        "Did you mean emissions.co2?"
    ) in res.stdout.splitlines()
    assert res.stdout.splitlines()[-1].startswith("FAILED: ")


def test_fail_on_warning(tmp_path, basic):
    rows = consistent_rows(basic)
    rows.append(dict(rows[0]))
    path = write_csv(tmp_path / "dup.csv", rows)
    assert _run("check", path, "--contract", BASIC_CONTRACT).exit_code == 0
    assert _run("check", path, "--contract", BASIC_CONTRACT, "--fail-on", "warning").exit_code == 1


def test_json_report_shape(broken):
    res = _run("check", broken, "--contract", BASIC_CONTRACT, "--format", "json")
    assert res.exit_code == 1
    report = json.loads(res.stdout)
    assert set(report) == {"milepost", "contract", "inputs", "summary", "findings"}
    assert set(report["contract"]) == {"name", "hash"}
    assert set(report["inputs"][0]) >= {"path", "sha256", "rows"}
    assert {"rows", "errors", "warnings", "notes", "passed"} <= set(report["summary"])
    assert report["summary"]["passed"] is False and report["summary"]["errors"] >= 1
    f = next(f for f in report["findings"] if f["rule"] == "unknown-variable")
    assert list(f) == list(FINDING_COLUMNS)
    assert (f["line"], f["value"], f["expected"], f["sheet"]) == (22, "emisions.co2", "emissions.co2", None)


def test_xlsx_report_highlights_the_cell(tmp_path, broken):
    out = tmp_path / "report.xlsx"
    res = _run("check", broken, "--contract", BASIC_CONTRACT, "--format", "xlsx", "-o", out)
    assert res.exit_code == 1
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames[:2] == ["summary", "findings"]
    copy = wb["copy 1"]
    cell = copy.cell(row=22, column=4)  # line 22, column `variable`
    assert cell.value == "emisions.co2"
    assert cell.fill.fgColor.rgb == "FFF4B6B6"
    assert "unknown-variable" in cell.comment.text
    header = [c.value for c in wb["findings"][1]]
    assert header == list(XLSX_FINDING_COLUMNS)


def test_xlsx_needs_output(broken):
    res = _run("check", broken, "--format", "xlsx")
    assert res.exit_code == 2
    assert res.stderr.strip() == "Error: --format xlsx needs --output FILE.xlsx"


def test_missing_contract_folder_is_a_usage_error(broken, tmp_path):
    res = _run("check", broken, "--contract", tmp_path / "nope")
    assert res.exit_code == 2
    assert res.stderr.strip() == f"Error: contract folder {tmp_path / 'nope'} does not exist"


def test_invalid_contract_is_exit_2(broken, tmp_path):
    (tmp_path / "c").mkdir()
    (tmp_path / "c" / "contract.toml").write_text('name = "bad"\nextends = "core"\n')
    (tmp_path / "c" / "variables.toml").write_text('["population"]\nunit = "blorbs"\n')
    res = _run("check", broken, "--contract", tmp_path / "c")
    assert res.exit_code == 2
    assert res.stderr.startswith("Error: the contract bad is invalid: population: unknown unit 'blorbs'")


def test_rules_lists_every_rule():
    res = _run("rules")
    assert res.exit_code == 0
    assert [line.split()[0] for line in res.stdout.splitlines()] == list(RULES)


def test_contract_show_json_and_lint(tmp_path):
    res = _run("contract", "show", BASIC_CONTRACT, "--format", "json")
    assert res.exit_code == 0
    assert json.loads(res.stdout)["name"] == "test-basic"
    lint = _run("contract", "lint", BASIC_CONTRACT)
    assert lint.exit_code == 0 and lint.stdout.startswith("PASSED: contract test-basic")


def test_template_xlsx_has_dropdowns_and_round_trips(tmp_path, basic):
    out = tmp_path / "t.xlsx"
    res = _run("contract", "template", BASIC_CONTRACT, "-o", out)
    assert res.exit_code == 0
    wb = openpyxl.load_workbook(out)
    data = wb["data"]
    assert [c.value for c in data[1]] == ["model", "scenario", "region", "variable", "unit", "year", "value"]
    formulas = {dv.formula1 for dv in data.data_validations.dataValidation}
    assert any(f.startswith("=lists!$B$2") for f in formulas)
    variables = [c.value for c in wb["lists"]["B"][1:] if c.value]
    assert variables == list(basic.variables)
    # A filled-in template is a valid submission.
    for i, r in enumerate(consistent_rows(basic), start=2):
        for j, k in enumerate(["model", "scenario", "region", "variable", "unit", "year", "value"], start=1):
            data.cell(row=i, column=j, value=r[k])
    wb.save(out)
    assert _run("check", out, "--contract", BASIC_CONTRACT).exit_code == 0


def test_template_csv(tmp_path):
    out = tmp_path / "t.csv"
    assert _run("contract", "template", "-o", out).exit_code == 0
    assert out.read_text() == "model,scenario,region,variable,unit,year,value\n"


def test_every_command_has_help():
    for args in (["check"], ["rules"], ["contract", "lint"], ["contract", "show"], ["contract", "template"]):
        res = _run(*args, "--help")
        assert res.exit_code == 0 and len(res.stdout.strip()) > 40, args


def test_text_report_folds_repeated_findings(tmp_path, basic):
    rows = consistent_rows(basic)
    for r in rows[10:20]:
        r["variable"] = "emisions.co2"
    path = write_csv(tmp_path / "many.csv", rows)
    lines = _run("check", path, "--contract", BASIC_CONTRACT).stdout.splitlines()
    shown = [line for line in lines if "unknown-variable: " in line]
    assert [line.split(":")[1] for line in shown] == ["12", "13", "14"]
    assert "  … and 7 more like it on lines 15–21" in lines
