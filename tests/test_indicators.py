"""Indicator kinds against reference libraries (numpy, scipy, numpy_financial) and published values."""

from __future__ import annotations

import dataclasses

import duckdb
import numpy as np
import numpy_financial as npf
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.integrate import trapezoid

from milepost.schema.contract import Contract
from milepost.validate.store.indicators import COLUMNS, IndicatorDataError, compute_indicators
from milepost.validate.store.indicators.interpolation import drop_helpers, prepare

Points = dict[int, float]


def years_contract(core: Contract, base: int, milestones: tuple[int, ...], rate: float | None = None) -> Contract:
    """The core contract with other years (and discount rate): indicators depend on nothing else in it."""
    c = dataclasses.replace(core, base_year=base, milestones=milestones)
    return dataclasses.replace(c, discount_rate=rate) if rate is not None else c


def load_rows(
    con: duckdb.DuckDBPyConnection,
    series: list[tuple[str, str, str, str, str, Points]],
    table: str = "checked",
) -> None:
    """A long table from (model, scenario, region, variable, unit, {year: value}) tuples."""
    con.execute(
        f"CREATE OR REPLACE TEMP TABLE {table} (model VARCHAR, scenario VARCHAR, region VARCHAR, variable VARCHAR,"
        " unit VARCHAR, year INTEGER, value DOUBLE)"
    )
    rows = [(m, s, r, v, u, y, x) for m, s, r, v, u, pts in series for y, x in pts.items()]
    if rows:
        con.executemany(f"INSERT INTO {table} VALUES (?, ?, ?, ?, ?, ?, ?)", rows)


def load_scenarios(con: duckdb.DuckDBPyConnection, rows: list[tuple[str, str, str | None]]) -> None:
    con.execute("CREATE OR REPLACE TEMP TABLE checked_scenarios (model VARCHAR, scenario VARCHAR, reference VARCHAR)")
    if rows:
        con.executemany("INSERT INTO checked_scenarios VALUES (?, ?, ?)", rows)


def indicators(
    con: duckdb.DuckDBPyConnection, table: str = "computed_indicators", models: bool = False
) -> dict[tuple, float | None]:
    """{([model,] scenario, region, kind, variable, year_from, year_to): value}; checks that keys are unique."""
    got = con.execute(
        f"SELECT scenario, region, kind, variable, year_from, year_to, value, model FROM {table}"
    ).fetchall()
    assert len({(*r[:6], r[7]) for r in got}) == len(got), "one row per series, kind and period"
    out = {((r[7],) if models else ()) + tuple(r[:6]): r[6] for r in got}
    assert models or len(out) == len(got), "one model per test unless models=True"
    return out


def units_of(con: duckdb.DuckDBPyConnection) -> dict[tuple[str, str], set[str]]:
    rows = con.execute("SELECT DISTINCT kind, variable, unit FROM computed_indicators").fetchall()
    out: dict[tuple[str, str], set[str]] = {}
    for kind, variable, unit in rows:
        out.setdefault((kind, variable), set()).add(unit)
    return out


@pytest.fixture
def con():
    c = duckdb.connect()
    yield c
    c.close()


def compute(con, contract, series, scenarios=None, **kw) -> dict[tuple, float | None]:
    load_rows(con, series)
    load_scenarios(con, scenarios if scenarios is not None else sorted({(m, s, None) for m, s, *_ in series}))
    n = compute_indicators(con, contract, **kw)
    assert n == con.execute("SELECT count(*) FROM computed_indicators").fetchall()[0][0]
    return indicators(con)


# ---------------------------------------------------------------------------------------------- interpolation

IRREGULAR: Points = {2020: 3.0, 2023: 7.5, 2030: -2.0, 2047: 4.25, 2050: 4.0, 2100: 11.0}


def test_annual_interpolation_matches_numpy_interp(con, core):
    load_rows(
        con,
        [
            ("M", "S", "World", "population", "million", IRREGULAR),
            ("M", "S", "World", "energy.final", "EJ/yr", {2025: 1.0, 2060: 8.0}),
        ],
    )
    load_scenarios(con, [("M", "S", None)])
    periods = [("value", y, y) for y in (2020, 2030, 2050, 2100)]
    selection = [("value", "population", "million", 1.0), ("value", "energy.final", "EJ/yr", 1.0)]
    t = prepare(con, "checked", "checked_scenarios", selection, periods, 2020, 5.0)
    try:
        for variable, pts in (("population", IRREGULAR), ("energy.final", {2025: 1.0, 2060: 8.0})):
            got = con.execute(
                f"SELECT a.year, a.value FROM {t.annual} a JOIN {t.series} s USING (sid) WHERE s.variable = ?"
                " ORDER BY a.year",
                [variable],
            ).fetchall()
            xp, fp = list(pts), list(pts.values())
            years = np.array([y for y, _ in got])
            # every integer year of the reported range, and nothing outside it (no extrapolation)
            assert years.tolist() == list(range(min(xp), max(xp) + 1))
            # reference: numpy.interp, piecewise-linear between the given points
            np.testing.assert_allclose([v for _, v in got], np.interp(years, xp, fp), rtol=1e-12, atol=1e-12)
            # the endpoint values kept per series are the same interpolation
            at = con.execute(f"SELECT ends FROM {t.series} WHERE variable = ?", [variable]).fetchall()[0][0]
            for year, a in zip(t.years, at, strict=True):
                if min(xp) <= year <= max(xp):
                    assert a == pytest.approx(float(np.interp(year, xp, fp)), rel=1e-12)
                else:
                    assert a is None
    finally:
        drop_helpers(con)


