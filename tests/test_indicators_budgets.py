"""Carbon budgets: the contract's table against the published one, and the budget indicators on hand-worked sums."""

from __future__ import annotations

from dataclasses import replace

import duckdb
import pytest

from milepost.schema.contract import Contract
from milepost.validate.store.indicators import compute_indicators

BUDGET_KINDS = ("cumulative_net_zero", "budget_level", "warming_peak", "warming_peak_low", "warming_peak_high")


def test_core_budgets_are_ar6_table_spm2(core: Contract) -> None:
    b = core.budgets
    assert b is not None and "SPM.2" in b.source and b.from_year == 2020 and b.region == "World"
    # IPCC AR6 WG1 Summary for Policymakers, Table SPM.2 (approved version p. SPM-38; the page is from memory):
    # remaining carbon budgets from 1 January 2020, Gt CO2, at 17/33/50/67/83 % likelihood. The 50/67/83 % columns
    # are confirmed in secondary restatements; the 17/33 % columns are from memory.
    assert b.likelihoods == (17, 33, 50, 67, 83)
    assert dict(zip(b.levels, b.remaining, strict=True)) == {
        1.5: (900, 650, 500, 400, 300),
        1.7: (1450, 1050, 850, 700, 550),
        2.0: (2300, 1700, 1350, 1150, 900),
    }
    # TCRE 0.45 °C per 1000 Gt CO2, likely 0.27-0.63: AR6 WG1 SPM D.1.1.
    assert (b.tcre, b.tcre_likely) == (0.45, (0.27, 0.63))


def test_budgets_agree_with_the_published_totals_since_1850(core: Contract) -> None:
    # AR6 WG1 SPM D.1.2: 2390 Gt CO2 emitted 1850-2019; AR6 SYR SPM B.5.4: total budgets since 1850 of about
    # 2900 Gt (1.5 °C, 50 %) and 3550 Gt (2 °C, 67 %). Budgets are rounded to 50 Gt, hence the tolerance.
    b = core.budgets
    assert b is not None
    assert 2390 + b.budget(1.5, 50) == pytest.approx(2900, abs=50)
    assert 2390 + b.budget(2.0, 67) == pytest.approx(3550, abs=50)


def _world_co2(con: duckdb.DuckDBPyConnection, series: dict[str, list[tuple[int, float]]], region: str = "World"):
    rows = [
        ("M", name, region, "emissions.co2", "Mt CO2/yr", year, value)
        for name, points in series.items()
        for year, value in points
    ]
    con.executemany("INSERT INTO checked VALUES (?, ?, ?, ?, ?, ?, ?)", rows)


@pytest.fixture(scope="module")
def computed(basic: Contract):
    """Budget indicators of hand-made World CO2 series: a straight line from v0 (2020) to 0 in year Y sums, over
    the whole years 2020..Y, to v0 x (Y - 2020 + 1) / 2 Mt, so each cumulative below is exact by construction."""
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE checked (model VARCHAR, scenario VARCHAR, region VARCHAR, variable VARCHAR, unit VARCHAR,"
        " year INTEGER, value DOUBLE)"
    )
    _world_co2(
        con,
        {
            "c600": [(2020, 40_000.0), (2049, 0.0), (2100, -5_000.0)],  # 40000 x 30 / 2 = 600 Gt, net zero 2049
            "c400": [(2020, 40_000.0), (2039, 0.0), (2100, 0.0)],  # 40000 x 20 / 2 = 400 Gt: on 1.5 °C at 67 %
            "c1150": [(2020, 50_000.0), (2065, 0.0)],  # 50000 x 46 / 2 = 1150 Gt: on 2.0 °C at 67 %
            "c2500": [(2020, 62_500.0), (2099, 0.0), (2100, -100.0)],  # 62500 x 80 / 2 = 2500 Gt: above all
            "never": [(2020, 10_000.0), (2100, 10_000.0)],  # 81 years x 10 Gt = 810 Gt, no net zero
            "late": [(2030, 10_000.0), (2100, 0.0)],  # does not cover the base year
        },
    )
    _world_co2(con, {"c600": [(2020, 4_000.0), (2049, 0.0)]}, region="Ardena")
    con.execute("CREATE TABLE checked_scenarios AS SELECT 'M' AS model, 'c600' AS scenario, NULL AS reference")
    compute_indicators(con, basic)
    rows = con.execute(
        "SELECT scenario, region, kind, variable, year_from, year_to, value, unit FROM computed_indicators"
        f" WHERE kind IN {BUDGET_KINDS}"
    ).fetchall()
    con.close()
    return {(s, r, k, v): (y0, y1, value, unit) for s, r, k, v, y0, y1, value, unit in rows}


def _value(computed: dict, scenario: str, kind: str, variable: str = "emissions.co2") -> float | None:
    return computed[(scenario, "World", kind, variable)][2]


@pytest.mark.parametrize(
    ("scenario", "net_zero", "cumulative"),
    [("c600", 2049, 600.0), ("c400", 2039, 400.0), ("c1150", 2065, 1150.0), ("c2500", 2099, 2500.0)],
)
def test_cumulative_to_net_zero(computed: dict, scenario: str, net_zero: int, cumulative: float) -> None:
    y0, y1, value, unit = computed[(scenario, "World", "cumulative_net_zero", "emissions.co2")]
    assert (y0, y1, unit) == (2020, net_zero, "Gt CO2")
    assert value == pytest.approx(cumulative, rel=1e-12)


