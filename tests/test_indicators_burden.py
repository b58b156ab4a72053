"""Burden sharing: allowances under each rule against shares computed independently with numpy, transfers, gaps."""

from __future__ import annotations

from dataclasses import replace

import duckdb
import numpy as np
import pandas as pd
import pytest

from milepost.schema.contract import Allocation, Contract
from milepost.validate.store.indicators import compute_indicators

REGIONS = ("Ardena", "Belmora", "Cendral", "Dovania", "Estrel")
YEARS = (2020, 2030, 2050)
GHG = np.array([[12000.0, 9000.0, 4000.0], [15000.0, 16000.0, 8000.0], [3000.0, 2500.0, 1500.0],
                [2000.0, 2600.0, 2200.0], [4000.0, 3000.0, 1000.0]])  # fmt: skip
POP = np.array([[1100.0, 1120.0, 1130.0], [3300.0, 3500.0, 3600.0], [900.0, 950.0, 990.0],
                [1700.0, 2000.0, 2500.0], [800.0, 820.0, 830.0]])  # fmt: skip
COST = np.array([[0.0, 300.0, 900.0], [0.0, 200.0, 800.0], [0.0, 40.0, 100.0], [0.0, 10.0, 60.0],
                 [0.0, 30.0, 90.0]])  # fmt: skip
PRICE = np.array([10.0, 80.0, 250.0])  # USD_2015/t CO2
UNITS = {"emissions.ghg": "Mt CO2e/yr", "population": "million", "cost.abatement": "billion USD_2015/yr",
         "price.carbon": "USD_2015/t CO2"}  # fmt: skip
CONVERGENCE = 2040


def _rows(scenario: str, ghg: np.ndarray, pop: np.ndarray | None, price: bool = True) -> list[tuple]:
    out = []
    for j, year in enumerate(YEARS):
        for i, r in enumerate(REGIONS):
            out.append(("M", scenario, r, "emissions.ghg", UNITS["emissions.ghg"], year, float(ghg[i, j])))
            out.append(("M", scenario, r, "cost.abatement", UNITS["cost.abatement"], year, float(COST[i, j])))
            if pop is not None:
                out.append(("M", scenario, r, "population", UNITS["population"], year, float(pop[i, j])))
        out.append(("M", scenario, "World", "emissions.ghg", UNITS["emissions.ghg"], year, float(ghg[:, j].sum())))
        if price:
            out.append(("M", scenario, "World", "price.carbon", UNITS["price.carbon"], year, float(PRICE[j])))
    return out


@pytest.fixture(scope="module")
def computed(basic: Contract):
    contract = replace(basic, allocation=Allocation(convergence_year=CONVERGENCE))
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE checked (model VARCHAR, scenario VARCHAR, region VARCHAR, variable VARCHAR, unit VARCHAR,"
        " year INTEGER, value DOUBLE)"
    )
    con.execute("CREATE TABLE checked_scenarios (model VARCHAR, scenario VARCHAR, reference VARCHAR)")
    # every region's emissions a fixed multiple of its base year: grandfathered allowances equal emissions
    uniform = GHG[:, :1] * np.array([1.0, 0.8, 0.5])
    rows = _rows("main", GHG, POP) + _rows("uniform", uniform, POP) + _rows("no-price", GHG, POP, price=False)
    rows += [r for r in _rows("no-pop-dovania", GHG, POP) if not (r[2] == "Dovania" and r[3] == "population")]
    con.executemany("INSERT INTO checked VALUES (?, ?, ?, ?, ?, ?, ?)", rows)
    compute_indicators(con, contract)
    df = con.execute(
        "SELECT scenario, region, kind, variable AS rule, year_to AS year, value, unit, note FROM computed_indicators"
        " WHERE kind IN ('allowance', 'permits_sold', 'transfer', 'cost_after_trade', 'market_permits',"
        " 'market_value')"
    ).df()
    gaps = con.execute(
        "SELECT * FROM computed_indicators_gaps WHERE kind IN (SELECT DISTINCT kind FROM computed_indicators"
        " WHERE variable IN ('grandfathering', 'per_capita', 'convergence'))"
    ).df()  # the driver gaps are not ours
    con.close()
    return df, gaps


