"""Like with like on the Drivers and Regions pages: every band or pair median says how many scenarios and models
stand behind it, counted here independently from the stored rows (SQL and pandas), and a median on fewer than
three models is flagged as thin evidence, never dropped. The demo's lowest 2030 band in 2100 is such a group: only
one model's scenarios there still have a logarithmic decomposition (the others' fossil CO2 turns negative)."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from milepost.dashboard.ui import fmt

from dashboard_fixtures import milestone_values, numpy_bands, open_app

LABELS = ["low", "middle", "high"]
THIN = "thin evidence"


def frame(at, must_have: str) -> pd.DataFrame:
    for d in at.dataframe:
        if any(must_have == str(c) for c in d.value.columns):
            return d.value
    raise AssertionError(f"no table with a column {must_have!r}: {[list(d.value.columns) for d in at.dataframe]}")


def bands(sql) -> pd.DataFrame:
    """The default selection (World emissions.ghg in 2030, no references) in numpy terciles."""
    sel = milestone_values(sql, "emissions.ghg", 2030)
    _, band = numpy_bands(sel["value"].to_numpy())
    return sel[["model", "scenario"]].assign(band=np.array(LABELS)[band])


@pytest.fixture(scope="module")
def drivers(demo_db):
    return open_app(demo_db, "views/drivers.py")  # default milestone: the last (2100)


def effects(sql, year: int) -> pd.DataFrame:
    return sql.execute(
        "SELECT model, scenario, kind, value FROM current_indicators WHERE region = 'World' AND year_to = ?"
        " AND kind LIKE 'lmdi_%' AND value IS NOT NULL",
        [year],
    ).df()


def test_band_medians_carry_their_scenarios_and_models_and_thin_bands_are_flagged(drivers, sql):
    at = drivers
    assert at.selectbox(key="drivers_year").value == 2100
    rows = bands(sql).merge(effects(sql, 2100), on=["model", "scenario"])
    per_band = (
        rows.drop_duplicates(["model", "scenario"])
        .groupby("band")
        .agg(n=("scenario", "size"), models=("model", "nunique"))
    )
    assert (per_band["models"] < 3).any() and (per_band["models"] >= 3).any()  # the demo has both kinds

    # the waterfall titles and tooltips
    specs = [json.loads(c.proto.spec) for c in at.get("vega_lite_chart")]
    titles = [s["title"] for s in specs if isinstance(s.get("title"), str) and "band" in s["title"]]
    for band, r in per_band.iterrows():
        title = next(t for t in titles if t.startswith(f"{band} band"))
        assert f"median of {r.n} scenario" in title and f", {r.models} model" in title
        assert (THIN in title) == (r.models < 3)
    waterfall = next(c for c in at.get("vega_lite_chart") if "low band" in json.loads(c.proto.spec).get("title", ""))
    spec = json.loads(waterfall.proto.spec)
    assert [t["field"] for t in spec["encoding"]["tooltip"]][-3:] == ["n", "models", "evidence"]
    data = pa.ipc.open_stream(waterfall.proto.datasets[0].data.data).read_all().to_pandas()
    assert set(data["models"]) == {per_band.at["low", "models"]} and set(data["evidence"]) == {THIN}

    # the lever table: every (lever, band) in 2100 against pandas counts, flagged where thin
    table = frame(at, "evidence")
    table = table[(table["year"] == 2100) & table["lever"].str.contains("intensity \\(")]
    want = rows.groupby(["kind", "band"]).agg(n=("scenario", "size"), models=("model", "nunique"))
    names = {
        "energy intensity (energy/GDP)": "lmdi_energy_intensity",
        "carbon intensity (CO2/energy)": "lmdi_carbon_intensity",
    }
    assert len(table) == 2 * len(per_band)
    for _, r in table.iterrows():
        w = want.loc[(names[r["lever"]], r["band"])]
        assert (r["scenarios"], r["models"]) == (w.n, w.models)
        assert r["evidence"] == (THIN if w.models < 3 else "")
        median = np.median(rows[(rows.kind == names[r["lever"]]) & (rows.band == r["band"])]["value"])
        assert r["median"] == pytest.approx(median)

    # the page says so above the charts
    assert any("Thin evidence" in w.value and "low band (1 model)" in w.value for w in at.warning)


def test_the_sentence_counts_its_models_and_draws_no_contrast_with_a_thin_band(drivers, sql):
    text = drivers.info[0].value
    rows = bands(sql).merge(effects(sql, 2100), on=["model", "scenario"])
    high = rows[rows.band == "high"]
    low = rows[rows.band == "low"]
    n_high, m_high = len(high.drop_duplicates(["model", "scenario"])), high["model"].nunique()
    assert m_high >= 3 and low["model"].nunique() < 3
    assert f"in the high band ({n_high} scenarios, {m_high} models) the median energy-intensity effect is" in text
    energy_high = np.median(high[high.kind == "lmdi_energy_intensity"]["value"])
    assert fmt(energy_high, 0) in text
    # the thin low band is named as thin and not set against the high band: its medians are not in the sentence
    n_low = len(low.drop_duplicates(["model", "scenario"]))
    assert f"the low band rests on {n_low} scenarios, 1 model" in text and "not compared" in text
    for kind in ("lmdi_energy_intensity", "lmdi_carbon_intensity"):
        assert fmt(np.median(low[low.kind == kind]["value"]), 0) not in text


def test_pair_medians_count_the_pairs_and_models_with_a_difference(drivers, sql):
    at = drivers
    # the pairs the page lists (pair rules: tests/test_pairs.py); which of them have both effects is read from SQL
    listed = frame(at, "scenario_later")
    listed = listed[listed["effect"] == "population"][["model", "scenario_first", "scenario_later"]]
    stored = effects(sql, 2100)
    pop = stored[stored["kind"] == "lmdi_population"][["model", "scenario", "value"]]
    both = listed.merge(pop.rename(columns={"scenario": "scenario_first", "value": "f"})).merge(
        pop.rename(columns={"scenario": "scenario_later", "value": "l"})
    )
    assert 0 < len(both) < len(listed)  # some pairs lack a decomposition in 2100 and count for nothing
    medians = frame(at, "pairs")
    row = medians[medians["effect"] == "population"].iloc[0]
    assert (row["pairs"], row["models"]) == (len(both), both["model"].nunique())
    assert row["median [Mt CO2]"] == pytest.approx(float(np.median(both["l"] - both["f"])))
    assert row["evidence"] == (THIN if both["model"].nunique() < 3 else "")
    sentence = next(m.value for m in at.markdown if m.value.startswith("Median difference"))
    assert f"over {len(both)} pairs of {both['model'].nunique()} models" in sentence


def _lever_summary(medians: dict[int, float], models: dict[int, int]) -> tuple[pd.DataFrame, pd.DataFrame]:
    kinds = ("lmdi_energy_intensity", "lmdi_carbon_intensity", "carbon_share")
    summary = pd.DataFrame(
        [{"kind": k, "band": b, "median": m} for b, m in medians.items() for k in kinds],
        columns=["kind", "band", "median"],
    )
    counts = pd.DataFrame([{"band": b, "n": 2 * m, "models": m} for b, m in models.items()])
    return summary, counts


def test_the_sentence_with_both_bands_thin_or_a_single_band() -> None:
    from milepost.dashboard import headlines

    summary, counts = _lever_summary({0: -111.0, 2: -999.0}, {0: 2, 2: 1})
    text = headlines.drivers(summary, counts, LABELS, 2, 0, 2050, "Mt CO2")
    assert "−999" not in text and "−111" not in text  # neither side of a thin contrast is stated
    assert "the high band rests on 2 scenarios, 1 model and the low band rests on 4 scenarios, 2 models" in text
    assert "not compared" in text
    # one band holds every scenario: nothing to contrast, so its medians are stated, flagged when thin
    summary, counts = _lever_summary({0: -111.0}, {0: 2})
    text = headlines.drivers(summary, counts, ["all"], 0, 0, 2050, "Mt CO2")
    assert "in the all band (4 scenarios, 2 models) the median energy-intensity effect is −111 Mt CO2" in text
    assert "thin evidence: fewer than three models" in text
    summary, counts = _lever_summary({0: -111.0}, {0: 3})
    assert "thin" not in headlines.drivers(summary, counts, ["all"], 0, 0, 2050, "Mt CO2")


# ---------------------------------------------------------------- Regions


@pytest.fixture(scope="module")
def narrow_top(demo_db):
    """Band edges that leave only the highest 2030 values (the second highest and up) in the top band: thin."""
    con = duckdb.connect(str(demo_db), read_only=True)
    try:
        values = np.sort(milestone_values(con, "emissions.ghg", 2030)["value"].to_numpy())
    finally:
        con.close()
    return [float(np.median(values)), float(values[-2])]


@pytest.fixture(scope="module")
def regions(demo_db, narrow_top):
    return open_app(demo_db, "views/regions.py", params={"edges": " ".join(repr(e) for e in narrow_top)})


def edge_bands(sql, edges: list[float]) -> pd.DataFrame:
    sel = milestone_values(sql, "emissions.ghg", 2030)
    _, band = numpy_bands(sel["value"].to_numpy(), edges)
    return sel[["model", "scenario"]].assign(band=np.array(LABELS)[band])


def stored(sql, kind: str, variable: str | None = None, year: int = 2050) -> pd.DataFrame:
    extra = " AND variable = ?" if variable else ""
    return sql.execute(
        "SELECT model, scenario, region, variable, value FROM current_indicators WHERE kind = ? AND year_to = ?"
        + extra,
        [kind, year, *([variable] if variable else [])],
    ).df()


def test_regions_cost_and_share_tables_count_models_and_flag_the_thin_band(regions, sql, narrow_top):
    at = regions
    sel = edge_bands(sql, narrow_top)
    top = sel[sel.band == "high"]
    assert 0 < len(top) < 5 and top["model"].nunique() < 3  # the thin group this test is about (ties at 2030)
    cost = stored(sql, "value", "cost.abatement").rename(columns={"value": "cost"}).drop(columns="variable")
    after = stored(sql, "cost_after_trade", "per_capita").rename(columns={"value": "after"}).drop(columns="variable")
    both = sel.merge(cost, on=["model", "scenario"]).merge(after, on=["model", "scenario", "region"])
    loss = sel.merge(stored(sql, "loss_pct", "gdp.ppp").dropna(subset=["value"]), on=["model", "scenario"])
    table = frame(at, "scenarios with a GDP loss")
    table = table[table["rule"] == "equal per capita"]
    assert len(table) == 3 * both["region"].nunique()
    for _, r in table.iterrows():
        mine = both[(both.region == r["region"]) & (both.band == r["band"])]
        lost = loss[(loss.region == r["region"]) & (loss.band == r["band"])]
        assert (r["scenarios"], r["models"]) == (len(mine), mine["model"].nunique())
        assert (r["scenarios with a GDP loss"], r["models with a GDP loss"]) == (len(lost), lost["model"].nunique())
        assert r["median abatement cost without trade [billion USD_2015/yr]"] == pytest.approx(np.median(mine["cost"]))
        assert r["median cost after trade [billion USD_2015/yr]"] == pytest.approx(np.median(mine["after"]))
        thin = mine["model"].nunique() < 3
        assert r["evidence"] == (THIN if thin else f"{THIN} (GDP loss)" if lost["model"].nunique() < 3 else "")
        assert thin == (r["band"] == "high")

    shares = sel.merge(stored(sql, "cost_share", "cost.abatement").dropna(subset=["value"]), on=["model", "scenario"])
    table = frame(at, "median share [%]")
    table = table[table["share of"] == "abatement cost"]
    for _, r in table.iterrows():
        mine = shares[(shares.region == r["region"]) & (shares.band == r["band"])]
        assert (r["scenarios"], r["models"]) == (len(mine), mine["model"].nunique())
        assert r["evidence"] == (THIN if mine["model"].nunique() < 3 else "")
    assert set(table.loc[table["evidence"] == THIN, "band"]) == {"high"}

    transfers = frame(at, "scenarios paying")
    assert set(transfers.loc[transfers["evidence"] == THIN, "band"]) == {"high"}
    assert sum("Thin evidence" in w.value for w in at.warning) >= 3  # transfers, costs, shares


def test_regions_market_size_and_money_sentence_count_models(regions, sql, narrow_top):
    at = regions
    sel = edge_bands(sql, narrow_top)
    market = frame(at, "measure")
    for kind, measure in (("market_value", "money moved"), ("market_permits", "permits traded")):
        rows = sel.merge(stored(sql, kind).dropna(subset=["value"]), on=["model", "scenario"])
        for rule, label in (("per_capita", "equal per capita"), ("grandfathering", "grandfathering")):
            mine = rows[rows.variable == rule]
            r = market[market["rule"].str.startswith(label) & market["measure"].str.startswith(measure)].iloc[0]
            assert (r["scenarios"], r["models"]) == (len(mine), mine["model"].nunique())
            assert r["median"] == pytest.approx(np.median(mine["value"]))
            if kind == "market_value":
                words = f"{fmt(float(np.median(mine['value'])), 0)} billion USD_2015/yr ({len(mine)} scenarios, "
                assert words + f"{mine['model'].nunique()} models)" in at.info[0].value


def test_regions_with_one_model_flag_every_median(demo_db):
    params = {"model": "Ferrow", "outcome": "class", "class": "2", "lik": "67%"}
    at = open_app(demo_db, "views/regions.py", params=params)
    assert at.multiselect(key="band_models").value == ["Ferrow"]
    assert "1 model, thin evidence)" in at.info[0].value
    assert at.info[0].value.endswith("Scenarios within the 2 °C budget (67 %).")  # what was held fixed
    for column in ("measure", "scenarios paying", "median share [%]"):
        assert set(frame(at, column)["evidence"]) == {THIN}
