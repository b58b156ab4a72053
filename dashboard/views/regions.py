"""Regions: regional costs, and who pays and who receives if a carbon market shared the effort by an allocation
rule, at each milestone, per band."""

from __future__ import annotations

import numpy as np
import pandas as pd
import streamlit as st

from milepost.dashboard import charts_drivers, headlines, queries, stats, ui
from milepost.dashboard import queries_drivers as qd

ALLOCATION_CAUTION = (
    "Allocation rules are illustrations of equity principles, not negotiated shares: each splits the scenario's own "
    "World emissions (the cap) among the regions, and the transfers show what a market clearing at the scenario's "
    "World carbon price would move between them."
)
TRANSFER_UNIT = "billion USD_2015/yr"
PERMIT_UNIT = "Mt CO2e"

ch, sel = ui.results_page("Regions")
ui.caution()
st.caption(f"⚠️ {ALLOCATION_CAUTION}")

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
df = ui.shared_query(qd.burden, sel)
gaps = ui.shared_query(qd.gaps, sel, (*qd.REGION_KINDS, *qd.MARKET_KINDS))
if df.empty:
    st.warning(
        "No burden-sharing indicators for these scenarios: they need World and regional emissions.ghg, regional "
        "population and the World carbon price." + (" Missing inputs are listed below." if len(gaps) else "")
    )
    if len(gaps):
        ui.table(gaps, "regions_gaps", "regions_gaps_empty")
    ui.stop()

years = sorted(df["year"].unique().tolist())
default_year = 2050 if 2050 in years else years[0]
year = ui.url_selectbox("Milestone", years, key="regions_year", param="ryear", default=default_year, cast=int)
rules = [r for r in qd.RULES if r in set(df["rule"])]
df = ui.label_bands(df, labels)
at = df[df["year"] == year]
summary = ui.label_bands(qd.who_pays(at, sel.model_weighted), labels)
summary["rule_label"] = summary["rule"].map(qd.RULES)
market = ui.shared_query(qd.market, sel)
market = market[market["year"] == year]
sizes = qd.market_sizes(market, sel.model_weighted)
money = {
    rule: (float(median), int(n), int(models))
    for rule, median, n, models in sizes.loc[
        sizes["kind"] == "market_value", ["rule", "median", "n", "models"]
    ].itertuples(index=False)
}


def _money(rule: str) -> str:
    median, n, models = money[rule]
    thin = f", {stats.THIN}" if stats.is_thin(models) else ""
    return f"{qd.RULES[rule]}: {ui.fmt(median, 0)} {TRANSFER_UNIT} ({headlines.counted(n, models)}{thin})"


medians = "model-balanced medians" if sel.model_weighted else "medians"
st.info(
    f"Money moved between regions in {year} ({medians} over the selected scenarios): "
    + "; ".join(_money(r) for r in rules if r in money)
    + "."
    + (f" Scenarios {sel.outcome_label}." if sel.outcome_label else ""),
    icon=":material/public:",
)

c1, c2, c3 = st.columns(3)
c1.metric("Scenarios", at[["model", "scenario"]].drop_duplicates().shape[0])
c2.metric("Regions", at["region"].nunique())
c3.metric("Rules", len(rules))

st.subheader(f"Who pays and who receives in {year}")
ui.chart(
    charts_drivers.transfers(summary.dropna(subset=["median"]), labels, TRANSFER_UNIT),
    f"regions_transfers_{year}",
    "regions_transfers",
)
st.caption(
    ui.bands_note(sel.variable, sel.year, sel.region, labels, edges, sel.model_weighted)
    + f". Transfer = permits sold (allowance − emissions, {PERMIT_UNIT}) × World carbon price, in "
    f"{TRANSFER_UNIT}; positive = the region receives money. Transfers of one scenario sum to zero over the regions."
)
table = summary.drop(columns=["band"]).rename(
    columns={"band_label": "band", "median": f"median transfer [{TRANSFER_UNIT}]"}
)
table["thin"] = stats.evidence(table["models"])


def _thin_warning(shown: pd.DataFrame, what: str) -> None:
    """As on Delay: a median over fewer than three models says more about those models than about the band."""
    thin = int((shown["thin"] != "").sum())
    if thin:
        st.warning(
            f"Thin evidence: {thin} of {len(shown)} {what} rest on {stats.THIN_RULE} (see models).",
            icon=":material/warning:",
        )