@given(
    st.dictionaries(st.integers(1990, 2100), st.floats(-1e4, 1e4, allow_nan=False), min_size=1, max_size=8),
)
def test_interpolation_property_matches_numpy_interp(pts):
    c = duckdb.connect()
    try:
        load_rows(c, [("M", "S", "World", "population", "million", pts)])
        load_scenarios(c, [])
        t = prepare(
            c,
            "checked",
            "checked_scenarios",
            [("value", "population", "million", 1.0)],
            [("value", 2000, 2000), ("value", 2050, 2050)],
            2000,
            5.0,
        )
        got = c.execute(f"SELECT year, value FROM {t.annual} ORDER BY year").fetchall()
        xp = sorted(pts)
        fp = [pts[y] for y in xp]
        assert [y for y, _ in got] == list(range(xp[0], xp[-1] + 1))
        # reference: numpy.interp
        np.testing.assert_allclose([v for _, v in got], np.interp([y for y, _ in got], xp, fp), atol=1e-8, rtol=1e-9)
    finally:
        c.close()


def test_value_at_base_and_milestones(con, core):
    pts = {2015: 10.0, 2025: 20.0, 2040: 5.0, 2060: 65.0, 2100: 65.0}
    late = {2035: 1.0, 2045: 2.0}
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [("M", "S", "World", "energy.primary", "EJ/yr", pts), ("M", "S", "World", "energy.final", "EJ/yr", late)],
    )
    for y in (2020, 2030, 2050, 2100):
        # reference: numpy.interp at years that are not reported
        want = np.interp(y, list(pts), list(pts.values()))
        assert got[("S", "World", "value", "energy.primary", y, y)] == pytest.approx(want)
        # outside the reported range: a row, with a null value
        assert got[("S", "World", "value", "energy.final", y, y)] is None
    assert units_of(con)[("value", "energy.primary")] == {"EJ/yr"}


# ---------------------------------------------------------------------------------------------- rates


def notes(con: duckdb.DuckDBPyConnection, kind: str) -> dict[tuple, str | None]:
    """{(scenario, region, variable, year_from, year_to): note} of one kind."""
    rows = con.execute(
        "SELECT scenario, region, variable, year_from, year_to, note FROM computed_indicators WHERE kind = ?", [kind]
    ).fetchall()
    return {tuple(r[:5]): r[5] for r in rows}


def test_cagr_reproduces_published_ghg_growth(con, core):
    # IPCC AR6 WGIII SPM B.1.1: global net GHG emissions in 2019 were about 12 % higher than in 2010 (59 vs ~53 Gt
    # CO2-eq); SPM B.1 / FAQ 2.1: average growth 1.3 %/yr over 2010-2019. 53 -> 59.36 is +12 %.
    got = compute(
        con,
        years_contract(core, 2010, (2019,)),
        [("M", "S", "World", "emissions.ghg", "Mt CO2e/yr", {2010: 53_000.0, 2019: 59_360.0})],
    )
    cagr = got[("S", "World", "rate_cagr", "emissions.ghg", 2010, 2019)]
    assert cagr == pytest.approx((1.12 ** (1 / 9) - 1) * 100, rel=1e-9)  # derived: 1.267 %/yr
    assert abs(cagr - 1.3) < 0.1  # published 1.3 %/yr, from annual series: two rounded levels match it to ~0.1
    linear = got[("S", "World", "rate_linear", "emissions.ghg", 2010, 2019)]
    assert linear == pytest.approx((59_360 - 53_000) / (53_000 * 9) * 100, rel=1e-12)
    assert units_of(con)[("rate_cagr", "emissions.ghg")] == {"%/yr"}


def test_three_linear_rates_and_cagr_by_hand(con, core):
    # Hand computation (no outside source needed: the definitions in indicators.toml), a falling CO2 path in Mt CO2/yr:
    # 2020 40,000; 2030 30,000; 2050 10,000 (2040 reported as 20,000 so 2050 is not an end of the data).
    pts = {2020: 40_000.0, 2030: 30_000.0, 2040: 20_000.0, 2050: 10_000.0, 2100: 5_000.0}
    got = compute(
        con, years_contract(core, 2020, (2030, 2050, 2100)), [("M", "S", "World", "emissions.co2", "Mt CO2/yr", pts)]
    )
    r = {k[2]: v for k, v in got.items() if (k[4], k[5]) == (2030, 2050)}
    # 2030 -> 2050: -20,000 Mt CO2/yr over 20 years
    assert r["rate_absolute"] == pytest.approx(-1_000.0)  # Mt CO2/yr per year
    assert r["rate_linear"] == pytest.approx(-1_000.0 / 30_000.0 * 100)  # -3.333 % of the 2030 value per year
    assert r["rate_linear_base"] == pytest.approx(-1_000.0 / 40_000.0 * 100)  # -2.5 % of the 2020 value per year
    assert r["rate_cagr"] == pytest.approx(((10_000 / 30_000) ** (1 / 20) - 1) * 100)  # -5.34 %/yr
    # from the base year the two linear rates coincide
    b = {k[2]: v for k, v in got.items() if (k[4], k[5]) == (2020, 2030)}
    assert b["rate_linear"] == b["rate_linear_base"] == pytest.approx(-2.5)
    assert b["rate_absolute"] == pytest.approx(-1_000.0)
    u = units_of(con)
    assert u[("rate_linear_base", "emissions.co2")] == {"%/yr"}
    assert u[("rate_absolute", "emissions.co2")] == {"Mt CO2/yr per year"}