def test_without_net_zero_the_sum_runs_to_the_last_year(computed: dict) -> None:
    assert computed[("never", "World", "cumulative_net_zero", "emissions.co2")] == (2020, 2100, 810.0, "Gt CO2")
    y0, y1, value, _ = computed[("late", "World", "cumulative_net_zero", "emissions.co2")]
    assert (y0, y1, value) == (2020, 2100, None)  # no value: the series starts after the base year
    assert computed[("late", "World", "budget_level", "67%")][2] is None
    assert computed[("late", "World", "warming_peak", "emissions.co2")][2] is None


# Hand-worked from Table SPM.2: the lowest level whose budget at the likelihood holds the sum (sum <= budget).
LEVELS: dict[str, dict[str, float | None]] = {
    "c600": {"17%": 1.5, "33%": 1.5, "50%": 1.7, "67%": 1.7, "83%": 2.0},
    "c400": {"17%": 1.5, "33%": 1.5, "50%": 1.5, "67%": 1.5, "83%": 1.7},  # exactly on 400 at 67 %: within it
    "c1150": {"17%": 1.7, "33%": 2.0, "50%": 2.0, "67%": 2.0, "83%": None},  # on 1150 at 67 %; above 900 at 83 %
    "c2500": {"17%": None, "33%": None, "50%": None, "67%": None, "83%": None},  # above every budget
    "never": {"17%": 1.5, "33%": 1.7, "50%": 1.7, "67%": 2.0, "83%": 2.0},  # 810 Gt
}


@pytest.mark.parametrize("scenario", sorted(LEVELS))
def test_budget_level_hand_worked(computed: dict, scenario: str) -> None:
    got = {lik: _value(computed, scenario, "budget_level", lik) for lik in LEVELS[scenario]}
    assert got == LEVELS[scenario]
    y0, _, _, unit = computed[(scenario, "World", "budget_level", "67%")]
    assert (y0, unit) == (2020, "°C")


# W_p solves budget_p(W) = C: linear between 1.5/1.7/2.0 °C, beyond the table the central TCRE (0.45 °C per 1000 Gt).
WARMING = {
    # C = 600: 1.5 + 0.2 x 100/350; 1.5 - 0.45 x 300/1000 (below 900 at 17 %); 1.7 + 0.3 x 50/350
    "c600": (1.5 + 0.2 * 100 / 350, 1.365, 1.7 + 0.3 * 50 / 350),
    # C = 400: 1.5 - 0.45 x 100/1000 (below 500); 1.5 - 0.45 x 500/1000; 1.5 + 0.2 x 100/250 (300 -> 550 at 83 %)
    "c400": (1.455, 1.275, 1.58),
    # C = 1150: 1.7 + 0.3 x 300/500; 1.5 + 0.2 x 250/550; 2.0 + 0.45 x 250/1000 (above 900 at 83 %)
    "c1150": (1.88, 1.5 + 0.2 * 250 / 550, 2.1125),
    # C = 2500: above the table at every likelihood: 2.0 + 0.45 x (2500 - 1350, 2300, 900) / 1000
    "c2500": (2.5175, 2.09, 2.72),
}


@pytest.mark.parametrize("scenario", sorted(WARMING))
def test_warming_peak_hand_worked(computed: dict, scenario: str) -> None:
    central, low, high = WARMING[scenario]
    assert _value(computed, scenario, "warming_peak") == pytest.approx(central, abs=1e-9)
    assert _value(computed, scenario, "warming_peak_low") == pytest.approx(low, abs=1e-9)
    assert _value(computed, scenario, "warming_peak_high") == pytest.approx(high, abs=1e-9)


def test_warming_is_consistent_with_the_budget_classes(computed: dict) -> None:
    # within a level's budget at 50 % means a central warming at or below that level, and above the level below
    for scenario in LEVELS:
        level = _value(computed, scenario, "budget_level", "50%")
        w = _value(computed, scenario, "warming_peak")
        if level is not None:
            assert w <= level + 1e-12
        else:
            assert w > 2.0


def test_budget_kinds_only_in_the_budget_region(computed: dict) -> None:
    regional = {k for (s, r, k, _v) in computed if r == "Ardena"}
    assert regional == {"cumulative_net_zero"}
    assert computed[("c600", "Ardena", "cumulative_net_zero", "emissions.co2")][1:3] == (2049, pytest.approx(60.0))


def test_no_budget_rows_without_budgets(basic: Contract) -> None:
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE checked (model VARCHAR, scenario VARCHAR, region VARCHAR, variable VARCHAR, unit VARCHAR,"
        " year INTEGER, value DOUBLE)"
    )
    _world_co2(con, {"s": [(2020, 40_000.0), (2049, 0.0)]})
    con.execute("CREATE TABLE checked_scenarios AS SELECT 'M' AS model, 's' AS scenario, NULL AS reference")
    compute_indicators(con, replace(basic, budgets=None))
    kinds = {k for (k,) in con.execute("SELECT DISTINCT kind FROM computed_indicators").fetchall()}
    con.close()
    assert "cumulative_net_zero" in kinds
    assert not kinds & {"budget_level", "warming_peak", "warming_peak_low", "warming_peak_high"}
