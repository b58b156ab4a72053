"""Scenarios family: the scenarios table against the data, references, and a submission without data rows.
Each test breaks exactly one rule of a consistent two-scenario submission (a policy run and its reference)."""

from __future__ import annotations

import duckdb
import pytest

from milepost.schema.contract import load
from milepost.validate.store.indicators import compute_indicators

from builders import consistent_rows, table_of, write_csv, write_xlsx
from conftest import BASIC_CONTRACT, rules_at

NEW_RULES = (
    "no-data-rows",
    "unknown-reference",
    "scenario-without-data",
    "scenario-not-listed",
    "missing-reference",
    "reference-cycle",
)


def _scenarios(path, rows: list[tuple[str, str, str]]):
    path.write_text("model,scenario,reference\n" + "".join(f"{m},{s},{r}\n" for m, s, r in rows))
    return path


@pytest.fixture(scope="module")
def data(tmp_path_factory, basic):
    d = tmp_path_factory.mktemp("scen")
    rows = consistent_rows(basic, scenario="base") + consistent_rows(basic, scenario="policy")
    return d, write_csv(d / "data.csv", rows), rows


def _fired(result) -> set[str]:
    return {f.rule for f in result.findings if f.rule in NEW_RULES}


def test_a_consistent_submission_breaks_none(data, basic, check, tmp_path):
    _, path, _ = data
    table = _scenarios(tmp_path / "s.csv", [("M1", "base", ""), ("M1", "policy", "base")])
    result = check([path, table], basic)
    assert result.findings == []


def test_unknown_reference(data, basic, check, tmp_path):
    _, path, _ = data
    table = _scenarios(tmp_path / "s.csv", [("M1", "base", ""), ("M1", "policy", "bse")])
    result = check([path, table], basic)
    assert _fired(result) == {"unknown-reference"}
    (f,) = rules_at(result, "unknown-reference")
    assert (f.path, f.line, f.scenario, f.value, f.column_name) == (str(table), 3, "policy", "bse", "reference")
    assert f.expected == "base, policy"
    # a note: a policy run may be ingested before its reference (its costs are computed when that comes)
    assert f.severity == "note" and result.passed()


def test_a_reference_stored_before_is_known(data, basic, tmp_path):
    from milepost.validate.runner import run_check

    _, _, rows = data
    policy = write_csv(tmp_path / "p.csv", [r for r in rows if r["scenario"] == "policy"])
    table = _scenarios(tmp_path / "s.csv", [("M1", "policy", "base")])
    result = run_check([policy, table], basic, known_scenarios=[("M1", "base", None)])
    try:
        assert _fired(result) == set()
    finally:
        result.con.close()


def test_scenario_without_data(data, basic, check, tmp_path):
    _, path, _ = data
    table = _scenarios(tmp_path / "s.csv", [("M1", "base", ""), ("M1", "policy", "base"), ("M1", "extra", "base")])
    result = check([path, table], basic)
    assert _fired(result) == {"scenario-without-data"}
    (f,) = rules_at(result, "scenario-without-data")
    assert (f.line, f.scenario, f.severity) == (4, "extra", "warning")
    # at ingest, a scenario stored before is no scenario without data
    from milepost.validate.runner import run_check

    again = run_check([path, table], basic, known_scenarios=[("M1", "extra", "base")])
    try:
        assert _fired(again) == set()
    finally:
        again.con.close()


def test_scenario_not_listed(data, basic, check, tmp_path):
    _, path, rows = data
    table = _scenarios(tmp_path / "s.csv", [("M1", "base", "")])
    result = check([path, table], basic)
    assert _fired(result) == {"scenario-not-listed"}
    (f,) = rules_at(result, "scenario-not-listed")
    assert (f.path, f.scenario, f.severity) == (str(path), "policy", "warning")
    assert f.line == next(i for i, r in enumerate(rows) if r["scenario"] == "policy") + 2


def test_no_table_no_listing_findings(data, basic, check):
    _, path, _ = data
    assert _fired(check(path, basic)) == set()


@pytest.fixture(scope="module")
def requiring(tmp_path_factory):
    folder = tmp_path_factory.mktemp("req")
    (folder / "contract.toml").write_text(
        f'name = "req"\nextends = "{BASIC_CONTRACT.as_posix()}"\n\n[costs]\nreference_required = true\n'
    )
    return load(folder)