def test_a_series_crossing_zero_has_linear_rates_but_no_cagr(con, core):
    # Hand computation: net CO2 100 (2020) -> 60 (2030) -> -20 (2050) -> -40 (2100), Mt CO2/yr.
    pts = {2020: 100.0, 2030: 60.0, 2050: -20.0, 2100: -40.0}
    got = compute(
        con, years_contract(core, 2020, (2030, 2050, 2100)), [("M", "S", "World", "emissions.co2", "Mt CO2/yr", pts)]
    )
    at = lambda kind, y0, y1: got[("S", "World", kind, "emissions.co2", y0, y1)]  # noqa: E731
    # CAGR has no real value across a sign change or between negative values
    assert at("rate_cagr", 2030, 2050) is None and at("rate_cagr", 2050, 2100) is None
    assert at("rate_cagr", 2020, 2030) == pytest.approx((0.6**0.1 - 1) * 100)
    # linear rates are defined and negative, because the series falls
    assert at("rate_absolute", 2030, 2050) == pytest.approx(-4.0)  # (-20 - 60) / 20
    assert at("rate_linear", 2030, 2050) == pytest.approx(-4.0 / 60 * 100)
    assert at("rate_linear_base", 2030, 2050) == pytest.approx(-4.0 / 100 * 100)
    # 2050 -> 2100 starts below zero: dividing by |v0| keeps "falling = negative"
    assert at("rate_absolute", 2050, 2100) == pytest.approx(-0.4)
    assert at("rate_linear", 2050, 2100) == pytest.approx(-0.4 / 20 * 100)
    assert at("rate_linear_base", 2050, 2100) == pytest.approx(-0.4 / 100 * 100)


def test_rates_over_every_pair(con, core):
    pts = {2020: 50.0, 2025: 61.0, 2040: 70.0, 2050: 90.0, 2070: 80.0, 2100: 140.0}
    got = compute(
        con, years_contract(core, 2020, (2030, 2050, 2100)), [("M", "S", "R1", "gdp.mer", "billion USD_2015/yr", pts)]
    )
    pairs = {(k[4], k[5]) for k in got if k[2] == "rate_cagr"}
    assert pairs == {(2020, 2030), (2030, 2050), (2050, 2100), (2020, 2050), (2020, 2100)}
    v = {y: float(np.interp(y, list(pts), list(pts.values()))) for y in (2020, 2030, 2050, 2100)}
    for y0, y1 in pairs:
        # reference: numpy power on numpy.interp values (the CAGR definition, US BEA)
        want = (np.power(v[y1] / v[y0], 1 / (y1 - y0)) - 1) * 100
        assert got[("S", "R1", "rate_cagr", "gdp.mer", y0, y1)] == pytest.approx(want, rel=1e-10)
        change = (v[y1] - v[y0]) / (y1 - y0)
        assert got[("S", "R1", "rate_linear", "gdp.mer", y0, y1)] == pytest.approx(change / v[y0] * 100, rel=1e-10)
        assert got[("S", "R1", "rate_linear_base", "gdp.mer", y0, y1)] == pytest.approx(change / v[2020] * 100)
        assert got[("S", "R1", "rate_absolute", "gdp.mer", y0, y1)] == pytest.approx(change, rel=1e-10)
    assert units_of(con)[("rate_absolute", "gdp.mer")] == {"billion USD_2015/yr per year"}


def test_rates_null_where_undefined(con, core):
    c = years_contract(core, 2020, (2030, 2050))
    got = compute(
        con,
        c,
        [
            ("M", "S", "World", "emissions.co2", "Mt CO2/yr", {2020: 0.0, 2030: 10.0, 2050: 20.0}),
            ("M", "S", "World", "emissions.ch4", "Mt CH4/yr", {2020: -4.0, 2030: 2.0, 2050: 0.0}),
            ("M", "S", "World", "energy.final", "EJ/yr", {2025: 1.0, 2050: 2.0}),
        ],
    )
    key = ("S", "World")
    assert got[(*key, "rate_cagr", "emissions.co2", 2020, 2030)] is None  # v0 = 0
    assert got[(*key, "rate_linear", "emissions.co2", 2020, 2030)] is None  # v0 = 0
    assert got[(*key, "rate_linear_base", "emissions.co2", 2030, 2050)] is None  # base-year value 0
    assert got[(*key, "rate_absolute", "emissions.co2", 2030, 2050)] == pytest.approx(0.5)
    assert got[(*key, "rate_cagr", "emissions.co2", 2030, 2050)] == pytest.approx((2 ** (1 / 20) - 1) * 100)
    assert got[(*key, "rate_cagr", "emissions.ch4", 2020, 2030)] is None  # v0 < 0
    assert got[(*key, "rate_cagr", "emissions.ch4", 2030, 2050)] is None  # v1 = 0
    # rising from -4 to 2 is a rise: (2 - -4) / (|-4| * 10) * 100 = +15
    assert got[(*key, "rate_linear", "emissions.ch4", 2020, 2030)] == pytest.approx(15.0)
    assert got[(*key, "rate_linear", "emissions.ch4", 2030, 2050)] == pytest.approx(-5.0)
    assert got[(*key, "rate_linear_base", "emissions.ch4", 2030, 2050)] == pytest.approx(-2.5)  # -0.1/yr of |-4|
    # not reported in the base year: every rate that needs it is empty
    assert got[(*key, "rate_linear_base", "energy.final", 2030, 2050)] is None
    assert got[(*key, "rate_linear", "energy.final", 2030, 2050)] == pytest.approx(0.04 * 20 / (1.2 * 20) * 100)