def _values(df, scenario: str, kind: str, rule: str, year: int) -> np.ndarray:
    sub = df[(df.scenario == scenario) & (df.kind == kind) & (df.rule == rule) & (df.year == year)]
    return sub.set_index("region").loc[list(REGIONS), "value"].to_numpy(dtype=float)


def test_allowances_follow_each_rule(computed) -> None:
    df, _ = computed
    for j, year in ((1, 2030), (2, 2050)):
        cap = GHG[:, j].sum()
        grandfathering = GHG[:, 0] / GHG[:, 0].sum()
        # equal per capita: population shares computed here, independently of the SQL
        per_capita = POP[:, j] / POP[:, j].sum()
        w = min((year - 2020) / (CONVERGENCE - 2020), 1.0)
        convergence = (1 - w) * grandfathering + w * per_capita
        for rule, shares in (
            ("grandfathering", grandfathering),
            ("per_capita", per_capita),
            ("convergence", convergence),
        ):
            np.testing.assert_allclose(_values(df, "main", "allowance", rule, year), shares * cap, rtol=1e-12)
    # past the convergence year, contraction and convergence is equal per capita
    np.testing.assert_allclose(
        _values(df, "main", "allowance", "convergence", 2050), _values(df, "main", "allowance", "per_capita", 2050)
    )
    assert set(df[df.kind == "allowance"].unit) == {"Mt CO2e"} and set(df[df.kind == "transfer"].unit) == {
        "billion USD_2015/yr"
    }
    assert df[df.kind == "allowance"].note.str.contains("not a negotiated share").all()


def test_transfers_sum_to_zero_and_vanish_when_allowances_equal_emissions(computed) -> None:
    df, _ = computed
    for rule in ("grandfathering", "per_capita", "convergence"):
        for j, year in ((1, 2030), (2, 2050)):
            permits = _values(df, "main", "permits_sold", rule, year)
            np.testing.assert_allclose(permits, _values(df, "main", "allowance", rule, year) - GHG[:, j], atol=1e-9)
            transfer = _values(df, "main", "transfer", rule, year)
            # Mt CO2e x USD/t = million USD; / 1000 = billion USD
            np.testing.assert_allclose(transfer, permits * PRICE[j] / 1000, rtol=1e-12)
            assert transfer.sum() == pytest.approx(0.0, abs=1e-9)
            after = _values(df, "main", "cost_after_trade", rule, year)
            np.testing.assert_allclose(after, COST[:, j] - transfer, atol=1e-9)
            market = df[(df.scenario == "main") & (df.rule == rule) & (df.year == year)].set_index("kind")
            assert market.loc["market_permits", "region"] == "World"
            assert market.loc["market_permits", "value"] == pytest.approx(permits[permits > 0].sum())
            assert market.loc["market_value", "value"] == pytest.approx(transfer[transfer > 0].sum())
    np.testing.assert_allclose(_values(df, "uniform", "transfer", "grandfathering", 2050), 0.0, atol=1e-9)


def test_missing_inputs_leave_gaps_not_zeros(computed) -> None:
    df, gaps = computed
    no_price = df[df.scenario == "no-price"]
    assert set(no_price.kind) == {"allowance", "permits_sold", "market_permits"}
    noted = gaps[(gaps.scenario == "no-price")]
    assert set(noted.kind) == {"transfer", "cost_after_trade", "market_value"}
    assert noted.note.str.contains("no price.carbon is reported").all() and set(noted.region) == {"World"}
    no_pop = df[df.scenario == "no-pop-dovania"]
    assert set(no_pop.rule) == {"grandfathering"}
    noted = gaps[(gaps.scenario == "no-pop-dovania") & gaps.kind.isin(["allowance"])]
    assert set(noted.variable) == {"per_capita", "convergence"}
    assert noted.note.str.contains("no population is reported").all()
    assert gaps[gaps.scenario == "main"].query("kind in ['allowance', 'transfer']").empty


