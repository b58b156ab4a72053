"""Tests of the invented demo intercomparison generator (milepost.example_db.generate)."""

# pandas-stubs types a `.loc[...]` scalar as the union of every scalar type; these checks index frames throughout.
# mypy: disable-error-code="assignment, return-value"

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from milepost.example_db import generate as gen
from milepost.schema.contract import Contract

from published import GWP100

KEYS = ["model", "scenario", "region", "year"]
MIXED_KEYS = ["model", "scenario", "variable", "year"]


@pytest.fixture(scope="module")
def con() -> Contract:
    return gen.contract()


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    return gen.ensemble_frame()


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> gen.DemoFiles:
    return gen.write_demo(tmp_path_factory.mktemp("demo"))


def parts_table(con: Contract) -> pd.DataFrame:
    """One row per (total, part, factor) from the resolved contract."""
    rows = [(v.name, p.variable, p.factor) for v in con.variables.values() for p in v.parts]
    return pd.DataFrame(rows, columns=["total", "variable", "factor"])


def parts_gaps(df: pd.DataFrame, con: Contract) -> pd.DataFrame:
    """Every total next to the factor-weighted sum of its parts (computed with groupby, not with the generator)."""
    parts = df.merge(parts_table(con), on="variable")
    parts["weighted"] = parts["value"] * parts["factor"]
    summed = parts.groupby([*KEYS, "total"], as_index=False)["weighted"].sum()
    totals = df.rename(columns={"variable": "total"})[[*KEYS, "total", "value"]]
    out = totals.merge(summed, on=[*KEYS, "total"], how="inner")
    out["gap"] = (out["value"] - out["weighted"]).abs()
    return out


def region_gaps(df: pd.DataFrame, con: Contract) -> pd.DataFrame:
    """World next to the sum of the five regions, for variables that aggregate by sum or net to zero."""
    how = {name: v.regions for name, v in con.variables.items()}
    sub = df[df["variable"].map(how).isin(["sum", "zero"])]
    regional = sub[sub["region"].isin(gen.REGIONS)].groupby(MIXED_KEYS, as_index=False)["value"].sum()
    world = sub[sub["region"] == gen.WORLD][[*MIXED_KEYS, "value"]]
    out = world.merge(regional, on=MIXED_KEYS, suffixes=("", "_regions"))
    out["gap"] = (out["value"] - out["value_regions"]).abs()
    return out


def failing(gaps: pd.DataFrame, con: Contract, value: str = "value") -> pd.DataFrame:
    tol = con.tolerance
    allowed = np.maximum(tol.sum_absolute, tol.sum_relative * gaps[value].abs())
    return gaps[gaps["gap"] > allowed]


def world(df: pd.DataFrame, variable: str) -> pd.DataFrame:
    """World values of one variable as a (model, scenario) x year table."""
    sub = df[(df["region"] == gen.WORLD) & (df["variable"] == variable)]
    return sub.pivot_table(index=["model", "scenario"], columns="year", values="value")


# --- files ----------------------------------------------------------------------------------------------------