@given(values=st.lists(st.floats(0.1, 1e5, allow_nan=False), min_size=4, max_size=4))
def test_cagr_chain_reconstructs_the_long_rate(core, values):
    # compounding the consecutive-milestone rates must give the base -> last-milestone rate
    c = duckdb.connect()
    try:
        contract = years_contract(core, 2020, (2030, 2050, 2100))
        got = compute(
            c,
            contract,
            [("M", "S", "World", "population", "million", dict(zip((2020, 2030, 2050, 2100), values, strict=True)))],
        )
        r = {(k[4], k[5]): v / 100 for k, v in got.items() if k[2] == "rate_cagr"}
        chained = (1 + r[(2020, 2030)]) ** 10 * (1 + r[(2030, 2050)]) ** 20 * (1 + r[(2050, 2100)]) ** 50
        assert chained == pytest.approx((1 + r[(2020, 2100)]) ** 80, rel=1e-9)
        assert (1 + r[(2020, 2100)]) ** 80 == pytest.approx(values[3] / values[0], rel=1e-9)
        lin = {(k[4], k[5]): v / 100 for k, v in got.items() if k[2] == "rate_linear"}
        assert values[0] * (1 + lin[(2020, 2050)] * 30) == pytest.approx(values[2], rel=1e-9, abs=1e-9)
        # base-normalised rates of consecutive periods add up, weighted by their lengths, to the whole period's
        base = {(k[4], k[5]): v / 100 for k, v in got.items() if k[2] == "rate_linear_base"}
        summed = base[(2020, 2030)] * 10 + base[(2030, 2050)] * 20 + base[(2050, 2100)] * 50
        assert summed == pytest.approx(base[(2020, 2100)] * 80, rel=1e-9, abs=1e-9)
    finally:
        c.close()


# ---------------------------------------------------------------------------------------------- cumulative


def test_cumulative_is_the_inclusive_sum_of_annual_values_by_hand(con, core):
    # Hand-worked: 10 Gt CO2/yr in 2020 falling linearly to 20 in 2025 is annual 10, 12, 14, 16, 18, 20 = 90 Gt;
    # then flat at 20 to 2030 (2026..2030 adds 5 x 20 = 100). The trapezoid over 2020-2025 would give 75.
    pts = {2020: 10_000.0, 2025: 20_000.0, 2030: 20_000.0}
    got = compute(
        con, years_contract(core, 2020, (2025, 2030)), [("M", "S", "World", "emissions.co2", "Mt CO2/yr", pts)]
    )
    assert got[("S", "World", "cumulative", "emissions.co2", 2020, 2025)] == pytest.approx(90.0)
    assert got[("S", "World", "cumulative", "emissions.co2", 2020, 2030)] == pytest.approx(190.0)
    assert units_of(con)[("cumulative", "emissions.co2")] == {"Gt CO2"}


def test_cumulative_from_2020_counts_every_year_from_the_budget_start(con, core):
    # IPCC AR6 WG1 SPM (Table SPM.2): remaining carbon budgets are counted from 1 January 2020, so emissions of
    # 2020 itself count. 1 Gt CO2/yr held flat 2020-2100 is 81 annual values: 81 Gt (a trapezoid says 80).
    flat = {2020: 1_000.0, 2100: 1_000.0}
    got = compute(
        con, years_contract(core, 2020, (2030, 2100)), [("M", "S", "World", "emissions.co2", "Mt CO2/yr", flat)]
    )
    assert got[("S", "World", "cumulative", "emissions.co2", 2020, 2100)] == pytest.approx(81.0)
    assert got[("S", "World", "cumulative", "emissions.co2", 2020, 2030)] == pytest.approx(11.0)


def test_cumulative_matches_numpy_annual_sums(con, core):
    co2 = {2020: 40_000.0, 2025: 38_000.0, 2035: 20_000.0, 2050: -2_000.0, 2070: -6_000.0, 2100: -1_000.0}
    n2o = {2020: 9_000.0, 2040: 7_000.0, 2050: 6_500.0, 2100: 5_000.0}
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [
            ("M", "S", "World", "emissions.co2", "Mt CO2/yr", co2),
            ("M", "S", "World", "emissions.n2o", "kt N2O/yr", n2o),
            ("M", "S", "World", "emissions.ch4", "Mt CH4/yr", {2025: 300.0, 2100: 100.0}),
        ],
    )
    for variable, pts, per_gt in (("emissions.co2", co2, 1e3), ("emissions.n2o", n2o, 1e6)):
        for m in (2030, 2050, 2100):
            years = np.arange(2020, m + 1)
            # reference: numpy.interp at every whole year, summed with numpy; 1 Gt = 1e3 Mt = 1e6 kt (SI)
            want = np.interp(years, list(pts), list(pts.values())).sum() / per_gt
            assert got[("S", "World", "cumulative", variable, 2020, m)] == pytest.approx(want, rel=1e-10)
            # the inclusive sum is the trapezoid (scipy) plus half of each end year
            ends = (np.interp(2020, list(pts), list(pts.values())) + np.interp(m, list(pts), list(pts.values()))) / 2
            assert (trapezoid(np.interp(years, list(pts), list(pts.values())), years) + ends) / per_gt == pytest.approx(
                want, rel=1e-10
            )
    assert got[("S", "World", "cumulative", "emissions.ch4", 2020, 2030)] is None  # reported only from 2025
    u = units_of(con)
    assert u[("cumulative", "emissions.n2o")] == {"Gt N2O"}
    assert u[("cumulative", "emissions.ch4")] == {"Gt CH4"}