GDP_REF = np.array([[100.0, 130.0, 180.0], [200.0, 280.0, 400.0], [50.0, 60.0, 80.0], [40.0, 60.0, 90.0],
                    [30.0, 35.0, 45.0]])  # fmt: skip
GDP_LOSS = np.array([[0.0, 2.0, 5.0], [0.0, 1.0, 9.0], [0.0, 0.5, 0.2], [0.0, 0.0, 1.5], [0.0, 0.7, 0.3]])  # fmt: skip


@pytest.fixture(scope="module")
def shares(basic: Contract):
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE checked (model VARCHAR, scenario VARCHAR, region VARCHAR, variable VARCHAR, unit VARCHAR,"
        " year INTEGER, value DOUBLE)"
    )
    con.execute("CREATE TABLE checked_scenarios (model VARCHAR, scenario VARCHAR, reference VARCHAR)")
    con.executemany("INSERT INTO checked_scenarios VALUES ('M', ?, ?)", [("ref", None), ("policy", "ref")])
    unit = basic.variables["gdp.ppp"].unit
    rows = []
    for j, year in enumerate(YEARS):
        for i, r in enumerate(REGIONS):
            rows.append(("M", "policy", r, "cost.abatement", UNITS["cost.abatement"], year, float(COST[i, j])))
            rows.append(("M", "ref", r, "gdp.ppp", unit, year, float(GDP_REF[i, j])))
            rows.append(("M", "policy", r, "gdp.ppp", unit, year, float(GDP_REF[i, j] - GDP_LOSS[i, j])))
        rows.append(("M", "policy", "World", "cost.abatement", UNITS["cost.abatement"], year, float(COST[:, j].sum())))
    con.executemany("INSERT INTO checked VALUES (?, ?, ?, ?, ?, ?, ?)", rows)
    compute_indicators(con, basic)
    df = con.execute(
        "SELECT scenario, region, variable, year_to AS year, value, unit FROM computed_indicators"
        " WHERE kind = 'cost_share'"
    ).df()
    con.close()
    return pd.DataFrame(rows, columns=["model", "scenario", "region", "variable", "unit", "year", "value"]), df


def test_regional_cost_shares_sum_to_one_and_match_pandas(shares) -> None:
    rows, df = shares
    # independent computation with pandas from the input rows: the abatement cost over World's, the loss against
    # the reference over the loss summed over the regions
    parts = rows[rows["region"].isin(REGIONS)]
    cost = parts[parts["variable"] == "cost.abatement"].set_index(["region", "year"])["value"]
    world = rows[(rows["region"] == "World") & (rows["variable"] == "cost.abatement")].set_index("year")["value"]
    gdp = parts[parts["variable"] == "gdp.ppp"]
    gdp = gdp.pivot_table(index=["region", "year"], columns="scenario", values="value")
    loss = gdp["ref"] - gdp["policy"]
    expected = {
        "cost.abatement": cost / world.reindex(cost.index.get_level_values("year")).to_numpy(),
        "gdp.ppp": loss / loss.groupby(level="year").transform("sum"),
    }
    for variable, exp in expected.items():
        got = df[(df["variable"] == variable) & (df["scenario"] == "policy")]
        for year in YEARS[1:]:  # the milestones (the base year has no cost: 0 / 0 is no share)
            mine = got[got["year"] == year].set_index("region").loc[list(REGIONS), "value"].to_numpy(dtype=float)
            want = exp.xs(year, level="year").loc[list(REGIONS)].to_numpy(dtype=float)
            np.testing.assert_allclose(mine, want, rtol=1e-12)
            assert mine.sum() == pytest.approx(1.0, rel=1e-12)  # the regions that add up to World share all of it
    assert set(df["unit"]) == {"fraction"}
    assert "World" not in set(df["region"])  # a share of World in itself says nothing