_thin_warning(table, "medians below")
ui.table(
    table[
        [
            "rule_label",
            "region",
            "band",
            "n",
            "models",
            f"median transfer [{TRANSFER_UNIT}]",
            "pays",
            "receives",
            "thin",
        ]
    ].rename(columns={"rule_label": "rule", "pays": "scenarios paying", "receives": "scenarios receiving"}),
    f"regions_who_pays_{year}",
    "regions_who_pays",
)

st.subheader("Market size")
measures = {"market_permits": f"permits traded [{PERMIT_UNIT}]", "market_value": f"money moved [{TRANSFER_UNIT}]"}
shown_sizes = sizes.assign(
    rule=sizes["rule"].map(qd.RULES), measure=sizes["kind"].map(measures), thin=stats.evidence(sizes["models"])
)
_thin_warning(shown_sizes, "market medians")
ui.table(
    shown_sizes[["rule", "measure", "n", "models", "median", "q25", "q75", "thin"]],
    f"regions_market_{year}",
    "regions_market",
)
st.caption(
    "Medians over the selected scenarios of each rule. Money moved needs the World carbon price, permits traded "
    "do not, so each measure counts its own scenarios and models."
)

st.subheader("Cost with and without trade, per region")
costs = ui.label_bands(qd.trade_costs(at, sel.model_weighted), labels)
costs["rule"] = costs["rule"].map(qd.RULES)
# the row's flag says what is thin: the costs, else the GDP loss beside them (an empty cell is not thin)
cost_thin = stats.thin(costs["models"]) & (costs["n"] > 0)
loss_thin = stats.thin(costs["models_loss"]) & (costs["n_loss"] > 0)
costs["thin"] = np.select([cost_thin, loss_thin], [stats.THIN, f"{stats.THIN} (GDP loss)"], "")
_thin_warning(costs, "rows of costs")
ui.table(
    costs[
        [
            "rule",
            "region",
            "band_label",
            "n",
            "models",
            "cost",
            "cost_after_trade",
            "n_loss",
            "models_loss",
            "loss_pct",
            "thin",
        ]
    ].rename(columns={"band_label": "band"}),
    f"regions_costs_{year}",
    "regions_costs",
    columns={
        "cost": f"median abatement cost without trade [{TRANSFER_UNIT}]",
        "cost_after_trade": f"median cost after trade [{TRANSFER_UNIT}]",
        "n_loss": "scenarios with a GDP loss",
        "models_loss": "models with a GDP loss",
        "loss_pct": "median GDP (PPP) loss [%]",
    },
)
st.caption(
    "Medians over the band's scenarios: cost without and after trade over the same scenarios (those with both), "
    "GDP loss over those with one. Cost after trade = abatement cost − transfer received. GDP loss against "
    "each model's own reference scenario, without trade (the models' own results)."
)

st.subheader(f"Regional cost shares in {year}")
shares = ui.label_bands(ui.shared_query(qd.cost_shares, sel), labels)
shares = shares[(shares["year"] == year) & shares["variable"].isin(list(qd.SHARE_BASES))]
if shares.empty:
    st.info("No regional cost shares: they need regional and World cost.abatement, or GDP with a reference scenario.")
else:
    share_table = ui.label_bands(qd.share_medians(shares, sel.model_weighted), labels)
    share_table["share"] = share_table["median"] * 100
    share_table["variable"] = share_table["variable"].map(qd.SHARE_BASES)
    share_table["thin"] = stats.evidence(share_table["models"])
    _thin_warning(share_table, "median shares")
    ui.table(
        share_table[["variable", "region", "band_label", "n", "models", "share", "thin"]].rename(
            columns={"variable": "share of", "band_label": "band", "share": "median share [%]"}
        ),
        f"regions_shares_{year}",
        "regions_shares",
    )
    st.caption(
        "Each region's share of the World abatement cost, and of the loss against each model's own reference "
        "summed over the regions; in one scenario the shares of the regions that make up World sum to 100 %. "
        "Medians over the band's scenarios (the medians need not sum to 100 %). Costs exclude avoided damages "
        "and co-benefits."
    )

with st.expander("Scenario by scenario"):
    ui.table(
        at.drop(columns=["band"]).rename(columns={"band_label": "band"}),
        f"regions_rows_{year}",
        "regions_rows",
    )
if len(gaps):
    with st.expander(f"Not computed: {len(gaps)} missing inputs"):
        ui.table(gaps, "regions_gaps", "regions_gaps")