PAIRS_TOML = """
[cumulative]
variables = ["emissions.*"]
periods = "pairs"
unit = "Gt {gas}"
"""


@pytest.fixture(scope="module")
def pairs_spec(tmp_path_factory):
    spec = tmp_path_factory.mktemp("spec") / "indicators.toml"
    spec.write_text(PAIRS_TOML, encoding="utf-8")
    return spec


@given(
    values=st.lists(st.floats(-5e4, 5e4, allow_nan=False), min_size=7, max_size=7),
    extra_years=st.lists(st.integers(2021, 2099), min_size=0, max_size=3, unique=True),
)
def test_cumulative_over_consecutive_periods_counts_the_shared_years_twice(core, pairs_spec, values, extra_years):
    c = duckdb.connect()
    try:
        years = sorted({2020, 2100, *extra_years, 2033, 2061})
        pts = dict(zip(years, values, strict=False))
        got = compute(
            c,
            years_contract(core, 2020, (2030, 2050, 2100)),
            [("M", "S", "World", "emissions.co2", "Mt CO2/yr", pts)],
            definitions=pairs_spec,
        )
        cum = {(k[4], k[5]): v for k, v in got.items()}
        xs = np.arange(2020, 2101)
        annual = dict(zip(xs.tolist(), np.interp(xs, list(pts), list(pts.values())) / 1e3, strict=True))  # numpy
        shared = annual[2030] + annual[2050]
        assert cum[(2020, 2030)] + cum[(2030, 2050)] + cum[(2050, 2100)] - shared == pytest.approx(
            cum[(2020, 2100)], rel=1e-9, abs=1e-6
        )
        assert cum[(2020, 2100)] == pytest.approx(sum(annual.values()), rel=1e-9, abs=1e-6)
    finally:
        c.close()


# ---------------------------------------------------------------------------------------------- timing


def test_net_zero_of_a_land_series_negative_from_the_start(con, core):
    # Land CO2 below zero in every year from the base year on (and in history): the base year, with a note.
    # A second land series below zero in 2020 that turns positive later: the base year too, with another note.
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [
            ("M", "S", "World", "emissions.co2.land", "Mt CO2/yr", {2010: 500.0, 2020: -300.0, 2100: -900.0}),
            ("M", "S", "R1", "emissions.co2.land", "Mt CO2/yr", {2020: -300.0, 2050: 100.0, 2100: 50.0}),
        ],
    )
    assert got[("S", "World", "net_zero_year", "emissions.co2.land", 2020, 2100)] == 2020
    assert got[("S", "R1", "net_zero_year", "emissions.co2.land", 2020, 2100)] == 2020
    n = notes(con, "net_zero_year")
    assert n[("S", "World", "emissions.co2.land", 2020, 2100)] == (
        "at or below zero in every year from 2020 to 2100: already at net zero in 2020"
    )
    assert n[("S", "R1", "emissions.co2.land", 2020, 2100)] == "already at or below zero in 2020, above zero later"


def test_net_zero_never_reached(con, core):
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [("M", "S", "World", "emissions.co2", "Mt CO2/yr", {2015: -5.0, 2020: 40_000.0, 2100: 0.5})],
    )
    # the negative 2015 value is history, before the base year: it does not count
    assert got[("S", "World", "net_zero_year", "emissions.co2", 2020, 2100)] is None
    assert notes(con, "net_zero_year")[("S", "World", "emissions.co2", 2020, 2100)] == "not reached by 2100"


def test_net_zero_reached_exactly_on_a_reported_year(con, core):
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [("M", "S", "World", "emissions.co2", "Mt CO2/yr", {2020: 40_000.0, 2050: 10_000.0, 2060: 0.0, 2100: 5.0})],
    )
    assert got[("S", "World", "net_zero_year", "emissions.co2", 2020, 2100)] == 2060
    assert notes(con, "net_zero_year")[("S", "World", "emissions.co2", 2020, 2100)] is None


def test_net_zero_between_two_reported_years_is_the_first_whole_year_at_or_below_zero(con, core):
    # 30 (2050) -> -10 (2060): the line crosses zero at 2057.5; annual values 2057 = 2, 2058 = -2 -> 2058.
    # 10 (2020) -> -20 (2050): crossing at exactly 2030 -> 2030 (annual value 0 there).
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [
            ("M", "S", "World", "emissions.co2", "Mt CO2/yr", {2020: 40.0, 2050: 30.0, 2060: -10.0, 2100: -20.0}),
            ("M", "S", "World", "emissions.co2.fossil", "Mt CO2/yr", {2020: 10.0, 2050: -20.0, 2100: -20.0}),
            ("M", "S", "World", "emissions.ghg", "Mt CO2e/yr", {2020: 50.0, 2045: -5.0, 2060: 20.0, 2080: -40.0}),
        ],
    )
    nz = {k[3]: v for k, v in got.items() if k[2] == "net_zero_year"}
    assert nz == {"emissions.co2": 2058, "emissions.co2.fossil": 2030, "emissions.ghg": 2043}  # ghg: 2042.7 -> 2043


