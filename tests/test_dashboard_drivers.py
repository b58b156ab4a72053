"""The Drivers and Regions pages in AppTest on the demo database: numbers against SQL and numpy, cautions, filters."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from milepost.dashboard.ui import fmt

from dashboard_fixtures import milestone_values, numpy_bands, open_app

CLASS_2C = {"outcome": "class", "class": "2", "lik": "67%"}
PAGES = ("views/drivers.py", "views/regions.py")


def banded(sql, keys: set[tuple[str, str]] | None = None) -> pd.DataFrame:
    """The default selection (World emissions.ghg in 2030, no references) with numpy tercile bands."""
    sel = milestone_values(sql, "emissions.ghg", 2030)
    if keys is not None:
        sel = sel[[(m, s) in keys for m, s in zip(sel["model"], sel["scenario"], strict=True)]]
    sel = sel.reset_index(drop=True)
    _, band = numpy_bands(sel["value"].to_numpy())
    return sel.assign(band=band)


def in_2c_class(sql) -> set[tuple[str, str]]:
    rows = sql.execute(
        "SELECT model, scenario FROM current_indicators WHERE kind = 'budget_level' AND variable = '67%' AND value = 2"
    ).fetchall()
    return {(m, s) for m, s in rows}


@pytest.mark.parametrize("page", PAGES)
def test_pages_carry_cautions_and_downloads(demo_db, page):
    at = open_app(demo_db, page)
    captions = " ".join(c.value for c in at.caption)
    assert "not forecasts" in captions and "avoided climate damages and co-benefits" in captions
    if page.endswith("regions.py"):
        assert "illustrations of equity principles, not negotiated shares" in captions
    else:
        assert "Mt CO2" in captions and "LMDI" in captions
    labels = [b.label for b in at.get("download_button")]
    n_charts = len(at.get("vega_lite_chart"))
    assert n_charts >= 1 and labels.count("PNG") == labels.count("SVG") == n_charts
    assert labels.count("CSV") == len(at.dataframe)


def test_drivers_headline_is_the_band_median_of_the_effects_within_the_outcome(demo_db, sql):
    at = open_app(demo_db, "views/drivers.py", params=CLASS_2C)
    at.selectbox(key="drivers_year").set_value(2050).run()
    sel = banded(sql, in_2c_class(sql))
    effects = sql.execute(
        "SELECT model, scenario, kind, value AS effect FROM current_indicators WHERE region = 'World'"
        " AND year_from = 2020 AND year_to = 2050 AND kind IN ('lmdi_energy_intensity', 'lmdi_carbon_intensity')"
    ).df()
    rows = sel.merge(effects, on=["model", "scenario"])
    text = at.info[0].value
    for band, name in ((2, "high"), (0, "low")):
        for kind in ("lmdi_energy_intensity", "lmdi_carbon_intensity"):
            median = float(np.median(rows[(rows.band == band) & (rows.kind == kind)]["effect"]))
            assert fmt(median, 0) in text, (name, kind, text)
        # both bands rest on three models or more here, so both are stated, each with its evidence
        mine = rows[rows.band == band].drop_duplicates(["model", "scenario"])
        assert mine["model"].nunique() >= 3
        assert f"in the {name} band ({len(mine)} scenarios, {mine['model'].nunique()} models)" in text
    assert "thin evidence" not in text
    assert "within" in text  # the outcome is named
    # the band waterfalls: one chart per band
    assert len(at.get("vega_lite_chart")) == 3 + 1


def test_drivers_one_scenario_waterfall_and_delay_pairs(demo_db, sql):
    at = open_app(demo_db, "views/drivers.py")
    at.selectbox(key="drivers_year").set_value(2050).run()
    at.selectbox(key="drivers_mode").set_value("one scenario").run()
    at.selectbox(key="drivers_scenario").set_value("Ferrow / act-firm").run()
    assert not at.exception, [e.message for e in at.exception]
    assert at.selectbox(key="drivers_scenario").value == "Ferrow / act-firm"
    assert len(at.get("vega_lite_chart")) == 2  # one waterfall, the band comparison
    pairs = next(d.value for d in at.dataframe if "scenario_later" in d.value.columns)
    assert set(pairs["year"]) == {2050} and len(pairs) > 0
    mine = pairs[(pairs.model == "Ferrow") & (pairs.scenario_later == "wait-firm")]
    row = mine[mine.effect == "carbon intensity (CO2/energy)"].iloc[0]
    got = sql.execute(
        "SELECT scenario, value FROM current_indicators WHERE model = 'Ferrow' AND region = 'World'"
        " AND kind = 'lmdi_carbon_intensity' AND year_to = 2050 AND scenario IN (?, ?)",
        [row.scenario_first, "wait-firm"],
    ).fetchall()
    values = dict(got)
    assert row["first"] == pytest.approx(values[row.scenario_first])
    assert row["later"] == pytest.approx(values["wait-firm"])


def test_regions_money_moved_and_who_pays_match_sql(demo_db, sql):
    at = open_app(demo_db, "views/regions.py")
    assert at.selectbox(key="regions_year").value == 2050  # the default milestone
    sel = banded(sql)
    market = sql.execute(
        "SELECT model, scenario, variable AS rule, value AS money FROM current_indicators"
        " WHERE kind = 'market_value' AND year_to = 2050"
    ).df()
    market = sel.merge(market, on=["model", "scenario"])
    text = at.info[0].value
    for rule in ("grandfathering", "per_capita", "convergence"):
        assert fmt(float(np.median(market[market.rule == rule]["money"])), 0) in text
    shown = next(d.value for d in at.dataframe if "scenarios paying" in d.value.columns)
    transfers = sql.execute(
        "SELECT model, scenario, region, value AS transfer FROM current_indicators WHERE kind = 'transfer'"
        " AND variable = 'per_capita' AND year_to = 2050"
    ).df()
    transfers = sel.merge(transfers, on=["model", "scenario"])
    high = transfers[(transfers.band == 2) & (transfers.region == "Dovania")]["transfer"]
    row = shown[(shown.rule == "equal per capita") & (shown.region == "Dovania") & (shown.band == "high")].iloc[0]
    assert row.filter(like="median transfer").iloc[0] == pytest.approx(float(np.median(high)))
    assert row["scenarios paying"] + row["scenarios receiving"] == len(high)
    # transfers of each scenario sum to zero over the regions (here: as the page's rows read them)
    sums = transfers.groupby(["model", "scenario"])["transfer"].sum()
    assert sums.abs().max() < 1e-6
    # regional cost shares: the page's median against the stored rows, and each scenario's shares sum to 1
    shares = sql.execute(
        "SELECT model, scenario, region, value AS share FROM current_indicators WHERE kind = 'cost_share'"
        " AND variable = 'cost.abatement' AND year_to = 2050"
    ).df()
    shares = sel.merge(shares, on=["model", "scenario"])
    assert shares.groupby(["model", "scenario"])["share"].sum().to_numpy() == pytest.approx(1.0, abs=1e-6)
    share_rows = next(d.value for d in at.dataframe if "share of" in d.value.columns)
    share_row = share_rows[
        (share_rows["share of"] == "abatement cost") & (share_rows.region == "Dovania") & (share_rows.band == "high")
    ]
    mine = shares[(shares.band == 2) & (shares.region == "Dovania")]["share"]
    assert share_row["median share [%]"].iloc[0] == pytest.approx(100 * float(np.median(mine)))
