"""schema/indicators.toml: reading, resolving against the core and demo contracts, and its errors."""

from __future__ import annotations

import dataclasses
import tomllib

import duckdb
import pytest

from milepost.validate.store.indicators import FAMILIES, KINDS, IndicatorSpecError, compute_indicators, plan
from milepost.validate.store.indicators.definitions import DEFAULT_PATH, periods_for, render_unit


def test_packaged_definitions_name_every_kind_once():
    raw = tomllib.loads(DEFAULT_PATH.read_text(encoding="utf-8"))
    assert set(raw) == set(KINDS)
    assert len(KINDS) == sum(len(f.KINDS) for f in FAMILIES)  # no kind registered twice
    for family in FAMILIES:
        assert family.__doc__ and all(k.name in family.__doc__ for k in family.KINDS)  # each kind documented


def test_core_plan(core):
    p = plan(core)
    by_kind: dict[str, dict[str, tuple[str, float]]] = {}
    for kind, variable, unit, factor in p.selection:
        by_kind.setdefault(kind, {})[variable] = (unit, factor)
    assert set(by_kind["value"]) == set(core.variables)
    assert all(unit == core.variables[v].unit and f == 1.0 for v, (unit, f) in by_kind["value"].items())
    assert set(by_kind["cumulative"]) == {v for v in core.variables if v.startswith("emissions.")}
    # SI prefixes: 1 Gt = 1e3 Mt = 1e6 kt; a sum of annual Mt CO2/yr values is Mt CO2
    assert by_kind["cumulative"]["emissions.co2"] == ("Gt CO2", pytest.approx(1e-3))
    assert by_kind["cumulative"]["emissions.ghg"] == ("Gt CO2e", pytest.approx(1e-3))
    assert by_kind["cumulative"]["emissions.ch4"] == ("Gt CH4", pytest.approx(1e-3))
    assert by_kind["cumulative"]["emissions.n2o"] == ("Gt N2O", pytest.approx(1e-6))
    assert by_kind["npv"] == {"cost.abatement": ("billion USD_2015", 1.0)}
    assert set(by_kind["loss_pct"]) == {"gdp.ppp", "gdp.mer", "consumption"}
    assert set(by_kind["growth_reduction_pp"]) == {"gdp.ppp", "gdp.mer", "consumption"}
    assert by_kind["rate_absolute"]["emissions.co2"] == ("Mt CO2/yr per year", 1.0)
    assert set(by_kind["rate_linear_base"]) == set(by_kind["rate_linear"]) == set(by_kind["rate_cagr"])
    assert {u for u, _ in by_kind["rate_cagr"].values()} == {"%/yr"}
    assert "cost.abatement" not in by_kind["rate_cagr"] and "trade.permits" not in by_kind["rate_cagr"]
    assert "emissions.ch4" not in by_kind["net_zero_year"] and "emissions.co2" in by_kind["net_zero_year"]
    assert p.skipped == ()
    assert {(y0, y1) for k, y0, y1 in p.periods if k == "rate_cagr"} == {
        (2020, 2030),
        (2030, 2050),
        (2050, 2100),
        (2020, 2050),
        (2020, 2100),
    }
    assert not [row for row in p.periods if row[0] in ("net_zero_year", "peak_year", "peak_value")]


def test_period_shapes():
    assert periods_for("points", 2020, (2050, 2030, 2100)) == ((2020, 2020), (2030, 2030), (2050, 2050), (2100, 2100))
    assert periods_for("milestones", 2020, (2030, 2050)) == ((2030, 2030), (2050, 2050))
    assert periods_for("from_base", 2020, (2030, 2050)) == ((2020, 2030), (2020, 2050))
    # base -> first milestone is both "first pair" and "base -> milestone": listed once
    assert periods_for("pairs", 2020, (2030,)) == ((2020, 2030),)
    assert periods_for("pairs", 2020, (2100, 2030, 2050)) == (
        (2020, 2030),
        (2020, 2050),
        (2020, 2100),
        (2030, 2050),
        (2050, 2100),
    )
    assert periods_for("reported", 2020, (2030,)) == ()
    with pytest.raises(IndicatorSpecError):
        periods_for("decades", 2020, (2030,))