@given(
    pts=st.dictionaries(st.integers(2010, 2100), st.floats(-1e4, 1e4, allow_nan=False), min_size=2, max_size=7),
)
def test_net_zero_and_peak_agree_with_numpy_annual_values(core, pts):
    c = duckdb.connect()
    try:
        got = compute(
            c, years_contract(core, 2020, (2030, 2050)), [("M", "S", "World", "emissions.co2", "Mt CO2/yr", pts)]
        )
        xp = sorted(pts)
        years = np.arange(max(2020, xp[0]), xp[-1] + 1)
        by_kind = {
            k[2]: (v, k[4], k[5]) for k, v in got.items() if k[2] in ("net_zero_year", "peak_year", "peak_value")
        }
        if not len(years):
            assert by_kind["net_zero_year"][0] is None and by_kind["peak_year"][0] is None
            return
        # reference: numpy.interp at every whole year from the base year (or the first report) on
        annual = np.interp(years, xp, [pts[y] for y in xp])
        nz, y0, y1 = by_kind["net_zero_year"]
        assert (y0, y1) == (years[0], years[-1])
        if nz is None:
            assert (annual > -1e-9).all()
        else:
            i = int(nz) - years[0]
            assert annual[i] <= 1e-9 and (annual[:i] > -1e-9).all()
        peak, value = by_kind["peak_year"][0], by_kind["peak_value"][0]
        assert value == pytest.approx(annual.max(), rel=1e-9, abs=1e-9)
        assert annual[int(peak) - years[0]] == pytest.approx(annual.max(), rel=1e-9, abs=1e-9)
    finally:
        c.close()


def test_peak_is_sought_from_the_base_year_on(con, core):
    history = {2010: 9.0, 2015: 8.0, 2020: 7.0, 2030: 7.0, 2040: 6.0, 2100: 1.0}  # highest in 2010, before the base
    rising = {2020: 1.0, 2050: 3.0, 2100: 9.5}
    late = {2017: 1.0, 2025: 4.0, 2100: 2.0}  # base year 2020 lies between reports
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [
            ("M", "S", "World", "emissions.ch4", "Mt CH4/yr", history),
            ("M", "S", "World", "emissions.n2o", "kt N2O/yr", rising),
            ("M", "S", "R1", "emissions.ch4", "Mt CH4/yr", late),
        ],
    )
    # reference: numpy argmax over the annual values from 2020 on returns the first maximum (ties: earliest year)
    for region, variable, series in (
        ("World", "emissions.ch4", history),
        ("World", "emissions.n2o", rising),
        ("R1", "emissions.ch4", late),
    ):
        years = np.arange(2020, max(series) + 1)
        annual = np.interp(years, list(series), list(series.values()))
        assert got[("S", region, "peak_year", variable, 2020, max(series))] == years[int(np.argmax(annual))]
        assert got[("S", region, "peak_value", variable, 2020, max(series))] == pytest.approx(annual.max())
    assert got[("S", "World", "peak_year", "emissions.ch4", 2020, 2100)] == 2020  # the 2020-2030 plateau: earliest
    u = units_of(con)
    assert u[("peak_value", "emissions.ch4")] == {"Mt CH4/yr"}
    assert u[("peak_year", "emissions.ch4")] == {"year"}


# ---------------------------------------------------------------------------------------------- costs


def test_loss_pct_against_reference_from_another_table(con, core):
    contract = years_contract(core, 2020, (2030, 2050, 2100))
    ref = {2020: 100.0, 2030: 130.0, 2040: 160.0, 2060: 220.0, 2100: 400.0}
    scen = {2020: 100.0, 2030: 127.0, 2050: 180.0, 2100: 380.0}
    unit = "billion USD_2015/yr"
    # the stored reference lives in another table; the new submission's rows in `checked`
    load_rows(
        con,
        [("M", "base", r, "gdp.mer", unit, ref) for r in ("World", "R1")]
        + [("M2", "strict", "World", "gdp.mer", unit, {2020: 1.0, 2030: 1.0, 2050: 1.0, 2100: 1.0})],
        table="stored",
    )
    load_rows(
        con,
        [
            ("M", "strict", "World", "gdp.mer", unit, scen),
            ("M", "strict", "R2", "gdp.mer", unit, scen),
            ("M", "loose", "World", "gdp.mer", unit, scen),
            ("M2", "other", "World", "gdp.mer", unit, scen),
        ],
    )
    con.execute("CREATE TEMP VIEW everything AS SELECT * FROM checked UNION ALL SELECT * FROM stored")
    load_scenarios(con, [("M", "strict", "base"), ("M", "loose", None), ("M2", "other", "strict")])
    compute_indicators(con, contract, data="everything")
    got = indicators(con, models=True)
    for m in (2030, 2050, 2100):
        r, s = np.interp(m, list(ref), list(ref.values())), np.interp(m, list(scen), list(scen.values()))
        # reference: the definition evaluated with numpy on numpy.interp values
        assert got[("M", "strict", "World", "loss_pct", "gdp.mer", m, m)] == pytest.approx((r - s) / r * 100, rel=1e-12)
        assert got[("M", "strict", "R2", "loss_pct", "gdp.mer", m, m)] is None  # reference has no R2
        assert got[("M", "loose", "World", "loss_pct", "gdp.mer", m, m)] is None  # no reference attribute
        assert got[("M", "base", "World", "loss_pct", "gdp.mer", m, m)] is None  # the reference itself
        # M2/other names "strict", which exists only in model M2 as stored constant 1.0 -> uses that, not M's
        assert got[("M2", "other", "World", "loss_pct", "gdp.mer", m, m)] == pytest.approx((1.0 - s) / 1.0 * 100)
    assert units_of(con)[("loss_pct", "gdp.mer")] == {"%"}
    assert got[("M", "strict", "World", "loss_pct", "gdp.mer", 2030, 2030)] == pytest.approx(3 / 130 * 100)
    # each row says which reference it was measured against, or why there is none
    rows = con.execute("SELECT model, scenario, region, note FROM computed_indicators").fetchall()
    why = {tuple(r[:3]): r[3] for r in rows}
    assert why[("M", "strict", "World")].startswith("against base, the model's own reference scenario")
    assert why[("M", "strict", "R2")] == "the reference scenario base does not report this series"
    assert why[("M", "loose", "World")] == "no reference scenario is named in the scenarios table"