def test_missing_reference_where_the_contract_requires_one(data, requiring, check, tmp_path):
    _, path, _ = data
    # without a scenarios table neither scenario names a reference, and neither is one
    result = check(path, requiring)
    assert _fired(result) == {"missing-reference"}
    assert sorted(f.scenario for f in rules_at(result, "missing-reference")) == ["base", "policy"]
    # with the table, the reference itself needs none
    table = _scenarios(tmp_path / "s.csv", [("M1", "base", ""), ("M1", "policy", "base")])
    assert _fired(check([path, table], requiring)) == set()


def test_contract_show_says_a_reference_is_required(requiring):
    from typer.testing import CliRunner

    from milepost.validate.cli import app

    r = CliRunner().invoke(app, ["contract", "show", requiring.sources[-1]])
    assert r.exit_code == 0 and "[costs] reference_required" in r.stdout
    assert requiring.to_dict()["costs"] == {"reference_required": True}


def test_the_setting_is_off_by_default_and_typed(basic, tmp_path):
    from milepost.schema.contract import ContractError

    assert basic.reference_required is False
    (tmp_path / "contract.toml").write_text(
        f'name = "x"\nextends = "{BASIC_CONTRACT.as_posix()}"\n\n[costs]\nreference_required = "yes"\n'
    )
    with pytest.raises(ContractError, match="reference_required must be true or false"):
        load(tmp_path)


@pytest.mark.parametrize(
    ("listing", "cyclic"),
    [
        ([("M1", "base", "base"), ("M1", "policy", "base")], {"base"}),
        ([("M1", "base", "policy"), ("M1", "policy", "base")], {"base", "policy"}),
    ],
)
def test_reference_cycle(data, basic, check, tmp_path, listing, cyclic):
    _, path, _ = data
    result = check([path, _scenarios(tmp_path / "s.csv", listing)], basic)
    assert _fired(result) == {"reference-cycle"}
    assert {f.scenario for f in rules_at(result, "reference-cycle")} == cyclic


def test_no_data_rows(basic, check, tmp_path):
    table = _scenarios(tmp_path / "s.csv", [("M1", "base", "")])
    result = check(table, basic)
    assert _fired(result) == {"no-data-rows"}
    assert not result.passed()


def test_no_cost_indicator_for_a_scenario_in_a_reference_cycle(core):
    """A scenario measured against itself would have losses of exactly 0: none are computed."""
    con = duckdb.connect()
    try:
        con.execute(
            "CREATE TEMP TABLE checked AS SELECT 'M' AS model, s AS scenario, 'World' AS region, 'gdp.mer' "
            "AS variable, 'billion USD_2015/yr' AS unit, y AS year, 100.0 + y - 2020 + (s = 'p')::INT AS value "
            "FROM (VALUES ('a'), ('b'), ('p'), ('base')) t(s), range(2020, 2101, 10) r(y)"
        )
        con.execute(
            "CREATE TEMP TABLE checked_scenarios AS SELECT * FROM (VALUES ('M', 'a', 'a'), ('M', 'b', 'p'), "
            "('M', 'p', 'b'), ('M', 'base', NULL)) t(model, scenario, reference)"
        )
        con.execute("INSERT INTO checked_scenarios VALUES ('M', 'x', 'base')")
        con.execute(
            "INSERT INTO checked SELECT 'M', 'x', 'World', 'gdp.mer', 'billion USD_2015/yr', y, 90.0 "
            "FROM range(2020, 2101, 10) r(y)"
        )
        compute_indicators(con, core)
        losses = con.execute(
            "SELECT scenario, count(*) FROM computed_indicators WHERE kind IN ('loss_pct', 'growth_reduction_pp') "
            "GROUP BY 1 ORDER BY 1"
        ).fetchall()
        # a (itself), b and p (each other) get none; x (against base) does, base (no reference) has null rows
        assert dict(losses).keys() == {"base", "x"}
        x = con.execute(
            "SELECT value FROM computed_indicators WHERE scenario = 'x' AND kind = 'loss_pct' AND year_from = 2050"
        ).fetchall()
        assert x == [(pytest.approx((130.0 - 90.0) / 130.0 * 100),)]  # (ref - scen) / ref * 100, by hand
    finally:
        con.close()