def test_same_bytes_twice(demo: gen.DemoFiles, tmp_path: Path) -> None:
    again = gen.write_demo(tmp_path)
    first, second = demo.all_paths(), again.all_paths()
    assert [p.name for p in first] == [p.name for p in second]
    for a, b in zip(first, second, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_files_by_role(demo: gen.DemoFiles) -> None:
    assert set(demo.submissions) == set(gen.MODELS)
    assert [p.suffix for p in demo.submissions[gen.XLSX_MODEL]] == [".xlsx"]
    for model in set(gen.MODELS) - {gen.XLSX_MODEL}:
        data, scen = demo.submissions[model]
        assert data.read_text().splitlines()[0] == ",".join(gen.COLUMNS)
        assert scen.read_text().splitlines()[0] == ",".join(gen.SCENARIO_COLUMNS)
    assert len(demo.flawed) == 2 and len(demo.revision) == 2
    assert all(p.exists() and p.parent == demo.out_dir for p in demo.all_paths())


def test_csv_round_trips(demo: gen.DemoFiles, frame: pd.DataFrame) -> None:
    model = gen.MODELS[0]
    back = pd.read_csv(demo.submissions[model][0])
    want = frame[frame["model"] == model].reset_index(drop=True)
    pd.testing.assert_frame_equal(back, want)


def test_xlsx_round_trips(demo: gen.DemoFiles, frame: pd.DataFrame) -> None:
    (path,) = demo.submissions[gen.XLSX_MODEL]
    sheets = pd.read_excel(path, sheet_name=None, engine="openpyxl")
    assert list(sheets) == ["data", "scenarios"]
    want = frame[frame["model"] == gen.XLSX_MODEL].reset_index(drop=True)
    pd.testing.assert_frame_equal(sheets["data"], want)
    scen = gen.scenario_frame()
    scen = scen[scen["model"] == gen.XLSX_MODEL].reset_index(drop=True)
    got = sheets["scenarios"]
    assert list(got.columns) == list(gen.SCENARIO_COLUMNS)
    assert got["scenario"].tolist() == scen["scenario"].tolist()
    assert got["reference"].fillna("").tolist() == scen["reference"].fillna("").tolist()
    assert got["family"].tolist() == scen["family"].tolist()


# --- completeness and consistency of the clean ensemble -------------------------------------------------------


def test_every_variable_for_every_scenario_region_year(frame: pd.DataFrame, con: Contract) -> None:
    assert not frame.duplicated(["model", "scenario", "region", "variable", "year"]).any()
    assert set(frame["variable"]) == set(con.variables)
    assert set(frame["region"]) == set(gen.ALL_REGIONS) == set(con.regions)
    assert sorted(frame["year"].unique()) == list(range(2020, 2101, 5))
    per_run = frame.groupby(["model", "scenario"]).size()
    assert len(per_run) == len(gen.MODELS) * len(gen.PROTOCOL)
    assert (per_run == len(con.variables) * 6 * 17).all()
    units = frame["variable"].map({n: v.unit for n, v in con.variables.items()})
    assert (frame["unit"] == units).all()
    assert frame["value"].notna().all()


def test_parts_add_up(frame: pd.DataFrame, con: Contract) -> None:
    gaps = parts_gaps(frame, con)
    totals = {v.name for v in con.variables.values() if v.parts}
    assert set(gaps["total"]) == totals
    assert len(gaps) == len(totals) * len(gen.MODELS) * len(gen.PROTOCOL) * 6 * 17
    assert failing(gaps, con).empty
    # Stricter than the contract: even near-zero totals (net CO2 around its zero crossing) add up.
    assert gaps["gap"].max() <= con.tolerance.sum_absolute


def test_world_is_sum_of_regions(frame: pd.DataFrame, con: Contract) -> None:
    gaps = region_gaps(frame, con)
    assert gaps["gap"].max() <= con.tolerance.sum_absolute
    permits = frame[frame["variable"] == "trade.permits"]
    assert (permits.loc[permits["region"] == gen.WORLD, "value"] == 0).all()
    assert (permits["value"] != 0).any()
    price = frame[frame["variable"] == "price.carbon"]
    spread = price.groupby(["model", "scenario", "year"])["value"].agg(["min", "max"])
    assert (spread["max"] - spread["min"]).max() == 0


def test_ghg_is_ar6_gwp100_weighting(frame: pd.DataFrame) -> None:
    # IPCC AR6 WGI Ch. 7 Table 7.SM.7 GWP100: CH4 27.9, N2O 273 (tests/published.py).
    ch4, n2o = GWP100["AR6GWP100"]["CH4"], GWP100["AR6GWP100"]["N2O"]
    wide = frame.pivot_table(index=KEYS, columns="variable", values="value")
    # N2O is reported in kt, the total in Mt CO2e: divide by 1000. F-gases are reported in Mt CO2e already.
    expected = (
        wide["emissions.co2"]
        + ch4 * wide["emissions.ch4"]
        + n2o / 1000.0 * wide["emissions.n2o"]
        + wide["emissions.fgases"]
    )
    assert (wide["emissions.ghg"] - expected).abs().max() <= 1e-3


def test_signs(frame: pd.DataFrame, con: Contract) -> None:
    nonneg = [n for n, v in con.variables.items() if v.sign == "non-negative"]
    assert (frame.loc[frame["variable"].isin(nonneg), "value"] >= 0).all()
    land = frame[frame["variable"] == "emissions.co2.land"]
    assert (land["value"] < 0).any()
    co2 = world(frame, "emissions.co2")
    assert (co2.xs("act-max", level="scenario")[2100] < 0).all()
    assert (co2.xs(gen.REFERENCE_NAME, level="scenario") > 0).all().all()


def test_bounds_hold(frame: pd.DataFrame, con: Contract) -> None:
    assert con.bounds, "bounds.csv should give a few plausibility bounds"
    for b in con.bounds:
        sel = frame["variable"] == b.variable
        if b.region is not None:
            sel &= frame["region"] == b.region
        if b.year_from is not None:
            sel &= frame["year"] >= b.year_from
        if b.year_to is not None:
            sel &= frame["year"] <= b.year_to
        values = frame.loc[sel, "value"]
        assert len(values) > 0, b
        assert b.low is None or values.min() >= b.low, b
        assert b.high is None or values.max() <= b.high, b


# --- base year and reference data -----------------------------------------------------------------------------


def test_contract_tables_match_generator() -> None:
    ref = pd.read_csv(gen.CONTRACT_DIR / "reference.csv")
    pd.testing.assert_frame_equal(ref, gen.reference_frame(), check_dtype=False)
    bnd = pd.read_csv(gen.CONTRACT_DIR / "bounds.csv")
    pd.testing.assert_frame_equal(bnd, gen.bounds_frame(), check_dtype=False)


def _base_deviation(df: pd.DataFrame, con: Contract) -> pd.DataFrame:
    ref = pd.DataFrame([vars(r) for r in con.reference])
    assert set(ref["year"]) == {con.base_year}
    out = df.merge(ref, on=["region", "variable", "unit", "year"], suffixes=("", "_ref"))
    out["deviation"] = (out["value"] / out["value_ref"] - 1.0).abs()
    return out


def test_base_year_within_reference(frame: pd.DataFrame, con: Contract) -> None:
    dev = _base_deviation(frame, con)
    assert set(dev["variable"]) == set(gen.REFERENCE_VARIABLES)
    assert set(dev["region"]) == set(gen.ALL_REGIONS)
    assert dev["deviation"].max() <= con.tolerance.base_year_relative


def test_base_year_is_of_realistic_magnitude(frame: pd.DataFrame, con: Contract) -> None:
    base = frame[(frame["region"] == gen.WORLD) & (frame["year"] == 2020)]
    v = base.groupby("variable")["value"].agg(["min", "max"])
    factor = gen.ghg_factors(con)
    ch4, n2o = factor["emissions.ch4"], factor["emissions.n2o"]

    # 2019 emissions by gas, AR6 WGIII Ch. 2 Sect. 2.2.2.1 Table 2.1 (Gt CO2e, AR6 GWP100): CO2-FFI 38 +- 3,
    # CO2-LULUCF 6.6 +- 4.6, CH4 11 +- 3.2, N2O 2.7 +- 1.6, F-gases 1.4 +- 0.41. A 2019 range is a magnitude check
    # for 2020 values.
    def within(var: str, low: float, high: float, factor: float = 1.0) -> bool:
        return low <= factor * v.loc[var, "min"] and factor * v.loc[var, "max"] <= high

    assert within("emissions.co2.fossil", 35_000, 41_000)
    assert within("emissions.co2.land", 2_000, 11_200)
    assert within("emissions.ch4", 7_800, 14_200, ch4)
    assert within("emissions.n2o", 1_100, 4_300, n2o)
    assert within("emissions.fgases", 990, 1_810)
    # World population 2020 about 7.8 billion (UN World Population Prospects; from memory), +-5 %.
    assert within("population", 7_400, 8_200)


# --- scenario design ------------------------------------------------------------------------------------------


def cagr(v0: float, v1: float, years: int) -> float:
    """Compound annual growth rate via numpy_financial.rate (fv = pv * (1 + r)^n with no payments)."""
    npf = pytest.importorskip("numpy_financial")
    return float(npf.rate(years, 0.0, -v0, v1))


def test_cagr_helper_matches_definition() -> None:
    # US BEA definition: (V_end / V_start)^(1/n) - 1.  100 -> 121 over 2 years is exactly 10 %/yr.
    assert cagr(100.0, 121.0, 2) == pytest.approx(0.10, abs=1e-9)
    assert cagr(50_000.0, 25_000.0, 20) == pytest.approx(0.5 ** (1 / 20) - 1, abs=1e-9)


def test_delayed_follow_reference_until_2030(frame: pd.DataFrame) -> None:
    early = frame[frame["year"] <= 2030].set_index(["model", "region", "variable", "year", "scenario"])["value"]
    ref = early.xs(gen.REFERENCE_NAME, level="scenario")
    for name, family, *_ in gen.PROTOCOL:
        if family == "delayed":
            pd.testing.assert_series_equal(early.xs(name, level="scenario"), ref)
    late = frame[(frame["year"] == 2035) & (frame["variable"] == "emissions.co2") & (frame["region"] == gen.WORLD)]
    late = late.set_index(["model", "scenario"])["value"]
    for model in gen.MODELS:
        assert late[(model, "wait-firm")] < late[(model, gen.REFERENCE_NAME)]


def npv_2020_2100(five_yearly: pd.DataFrame, rate: float = 0.05) -> pd.Series:
    """NPV at 2020 of each row's annual flows 2020..2100 (linear between the five-yearly points).

    Reference: numpy_financial.npv, which does not discount its first value, so 2020 is the base year; linear
    interpolation by numpy.interp. 5 %/yr is the contract default discount rate (AR4 WGIII Fig. 3.25 note).
    """
    npf = pytest.importorskip("numpy_financial")
    years = np.arange(2020, 2101)
    points = five_yearly.columns.to_numpy(dtype=float)
    values = [npf.npv(rate, np.interp(years, points, row)) for row in five_yearly.to_numpy()]
    return pd.Series(values, index=five_yearly.index)


@pytest.fixture(scope="module")
def story(frame: pd.DataFrame) -> pd.DataFrame:
    """Per (model, scenario): World GHG in 2030/2050/2100, CAGR 2030-2050, NPV of abatement cost 2020-2100, GDP and
    consumption loss in 2050 against the model's own no-policy run, peak carbon price; computed here with numpy."""
    ghg, cost, price = world(frame, "emissions.ghg"), world(frame, "cost.abatement"), world(frame, "price.carbon")
    out = pd.DataFrame({"ghg2030": ghg[2030], "ghg2050": ghg[2050], "ghg2100": ghg[2100]})
    out["cagr"] = [cagr(v0, v1, 20) for v0, v1 in zip(ghg[2030], ghg[2050], strict=True)]
    out["npv"] = npv_2020_2100(cost)
    for var, col in (("gdp.mer", "gdp_loss"), ("consumption", "cons_loss")):
        w = world(frame, var)[2050]
        ref = w.xs(gen.REFERENCE_NAME, level="scenario")
        out[col] = 1.0 - w / ref.reindex(w.index.get_level_values("model")).to_numpy()
    out["price_max"] = price.max(axis=1)
    out["co2_to_net_zero"] = co2_to_net_zero(world(frame, "emissions.co2"))
    return out


def co2_to_net_zero(five_yearly: pd.DataFrame) -> pd.Series:
    """Gt CO2 summed over the whole years 2020..net-zero year (first annual value <= 0), both included, or to 2100;
    the annual values by numpy.interp between the five-yearly points."""
    years = np.arange(2020, 2101)
    points = five_yearly.columns.to_numpy(dtype=float)
    out = []
    for row in five_yearly.to_numpy():
        annual = np.interp(years, points, row)
        below = np.flatnonzero(annual <= 0)
        end = below[0] if len(below) else len(years) - 1
        out.append(annual[: end + 1].sum() / 1000.0)
    return pd.Series(out, index=five_yearly.index)


# IPCC AR6 WG1 SPM Table SPM.2, budgets from 2020 at 67 % (Gt CO2): 1.5 °C 400, 1.7 °C 700, 2.0 °C 1150.
BUDGETS_67 = {1.5: 400.0, 1.7: 700.0, 2.0: 1150.0}


def budget_class(gt: float) -> float | None:
    """The lowest warming level whose 67 % budget holds `gt` (None: above every budget)."""
    return next((level for level, budget in BUDGETS_67.items() if gt <= budget), None)


def pairs() -> list[tuple[str, str]]:
    """(delayed, immediate sibling) scenario names of the protocol: same ambition."""
    immediate = {amb: name for name, fam, amb, *_ in gen.PROTOCOL if fam == "immediate"}
    return [(name, immediate[amb]) for name, fam, amb, *_ in gen.PROTOCOL if fam == "delayed"]


def test_protocol_pairs_every_delayed_scenario_with_an_immediate_one() -> None:
    assert [d for d, _ in pairs()] == ["wait-firm", "wait-bold", "wait-deep"]
    assert all(d.removeprefix("wait-") == i.removeprefix("act-") for d, i in pairs())


def test_delayed_reach_the_outcome_of_their_immediate_sibling(story: pd.DataFrame) -> None:
    """The same cumulative CO2 to net zero (so the same budget class) and the same GHG level in 2100."""
    base = story["ghg2030"].xs(gen.REFERENCE_NAME, level="scenario").mean()
    for model in gen.MODELS:
        for delayed, immediate in pairs():
            d, i = story.loc[(model, delayed)], story.loc[(model, immediate)]
            where = (model, delayed, d["co2_to_net_zero"], i["co2_to_net_zero"])
            assert d["co2_to_net_zero"] == pytest.approx(i["co2_to_net_zero"], rel=0.005), where
            assert budget_class(d["co2_to_net_zero"]) == budget_class(i["co2_to_net_zero"]), where
            assert abs(d["ghg2100"] - i["ghg2100"]) <= 0.01 * base, (model, delayed, d["ghg2100"], i["ghg2100"])
            # same budget, later start: lower emissions in 2050 than the sibling that acted early
            assert d["ghg2050"] < i["ghg2050"], where


def test_the_ensemble_spans_the_budget_classes(story: pd.DataFrame) -> None:
    policy = story.drop(gen.REFERENCE_NAME, level="scenario")
    classes = policy["co2_to_net_zero"].map(budget_class)
    counts = classes.value_counts(dropna=False)
    assert counts.get(1.7, 0) >= 6 and counts.get(2.0, 0) >= 10 and classes.isna().sum() >= 6, counts
    # every model has scenarios in the 2 °C (67 %) class, immediate and delayed
    two = policy[classes == 2.0].reset_index()
    assert set(two["model"]) == set(gen.MODELS)
    assert set(two["scenario"].str.split("-").str[0]) == {"act", "wait"}


def test_gdp_losses_in_2050_are_shaped_like_the_assessed_ranges(story: pd.DataFrame) -> None:
    # AR6 WGIII SPM C.12.2 (from memory): global GDP in 2050 1.3-2.7 % below the reference for pathways likely
    # below 2 °C, 2.6-4.2 % for 1.5 °C with no or limited overshoot. The demo's numbers are invented; only their
    # medians per class are held to those ranges (with half a point of slack), and the order of the two.
    policy = story.drop(gen.REFERENCE_NAME, level="scenario")
    two = policy[policy["co2_to_net_zero"].map(budget_class) == 2.0]["gdp_loss"] * 100
    low = policy[policy["co2_to_net_zero"] <= 500.0]["gdp_loss"] * 100  # within 1.5 °C at 50 % (Table SPM.2)
    assert len(low) >= 2
    assert 1.3 - 0.5 <= two.median() <= 2.7 and 2.6 - 0.5 <= low.median() <= 4.2 + 0.5
    assert low.median() > two.median()


def test_costs_rise_with_stringency_and_through_the_century(frame: pd.DataFrame, story: pd.DataFrame) -> None:
    gdp = world(frame, "gdp.mer")
    for model in gen.MODELS:
        ref = gdp.loc[(model, gen.REFERENCE_NAME)]
        for name, family, *_ in gen.PROTOCOL:
            if family == "reference":
                continue
            loss = 1.0 - gdp.loc[(model, name)] / ref
            assert loss[2050] < loss[2100], (model, name)  # losses keep rising after 2050
            if family == "immediate":
                assert 0 < loss[2030] < loss[2050], (model, name)
    order = [name for name, fam, *_ in gen.PROTOCOL if fam == "immediate"]
    for model in gen.MODELS:
        assert story.loc[model].loc[order, "npv"].is_monotonic_increasing, model


def test_delay_means_faster_cuts_higher_prices_and_higher_costs(story: pd.DataFrame, frame: pd.DataFrame) -> None:
    price = world(frame, "price.carbon")
    for model in gen.MODELS:
        for delayed, immediate in pairs():
            d, i = story.loc[(model, delayed)], story.loc[(model, immediate)]
            where = (model, delayed)
            assert d["ghg2030"] > i["ghg2030"], where
            assert d["cagr"] < i["cagr"] - 0.005, where  # at least half a point per year faster
            assert d["npv"] > 1.02 * i["npv"], where
            assert d["gdp_loss"] > i["gdp_loss"] and d["cons_loss"] > i["cons_loss"], where
            # the catch-up needs a higher carbon price (from 2035, the first delayed policy year)
            dp, ip = price.loc[(model, delayed), 2035:], price.loc[(model, immediate), 2035:]
            assert (dp >= ip).all() and (dp.loc[:2050] > ip.loc[:2050]).all(), where
    delayed = story.xs("wait-deep", level="scenario")
    # realistic magnitudes even for the deepest delayed goal: a few % of GDP in 2050, a few thousand USD/t
    assert (delayed["gdp_loss"] < 0.05).all() and (delayed["price_max"] < 3000).all()


def test_within_one_budget_class_higher_2030_emissions_cut_faster_and_cost_more(story: pd.DataFrame) -> None:
    """Policy scenarios within the 2 °C budget at 67 %, in terciles of World GHG in 2030: the high band cuts faster
    after 2030 and costs more. Holding the outcome fixed is what makes the comparison like with like."""
    policy = story.drop(gen.REFERENCE_NAME, level="scenario")
    same = policy[policy["co2_to_net_zero"].map(budget_class) == 2.0]
    values = same["ghg2030"].to_numpy()
    edges = np.quantile(values, [1 / 3, 2 / 3])  # numpy's default 'linear' method
    band = (values[:, None] >= edges[None, :]).sum(axis=1)
    high, low = same[band == 2], same[band == 0]
    assert len(high) >= 4 and len(low) >= 4
    assert high["cagr"].median() < low["cagr"].median() - 0.01
    assert high["npv"].median() > 1.2 * low["npv"].median()
    assert high["gdp_loss"].median() > low["gdp_loss"].median()


def test_wide_spread_in_2030(frame: pd.DataFrame) -> None:
    ghg = world(frame, "emissions.ghg")
    base = ghg[2020].mean()
    assert ghg[2030].min() < 0.7 * base and ghg[2030].max() > 1.1 * base


def test_prices_costs_and_gdp(frame: pd.DataFrame) -> None:
    price, cost = world(frame, "price.carbon"), world(frame, "cost.abatement")
    ref = gen.REFERENCE_NAME
    assert (price.xs(ref, level="scenario") == 0).all().all()
    assert (cost.xs(ref, level="scenario") == 0).all().all()
    assert price.max().max() > 1000
    starts = {name: (2025 if fam == "immediate" else 2035) for name, fam, *_ in gen.PROTOCOL if fam != "reference"}
    allcost = frame[frame["variable"] == "cost.abatement"]
    for name, start in starts.items():
        sel = (allcost["scenario"] == name) & (allcost["year"] >= start)
        assert (allcost.loc[sel, "value"] > 0).all(), name
    order = [name for name, fam, *_ in gen.PROTOCOL if fam == "immediate"]
    for var in ("gdp.mer", "consumption"):
        w = world(frame, var)
        for model in gen.MODELS:
            loss = 1.0 - w.loc[model, 2050] / w.loc[(model, ref), 2050]
            assert (loss.drop(ref) > 0).all() and (loss.drop(ref) < 0.05).all()
            assert loss[order].is_monotonic_increasing, (var, model)
    scen = gen.scenario_frame()
    refs = scen.set_index(["model", "scenario"])["reference"]
    assert refs.xs(ref, level="scenario").isna().all()
    assert (refs.drop(ref, level="scenario") == ref).all()


# --- the flawed submission and the revision -------------------------------------------------------------------


def test_flawed_submission_has_exactly_the_planted_flaws(demo: gen.DemoFiles, con: Contract) -> None:
    data = pd.read_csv(demo.flawed[0])
    assert set(data["model"]) == {gen.FLAWED_MODEL}
    unknown = set(data["variable"]) - set(con.variables)
    assert unknown == {"consumtion"}
    units = data["variable"].map({n: v.unit for n, v in con.variables.items()})
    wrong = data[units.notna() & (data["unit"] != units)]
    assert set(zip(wrong["variable"], wrong["unit"], wrong["region"], strict=True)) == {
        ("emissions.ch4", "EJ/yr", "Estrel")
    }
    negative = data[(data["variable"] == "emissions.ch4") & (data["value"] < 0)]
    assert len(negative) == 1 and negative["region"].iloc[0] == "Dovania"
    parts = failing(parts_gaps(data, con), con)
    assert set(zip(parts["region"], parts["total"], parts["year"], strict=True)) == {
        ("Belmora", "emissions.co2.fossil", 2050),
        (gen.WORLD, "emissions.co2.fossil", 2050),
    }
    regions = failing(region_gaps(data, con), con)
    assert set(zip(regions["variable"], regions["year"], strict=True)) == {("population", 2050)}
    dev = _base_deviation(data, con)
    off = dev[dev["deviation"] > con.tolerance.base_year_relative]
    assert set(zip(off["region"], off["variable"], strict=True)) == {("Cendral", "population")}


def test_revision_changes_two_scenarios(demo: gen.DemoFiles, frame: pd.DataFrame, con: Contract) -> None:
    new = pd.read_csv(demo.revision[0])
    assert set(new["model"]) == {gen.REVISED_MODEL}
    assert set(new["scenario"]) == set(gen.REVISED_SCENARIOS)
    old = frame[(frame["model"] == gen.REVISED_MODEL) & frame["scenario"].isin(gen.REVISED_SCENARIOS)]
    both = old.merge(new, on=["model", "scenario", "region", "variable", "unit", "year"], suffixes=("_v1", "_v2"))
    assert len(both) == len(old) == len(new)
    changed = both["value_v1"] != both["value_v2"]
    assert not changed[both["year"] == 2020].any()
    assert changed[both["variable"] == "emissions.co2"].sum() > 20
    assert failing(parts_gaps(new, con), con).empty and failing(region_gaps(new, con), con).empty
    scen = pd.read_csv(demo.revision[1])
    assert set(scen["scenario"]) == set(gen.REVISED_SCENARIOS)


# --- benchmark inputs -----------------------------------------------------------------------------------------


def test_synthetic_file_is_valid_and_seeded(tmp_path: Path, con: Contract) -> None:
    a = gen.write_synthetic(tmp_path / "a.csv", rows=10_000, seed=3)
    b = gen.write_synthetic(tmp_path / "b.csv", rows=10_000, seed=3)
    c = gen.write_synthetic(tmp_path / "c.csv", rows=10_000, seed=4)
    assert a.read_bytes() == b.read_bytes() != c.read_bytes()
    df = pd.read_csv(a)
    assert list(df.columns) == list(gen.COLUMNS) and len(df) == 10_000
    assert not df.duplicated(["model", "scenario", "region", "variable", "year"]).any()
    assert set(df["variable"]) == set(con.variables)
    assert set(df["region"]) <= set(con.regions)
    assert (df["unit"] == df["variable"].map({n: v.unit for n, v in con.variables.items()})).all()
    assert df["year"].between(con.first_year, con.last_year).all() and (df["value"] >= 0).all()


@pytest.mark.slow
def test_synthetic_two_million_rows(tmp_path: Path) -> None:
    path = gen.write_synthetic(tmp_path / "big.csv", rows=2_000_000)  # its speed belongs to `make bench`
    with path.open() as f:
        assert sum(1 for _ in f) == 2_000_001


@pytest.mark.parametrize("fmt", ["csv", "parquet"])
def test_many_scenarios_are_consistent(tmp_path: Path, con: Contract, fmt: str) -> None:
    paths = gen.write_many_scenarios(tmp_path, n_scenarios=40, fmt=fmt)
    data_paths = [p for p in paths if not p.name.endswith("-scenarios.csv")]
    assert len(data_paths) == len(gen.MODELS) and all(p.suffix == f".{fmt}" for p in data_paths)
    read = pd.read_csv if fmt == "csv" else pd.read_parquet
    df = pd.concat([read(p) for p in data_paths], ignore_index=True)
    scen = pd.concat([pd.read_csv(p) for p in paths if p.name.endswith("-scenarios.csv")], ignore_index=True)
    assert len(scen) == 40 and df.groupby(["model", "scenario"]).ngroups == 40
    assert set(scen["family"]) == {"reference", "immediate", "delayed"}
    assert (df.groupby(["model", "scenario"]).size() == len(con.variables) * 6 * 17).all()
    assert failing(parts_gaps(df, con), con).empty
    assert region_gaps(df, con)["gap"].max() <= con.tolerance.sum_absolute


def test_within_one_budget_class_the_high_2030_band_leans_on_carbon_intensity_later(
    story: pd.DataFrame, frame: pd.DataFrame
) -> None:
    """The Drivers page's story, with the LMDI-I effects (Ang 2005) computed here with numpy: within the 2 °C budget
    at 67 %, the high-2030 band cuts carbon intensity (CO2 per primary energy) much less than the low band by 2030
    and as much or more by 2050, as a share of the two intensity effects."""
    policy = story.drop(gen.REFERENCE_NAME, level="scenario")
    same = policy[policy["co2_to_net_zero"].map(budget_class) == 2.0]
    values = same["ghg2030"].to_numpy()
    band = (values[:, None] >= np.quantile(values, [1 / 3, 2 / 3])[None, :]).sum(axis=1)
    gdp, energy, co2 = (
        world(frame, v).reindex(same.index) for v in ("gdp.ppp", "energy.primary", "emissions.co2.fossil")
    )

    def carbon_share(year: int) -> pd.Series:
        c0, c1 = co2[2020], co2[year]
        weight = (c1 - c0) / (np.log(c1) - np.log(c0))
        e_effect = weight * np.log((energy[year] / gdp[year]) / (energy[2020] / gdp[2020]))
        c_effect = weight * np.log((c1 / energy[year]) / (c0 / energy[2020]))
        return c_effect / (c_effect + e_effect) * 100

    for year, check in ((2030, lambda hi, lo: hi < lo - 20), (2050, lambda hi, lo: hi > lo)):
        share = carbon_share(year).to_numpy()
        high, low = np.median(share[band == 2]), np.median(share[band == 0])
        assert check(high, low), (year, high, low)