def test_growth_reduction_pp(con, core):
    contract = years_contract(core, 2020, (2030, 2050, 2100))
    years = range(2020, 2101, 5)
    # magnitude as in AR5 WGIII SPM.4.1 (a cut of ~0.06 pp/yr in consumption growth: from memory, illustration only)
    ref = {y: 100 * 1.02 ** (y - 2020) for y in years}
    scen = {y: 100 * 1.0194 ** (y - 2020) for y in years}
    dip = {2020: 100.0, 2030: 0.0, 2050: 150.0, 2100: 300.0}
    unit = "billion USD_2015/yr"
    got = compute(
        con,
        contract,
        [
            ("M", "ref", "World", "consumption", unit, ref),
            ("M", "pol", "World", "consumption", unit, scen),
            ("M", "ref", "R1", "consumption", unit, ref),
            ("M", "pol", "R1", "consumption", unit, dip),
        ],
        scenarios=[("M", "ref", None), ("M", "pol", "ref")],
    )
    for m in (2030, 2050, 2100):
        n = m - 2020
        # reference: the definition with numpy, CAGR(reference) - CAGR(scenario) in pp/yr
        want = ((np.power(ref[m] / ref[2020], 1 / n) - 1) - (np.power(scen[m] / scen[2020], 1 / n) - 1)) * 100
        assert got[("pol", "World", "growth_reduction_pp", "consumption", 2020, m)] == pytest.approx(want, rel=1e-9)
        assert want == pytest.approx(0.06, abs=1e-9)
        assert got[("ref", "World", "growth_reduction_pp", "consumption", 2020, m)] is None  # no reference
    assert got[("pol", "R1", "growth_reduction_pp", "consumption", 2020, 2030)] is None  # CAGR undefined (v1 = 0)
    assert got[("pol", "R1", "growth_reduction_pp", "consumption", 2020, 2050)] is not None
    assert units_of(con)[("growth_reduction_pp", "consumption")] == {"pp/yr"}


def test_gdp_growth_reduction_against_the_ar6_wgiii_spm_c122_arithmetic(con, core):
    # AR6 WGIII SPM C.12.2 states GDP effects as growth 0.04-0.09 percentage points per year lower over 2020-2050
    # and a 2050 GDP 1.3-2.7 % below the modelled reference (pathways likely below 2 degC; values from memory, see
    # reference-values.md). The arithmetic: a reference growing 3.00 %/yr (invented) and a pathway growing 2.91 %/yr
    # is 0.09 pp/yr lower growth, and 1 - (1.0291/1.03)^30 = 2.59 % less GDP in 2050.
    contract = years_contract(core, 2020, (2030, 2050))
    years = range(2020, 2051, 5)
    unit = "billion USD_2015/yr"
    ref = {y: 100_000 * 1.03 ** (y - 2020) for y in years}
    pol = {y: 100_000 * 1.0291 ** (y - 2020) for y in years}
    series = [
        ("M", s, "World", v, unit, pts) for v in ("gdp.mer", "gdp.ppp") for s, pts in (("ref", ref), ("pol", pol))
    ]
    got = compute(con, contract, series, scenarios=[("M", "ref", None), ("M", "pol", "ref")])
    for variable in ("gdp.mer", "gdp.ppp"):
        assert got[("pol", "World", "growth_reduction_pp", variable, 2020, 2050)] == pytest.approx(0.09, abs=1e-9)
        loss = got[("pol", "World", "loss_pct", variable, 2050, 2050)]
        assert loss == pytest.approx((1 - (1.0291 / 1.03) ** 30) * 100, rel=1e-9)
        assert 1.3 <= loss <= 2.7  # inside the published 2050 range for the same pathways (from memory)
    assert units_of(con)[("growth_reduction_pp", "gdp.ppp")] == {"pp/yr"}
    n = notes(con, "growth_reduction_pp")
    assert n[("pol", "World", "gdp.mer", 2020, 2050)] == (
        "against ref, the model's own reference scenario named in the scenarios table"
        " (it may differ from a current-policies pathway)"
    )
    assert n[("ref", "World", "gdp.mer", 2020, 2050)] == "no reference scenario is named in the scenarios table"
    assert notes(con, "loss_pct")[("pol", "World", "gdp.ppp", 2050, 2050)] == n[("pol", "World", "gdp.mer", 2020, 2050)]