def test_unit_templates():
    assert render_unit("Gt {gas}", "Mt CO2/yr") == "Gt CO2"
    assert render_unit("Gt {gas}", "kt N2O/yr") == "Gt N2O"
    assert render_unit("{stock}", "billion USD_2015/yr") == "billion USD_2015"
    assert render_unit("{unit}", "million") == "million"
    with pytest.raises(KeyError, match="gas"):
        render_unit("Gt {gas}", "EJ/yr")


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ('[tempo]\nvariables = ["*"]\nperiods = "points"\nunit = "x"\n', "not an indicator kind"),
        ('[value]\nvariables = ["*"]\nperiods = "pairs"\nunit = "{unit}"\n', "accepts 'points', 'milestones'"),
        ('[value]\nvariables = ["*"]\nperiods = "points"\nunit = "{unit}"\ncolour = "red"\n', "unknown keys colour"),
        ('[value]\nvariables = ["*"]\nperiods = "points"\n', "needs `unit`"),
        ('[value]\nvariables = [1]\nperiods = "points"\nunit = "{unit}"\n', "list of glob patterns"),
        ("[value\n", "cannot read"),
        ("value = 3\n", "must be a table"),
    ],
)
def test_bad_definitions(tmp_path, core, text, message):
    path = tmp_path / "indicators.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(IndicatorSpecError, match=message):
        plan(core, path)


def test_unfit_units_are_skipped_not_guessed(tmp_path, core):
    path = tmp_path / "indicators.toml"
    path.write_text(
        '[cumulative]\nvariables = ["population", "emissions.co2"]\nperiods = "from_base"\n'
        'unit = "Gt {gas}"\n[value]\nvariables = ["energy.final"]\nperiods = "points"\n'
        'unit = "Mt CO2/yr"\n',
        encoding="utf-8",
    )
    p = plan(core, path)
    assert [row[:2] for row in p.selection] == [("cumulative", "emissions.co2")]
    assert {(k, v) for k, v, _ in p.skipped} == {("cumulative", "population"), ("value", "energy.final")}


def test_level_units_convert_with_the_contract_registry(tmp_path, core):
    path = tmp_path / "indicators.toml"
    path.write_text(
        '[value]\nvariables = ["emissions.co2", "energy.final"]\nperiods = "points"\n'
        'unit = "Gt CO2/yr"\n[peak_value]\nvariables = ["emissions.co2"]\nperiods = "reported"\n'
        'unit = "Gt CO2/yr"\n',
        encoding="utf-8",
    )
    p = plan(core, path)
    assert ("value", "emissions.co2", "Gt CO2/yr", pytest.approx(1e-3)) in p.selection
    con = duckdb.connect()
    try:
        con.execute(
            "CREATE TEMP TABLE checked AS SELECT 'M' AS model, 'S' AS scenario, 'World' AS region,"
            " 'emissions.co2' AS variable, 'Mt CO2/yr' AS unit, y::INTEGER AS year, 40000.0 - 100 * (y - 2020)"
            " AS value FROM range(2020, 2101, 10) t(y)"
        )
        con.execute(
            "CREATE TEMP TABLE checked_scenarios AS SELECT 'M' AS model, 'S' AS scenario, NULL::VARCHAR AS reference"
        )
        compute_indicators(con, core, definitions=path)
        got = dict(
            ((k, y), v) for k, y, v in con.execute("SELECT kind, year_to, value FROM computed_indicators").fetchall()
        )
    finally:
        con.close()
    assert got[("value", 2050)] == pytest.approx(37.0)  # 37,000 Mt = 37 Gt (SI prefixes)
    assert got[("peak_value", 2100)] == pytest.approx(40.0)


