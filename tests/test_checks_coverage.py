"""Coverage family: missing-required at the base year and milestones, per scenario."""

from __future__ import annotations

from builders import consistent_rows, write_csv
from conftest import rules_at


def test_missing_required_variable_at_a_milestone(tmp_path, basic, check):
    rows = consistent_rows(basic) + consistent_rows(basic, scenario="S2")
    rows = [
        r
        for r in rows
        if not (r["scenario"] == "S2" and r["variable"] == "gdp.mer" and r["region"] == "World" and r["year"] == 2050)
    ]
    result = check(write_csv(tmp_path / "m.csv", rows), basic)
    (f,) = rules_at(result, "missing-required")
    assert (f.model, f.scenario, f.region, f.variable, f.year, f.line) == ("M1", "S2", "World", "gdp.mer", 2050, None)
    assert f.expected == "a value of gdp.mer in billion USD_2015/yr"


def test_optional_variables_may_be_left_out(tmp_path, basic, check):
    rows = [r for r in consistent_rows(basic) if not r["variable"].startswith("energy.")]
    assert rules_at(check(write_csv(tmp_path / "o.csv", rows), basic), "missing-required") == []


def test_a_row_with_another_error_does_not_count_as_reported(tmp_path, basic, check):
    rows = consistent_rows(basic)
    i = next(
        i for i, r in enumerate(rows) if r["variable"] == "population" and r["region"] == "World" and r["year"] == 2020
    )
    rows[i]["value"] = "n/a"
    result = check(write_csv(tmp_path / "e.csv", rows), basic)
    assert [f.year for f in rules_at(result, "missing-required") if f.variable == "population"] == [2020]