def test_npv_matches_numpy_financial(con, core):
    contract = years_contract(core, 2020, (2030, 2050, 2100))
    pts = {2020: 10.0, 2025: 40.0, 2030: 55.0, 2040: 120.0, 2050: 90.0, 2100: 300.0}
    got = compute(
        con,
        contract,
        [
            ("M", "S", "World", "cost.abatement", "billion USD_2015/yr", pts),
            ("M", "S", "R1", "cost.abatement", "billion USD_2015/yr", {2025: 1.0, 2100: 2.0}),
        ],
    )
    rate = contract.discount_rate / 100
    assert rate == 0.05  # core contract default; 5 %/yr as in AR4 WGIII Fig. 3.25 note
    for m in (2030, 2050, 2100):
        annual = np.interp(np.arange(2020, m + 1), list(pts), list(pts.values()))
        # reference: numpy_financial.npv, which does not discount its first value (the base year)
        assert got[("S", "World", "npv", "cost.abatement", 2020, m)] == pytest.approx(npf.npv(rate, annual), rel=1e-12)
        assert got[("S", "R1", "npv", "cost.abatement", 2020, m)] is None  # not reported at the base year
    assert units_of(con)[("npv", "cost.abatement")] == {"billion USD_2015"}


def test_npv_docstring_example_of_numpy_financial(con, core):
    # numpy_financial.npv docstring (after Gitman 2003, p. 346): npv(0.08, [-40000, 5000, 8000, 12000, 30000])
    # = 3065.22267; here as annual costs 2020..2024 discounted at 8 %/yr to the base year 2020.
    contract = years_contract(core, 2020, (2024,), rate=8.0)
    flows = dict(zip(range(2020, 2025), (-40000.0, 5000.0, 8000.0, 12000.0, 30000.0), strict=True))
    got = compute(con, contract, [("M", "S", "World", "cost.abatement", "billion USD_2015/yr", flows)])
    assert got[("S", "World", "npv", "cost.abatement", 2020, 2024)] == pytest.approx(3065.22267, abs=1e-5)


# ---------------------------------------------------------------------------------------------- the table itself


def test_output_table_shape_and_helpers_dropped(con, core):
    got = compute(con, core, [("M", "S", "World", "emissions.co2", "Mt CO2/yr", {2020: 1.0, 2100: 2.0})])
    assert got
    con.execute("CREATE OR REPLACE TEMP VIEW data_view AS SELECT * FROM checked")
    count = compute_indicators(con, core, data="data_view", target="other target")
    described = con.execute('DESCRIBE "other target"').fetchall()
    assert [(r[0], r[1]) for r in described] == list(COLUMNS)
    assert count == len(got)
    left = con.execute(
        "SELECT table_name FROM duckdb_tables() WHERE table_name LIKE '_milepost_indicators_%'"
        " UNION ALL SELECT view_name FROM duckdb_views() WHERE view_name LIKE '_milepost_%'"
    ).fetchall()
    assert left == []


def test_empty_input_gives_empty_table(con, core):
    got = compute(con, core, [])
    assert got == {}
    assert [r[0] for r in con.execute("DESCRIBE computed_indicators").fetchall()] == [c for c, _ in COLUMNS]


def test_repeated_rows(con, core):
    pts = {2020: 5.0, 2030: 4.0, 2050: 1.0, 2100: -1.0}
    once = compute(con, core, [("M", "S", "World", "emissions.co2", "Mt CO2/yr", pts)])
    con.execute("INSERT INTO checked SELECT * FROM checked WHERE year IN (2030, 2100)")
    compute_indicators(con, core)
    assert indicators(con) == once  # identical repeats count once
    con.execute("INSERT INTO checked VALUES ('M', 'S', 'World', 'emissions.co2', 'Mt CO2/yr', 2050, 1.5)")
    with pytest.raises(IndicatorDataError, match="2050"):
        compute_indicators(con, core)


def test_null_and_non_finite_values_are_bridged(con, core):
    contract = years_contract(core, 2020, (2030,))
    load_rows(con, [("M", "S", "World", "population", "million", {2020: 1.0, 2025: 99.0, 2040: 4.0})])
    con.execute("UPDATE checked SET value = NULL WHERE year = 2025")
    load_scenarios(con, [("M", "S", None)])
    compute_indicators(con, contract)
    # the null 2025 point is left out: the line runs from 2020 to 2040 (reference: numpy.interp)
    want = np.interp(2030, [2020, 2040], [1.0, 4.0])
    assert indicators(con)[("S", "World", "value", "population", 2030, 2030)] == pytest.approx(want)


def test_conflicting_references_raise(con, core):
    load_rows(
        con, [("M", s, "World", "gdp.mer", "billion USD_2015/yr", {2020: 1.0, 2100: 2.0}) for s in ("a", "b", "c")]
    )
    load_scenarios(con, [("M", "c", "a"), ("M", "c", "b")])
    with pytest.raises(IndicatorDataError, match="more than one reference"):
        compute_indicators(con, core)