@pytest.mark.parametrize("fmt", ["csv", "xlsx"])
def test_scenario_findings_name_the_physical_line_after_blank_rows_and_rows_without_a_key(
    data, basic, check, tmp_path, fmt
):
    """The line a spreadsheet or editor shows: blank rows, a row without a model and a quoted newline before the
    finding each shift it (counting table rows instead gave lines 4 and 5 here)."""
    _, path, _ = data
    lines = [
        "model,scenario,reference,note",  # 1
        "M1,base,,",  # 2
        "",  # 3 (blank)
        ",orphan,,",  # 4 (no model: left out)
        'M1,policy,base,"two',  # 5
        'lines"',  # 6 (the quoted newline)
        "M1,ghost,base,",  # 7: listed, no data
        "M1,policy,base,again",  # 8: policy again, other attributes
    ]
    if fmt == "csv":
        table = tmp_path / "s.csv"
        table.write_text("\n".join(lines) + "\n")
        at = {"scenario-without-data": 7, "conflicting-row": 8}
    else:
        import csv
        import io

        from openpyxl import Workbook

        wb = Workbook()
        ws = wb.active
        ws.title = "data"
        ws.append(["model", "scenario", "region", "variable", "unit", "year", "value"])
        wb.create_sheet("scenarios")
        sheet = wb["scenarios"]
        rows = list(csv.reader(io.StringIO("\n".join(lines) + "\n")))
        for n, row in enumerate(rows, start=1):
            for col, cell in enumerate(row, start=1):
                if cell:
                    sheet.cell(row=n, column=col, value=cell)
        table = tmp_path / "s.xlsx"
        wb.save(table)
        # one sheet row per record: the quoted newline stays inside its cell, so the rows after it move up one
        at = {"scenario-without-data": 6, "conflicting-row": 7}
    result = check([path, table], basic)
    found = {f.rule: f.line for f in result.findings if f.rule in at}
    assert found == at


def test_one_walk_finds_the_cycles_for_the_check_and_the_costs():
    """The shared walk: a self-reference (1 step), a pair (2), a triangle (3), a scenario leading into a circle it
    is not part of (not cyclic), a chain ending at a no-policy run, and the same names under another model."""
    from milepost.validate.reference_cycles import cyclic_scenarios

    links = [
        ("M", "self", "self"),
        ("M", "a", "b"),
        ("M", "b", "a"),
        ("M", "t1", "t2"),
        ("M", "t2", "t3"),
        ("M", "t3", "t1"),
        ("M", "into", "a"),
        ("M", "policy", "base"),
        ("N", "a", "b"),  # N's b names nothing: no cycle in N
    ]
    con = duckdb.connect()
    con.execute("CREATE TEMP TABLE l (model VARCHAR, scenario VARCHAR, reference VARCHAR)")
    con.executemany("INSERT INTO l VALUES (?, ?, ?)", links)
    got = con.execute(f"SELECT * FROM ({cyclic_scenarios('SELECT * FROM l')}) ORDER BY ALL").fetchall()
    assert got == [("M", "a", 2), ("M", "b", 2), ("M", "self", 1), ("M", "t1", 3), ("M", "t2", 3), ("M", "t3", 3)]


@pytest.mark.parametrize("suffix", ["csv", "xlsx"])
def test_scenario_columns_left_out_are_reported_not_dropped_unsaid(data, basic, check, tmp_path, suffix):
    _, path, data_rows = data
    header = ["model", "scenario", "reference", "Line", "family", "Family "]
    rows = [["M1", "base", "", "L7", "a", "b"], ["M1", "policy", "base", "L8", "c", "d"]]
    if suffix == "csv":
        table = tmp_path / "s.csv"
        table.write_text("\n".join(",".join(r) for r in [header, *rows]) + "\n")
    else:
        table = write_xlsx(tmp_path / "s.xlsx", {"data": table_of(data_rows), "scenarios": [header, *rows]})
    result = check([table] if suffix == "xlsx" else [path, table], basic)
    (f,) = rules_at(result, "unexpected-column")
    assert (f.severity, f.line, f.value) == ("warning", 1, "Line, Family ")
    assert f.path == str(table)
    # the first of the repeated names is kept as an attribute
    assert result.con.execute("SELECT family FROM s_attributes ORDER BY scenario").fetchall() == [("a",), ("c",)]
