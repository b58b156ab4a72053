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
    assert abs(cagr - 1.3) < 0.1  # published 1.3 %/yr; rates from rounded levels match to ~0.1 (reference-values)
    linear = got[("S", "World", "rate_linear", "emissions.ghg", 2010, 2019)]
    assert linear == pytest.approx((59_360 - 53_000) / (53_000 * 9) * 100, rel=1e-12)
    assert units_of(con)[("rate_cagr", "emissions.ghg")] == {"%/yr"}


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
        assert got[("S", "R1", "rate_linear", "gdp.mer", y0, y1)] == pytest.approx(
            (v[y1] - v[y0]) / (v[y0] * (y1 - y0)) * 100, rel=1e-10
        )


def test_rates_null_where_undefined(con, core):
    c = years_contract(core, 2020, (2030, 2050))
    got = compute(
        con,
        c,
        [
            ("M", "S", "World", "emissions.co2", "Mt CO2/yr", {2020: 0.0, 2030: 10.0, 2050: 20.0}),
            ("M", "S", "World", "emissions.ch4", "Mt CH4/yr", {2020: -4.0, 2030: 2.0, 2050: 0.0}),
        ],
    )
    key = ("S", "World")
    assert got[(*key, "rate_cagr", "emissions.co2", 2020, 2030)] is None  # v0 = 0
    assert got[(*key, "rate_linear", "emissions.co2", 2020, 2030)] is None  # v0 = 0
    assert got[(*key, "rate_cagr", "emissions.co2", 2030, 2050)] == pytest.approx((2 ** (1 / 20) - 1) * 100)
    assert got[(*key, "rate_cagr", "emissions.ch4", 2020, 2030)] is None  # v0 < 0
    assert got[(*key, "rate_cagr", "emissions.ch4", 2030, 2050)] is None  # v1 = 0
    # linear rate with a negative start follows the formula: (2 - -4) / (-4 * 10) * 100 = -15
    assert got[(*key, "rate_linear", "emissions.ch4", 2020, 2030)] == pytest.approx(-15.0)
    assert got[(*key, "rate_linear", "emissions.ch4", 2030, 2050)] == pytest.approx(-5.0)


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
    finally:
        c.close()


# ---------------------------------------------------------------------------------------------- cumulative


def test_cumulative_matches_scipy_trapezoid(con, core):
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
            annual = np.interp(years, list(pts), list(pts.values()))
            # reference: scipy.integrate.trapezoid over the annual interpolated series; 1 Gt = 1e3 Mt = 1e6 kt (SI)
            want = trapezoid(annual, years) / per_gt
            assert got[("S", "World", "cumulative", variable, 2020, m)] == pytest.approx(want, rel=1e-10)
            if m in pts:
                # on the reported points alone the trapezoid is the same (the series is piecewise linear)
                xs = [y for y in pts if y <= m]
                assert trapezoid([pts[y] for y in xs], xs) / per_gt == pytest.approx(want, rel=1e-12)
    assert got[("S", "World", "cumulative", "emissions.ch4", 2020, 2030)] is None  # reported only from 2025
    u = units_of(con)
    assert u[("cumulative", "emissions.co2")] == {"Gt CO2"}
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
def test_cumulative_is_additive_over_consecutive_periods(core, pairs_spec, values, extra_years):
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
        assert cum[(2020, 2030)] + cum[(2030, 2050)] + cum[(2050, 2100)] == pytest.approx(
            cum[(2020, 2100)], rel=1e-9, abs=1e-9
        )
        xs = np.arange(2020, 2101)
        assert cum[(2020, 2100)] == pytest.approx(
            trapezoid(np.interp(xs, list(pts), list(pts.values())), xs) / 1e3, rel=1e-9, abs=1e-9
        )  # scipy reference
    finally:
        c.close()


# ---------------------------------------------------------------------------------------------- timing


def test_net_zero_year(con, core):
    cases = {
        "emissions.co2": {2020: 40.0, 2030: 30.0, 2050: 10.0, 2060: -10.0, 2100: -20.0},  # 2055 by hand
        "emissions.co2.fossil": {2020: 35.0, 2050: -5.0, 2100: -5.0},  # 2020 + 35/40*30
        "emissions.co2.land": {2015: -1.0, 2020: 2.0, 2100: 3.0},  # first value <= 0
        "emissions.co2.fossil.power": {2020: 10.0, 2040: 0.0, 2060: 5.0, 2100: -5.0},  # touches 0 at 2040
        "emissions.co2.fossil.other": {2020: 10.0, 2100: 0.5},  # never
        "emissions.ghg": {2020: 50.0, 2045: -5.0, 2060: 20.0, 2080: -40.0},  # first of two crossings
    }
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [("M", "S", "World", v, core.variables[v].unit, pts) for v, pts in cases.items()],
    )
    nz = {k[3]: (v, k[4], k[5]) for k, v in got.items() if k[2] == "net_zero_year"}
    assert nz["emissions.co2"] == (2055.0, 2020, 2100)
    assert nz["emissions.co2.fossil"][0] == pytest.approx(2046.25)
    assert nz["emissions.co2.land"] == (2015.0, 2015, 2100)
    assert nz["emissions.co2.fossil.power"][0] == 2040.0
    assert nz["emissions.co2.fossil.other"][0] is None
    assert nz["emissions.ghg"][0] == pytest.approx(2045 - 25 * 5 / 55)
    for v, pts in cases.items():
        # reference: numpy.interp on a fine grid; the first grid point at or below zero
        grid = min(pts) + np.arange((max(pts) - min(pts)) * 1000 + 1) / 1000  # exact at whole years
        below = np.nonzero(np.interp(grid, list(pts), list(pts.values())) <= 1e-12)[0]
        if below.size:
            assert nz[v][0] == pytest.approx(grid[below[0]], abs=0.0011), v
        else:
            assert nz[v][0] is None
    assert units_of(con)[("net_zero_year", "emissions.co2")] == {"year"}
    assert not any(k[3] == "emissions.ch4" for k in got if k[2] == "net_zero_year")  # excluded in indicators.toml


def test_peak_year_and_value(con, core):
    pts = {2010: 5.0, 2020: 7.0, 2030: 7.0, 2040: 6.0, 2100: 1.0}
    rising = {2020: 1.0, 2050: 3.0, 2100: 9.5}
    got = compute(
        con,
        years_contract(core, 2020, (2030, 2050, 2100)),
        [
            ("M", "S", "World", "emissions.ch4", "Mt CH4/yr", pts),
            ("M", "S", "World", "emissions.n2o", "kt N2O/yr", rising),
        ],
    )
    for variable, series in (("emissions.ch4", pts), ("emissions.n2o", rising)):
        xs, vs = list(series), list(series.values())
        first, last = min(xs), max(xs)
        # reference: numpy argmax returns the first maximum -> ties go to the earliest year
        assert got[("S", "World", "peak_year", variable, first, last)] == xs[int(np.argmax(vs))]
        assert got[("S", "World", "peak_value", variable, first, last)] == max(vs)
    assert got[("S", "World", "peak_year", "emissions.ch4", 2010, 2100)] == 2020
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