def test_demo_contract_indicators(demo_contract):
    # invented demo numbers in the demo contract's invented regions
    c = demo_contract
    assert (c.base_year, c.milestones) == (2020, (2030, 2050, 2100))
    years = list(range(2010, 2101, 10))
    con = duckdb.connect()
    try:
        con.execute(
            "CREATE TEMP TABLE checked AS SELECT 'Tarn' AS model, s AS scenario, r AS region, v AS variable, u AS unit,"
            " y::INTEGER AS year, (CASE WHEN s = 'brisk' THEN 1.0 - (y - 2010) / 70.0 ELSE 1.0 + (y - 2010) / 90.0"
            " END) * base AS value FROM (VALUES ('steady'), ('brisk')) a(s), (VALUES ('World'), ('Ardena')) b(r),"
            " (VALUES ('emissions.co2', 'Mt CO2/yr', 9000.0), ('emissions.n2o', 'kt N2O/yr', 2000.0),"
            " ('gdp.mer', 'billion USD_2015/yr', 50000.0), ('consumption', 'billion USD_2015/yr', 30000.0),"
            " ('cost.abatement', 'billion USD_2015/yr', 100.0), ('population', 'million', 900.0)) c(v, u, base),"
            " (SELECT unnest(?::INTEGER[]) AS y)",
            [years],
        )
        con.execute(
            "CREATE TEMP TABLE checked_scenarios AS SELECT * FROM (VALUES ('Tarn', 'steady', NULL),"
            " ('Tarn', 'brisk', 'steady')) t(model, scenario, reference)"
        )
        n = compute_indicators(con, c)
        rows = con.execute(
            "SELECT model, scenario, region, kind, variable, year_from, year_to, value, unit FROM computed_indicators"
        ).fetchall()
    finally:
        con.close()
    assert n == len(rows)
    p = plan(c)
    per_kind = {k: sum(1 for row in p.periods if row[0] == k) or 1 for k in p.kinds()}
    reported = {"emissions.co2", "emissions.n2o", "gdp.mer", "consumption", "cost.abatement", "population"}
    expected = sum(per_kind[k] for k, v, _, _ in p.selection if v in reported) * 2 * 2  # scenarios x regions
    # cost shares are written for the trading regions only (Ardena), not for World, the whole they share
    expected -= sum(per_kind[k] for k, v, _, _ in p.selection if v in reported and k == "cost_share") * 2
    assert n == expected
    units = {(r[3], r[4]): r[8] for r in rows}
    assert units[("cumulative", "emissions.co2")] == "Gt CO2"
    assert units[("cumulative", "emissions.n2o")] == "Gt N2O"
    assert units[("npv", "cost.abatement")] == "billion USD_2015"
    assert units[("value", "population")] == "million"
    assert units[("loss_pct", "gdp.mer")] == "%"
    assert units[("growth_reduction_pp", "consumption")] == "pp/yr"
    by_key = {(r[1], r[2], r[3], r[4], r[5], r[6]): r[7] for r in rows}
    # brisk CO2 crosses zero where 1 - (y - 2010)/70 = 0: 2080; searched from the base year 2020 to 2100
    assert by_key[("brisk", "World", "net_zero_year", "emissions.co2", 2020, 2100)] == 2080
    assert by_key[("steady", "World", "net_zero_year", "emissions.co2", 2020, 2100)] is None
    # the reference has no loss against itself; brisk in 2050: steady 1 + 40/90, brisk 1 - 40/70
    assert by_key[("steady", "Ardena", "loss_pct", "gdp.mer", 2050, 2050)] is None
    want = ((1 + 40 / 90) - (1 - 40 / 70)) / (1 + 40 / 90) * 100
    assert by_key[("brisk", "Ardena", "loss_pct", "gdp.mer", 2050, 2050)] == pytest.approx(want)
    assert {(r[5], r[6]) for r in rows if r[3] == "value"} == {(2020, 2020), (2030, 2030), (2050, 2050), (2100, 2100)}


def test_plan_on_a_contract_without_milestones(core):
    p = plan(dataclasses.replace(core, milestones=()))
    # only the base year is left: the kinds over "points" (the value and the Kaya factors)
    assert {k for k, *_ in p.periods} == {"value", "gdp_per_capita", "energy_intensity", "carbon_intensity"}
    assert "rate_cagr" in p.kinds()  # still selected, but with no periods it yields no rows


def test_definitions_with_no_periods(tmp_path, core):
    # only a kind over the reported range: no period endpoints at all
    path = tmp_path / "indicators.toml"
    path.write_text(
        '[net_zero_year]\nvariables = ["emissions.co2"]\nperiods = "reported"\nunit = "year"\n', encoding="utf-8"
    )
    con = duckdb.connect()
    try:
        con.execute(
            "CREATE TEMP TABLE checked AS SELECT 'M' AS model, 'S' AS scenario, 'World' AS region,"
            " 'emissions.co2' AS variable, 'Mt CO2/yr' AS unit, (2020 + 10 * i)::INTEGER AS year,"
            " 5.0 - i AS value FROM range(9) t(i)"
        )
        con.execute(
            "CREATE TEMP TABLE checked_scenarios AS SELECT 'M' AS model, 'S' AS scenario, NULL::VARCHAR AS reference"
        )
        assert compute_indicators(con, core, definitions=path) == 1
        got = con.execute("SELECT kind, year_from, year_to, value, unit FROM computed_indicators").fetchall()
    finally:
        con.close()
    assert got == [("net_zero_year", 2020, 2100, 2070.0, "year")]  # 5 - i = 0 at i = 5
