"""Delay: pair by pair within one model and goal, what a later start implies for the cuts afterwards and for costs."""

from __future__ import annotations

import streamlit as st

from milepost.dashboard import charts, contracts, headlines, queries, stats, ui
from milepost.validate.store.pairs import rule_for

ch, sel = ui.results_page("Delay")
ui.caution()

found = contracts.find(ui.shared_query(queries.contract_name))
rule = rule_for(found.contract, sel.likelihood)
later = [y for y in ch.milestones if y > sel.year]
next_year = later[0] if later else None
loss_year = 2050 if 2050 in ch.milestones else next_year
rows = ui.shared_query(queries.pair_rows, sel, rule, [sel.variable, "cost.abatement", "gdp.mer"])
pairs, npv_period = queries.delay_table(rows, sel, next_year, loss_year)
summary = queries.delay_summary(pairs)
unit = ui.shared_query(queries.variable_unit, sel.variable)
npv_words = f"NPV of abatement cost {npv_period[0]}–{npv_period[1]}" if npv_period else "NPV of abatement cost"
names = {
    "d_milestone": f"{sel.variable} in {sel.year} ({unit})",
    "d_rate": f"CAGR {sel.year}–{next_year} (pp/yr; negative = cutting faster)",
    "npv_ratio": npv_words,
    "d_loss": f"GDP (MER) loss in {loss_year} (pp)",
}
overall = summary[summary["group"] == queries.ALL_PAIRS]
st.info(headlines.delay(overall, names, sel.outcome_label), icon=":material/schedule:")
st.caption(
    f"{rule.describe()} Differences are later minus first, in {sel.region}; the ratio is later over first. "
    "Model-balanced median: each pair weighs 1/n, n = its model's pairs in the group, so every model counts once. "
    f"Figures resting on {stats.THIN_RULE} are flagged as {stats.THIN}."
)
if pairs.empty:
    st.warning("No pairs for these filters: both scenarios of a pair must pass the filters and the outcome.")
    ui.stop()

thin = summary[summary["thin"] & (summary["n"] > 0)]
if len(thin):
    groups = ", ".join(sorted(set(thin["group"])))
    st.warning(f"Thin evidence ({stats.THIN_RULE}): {groups}.", icon=":material/warning:")

c1, c2, c3 = st.columns(3)
c1.metric("Pairs", len(pairs))
c2.metric("Models", pairs["model"].nunique())
c3.metric("Groups", pairs["group"].nunique())

x_title = f"Δ {sel.variable} {sel.year} [{unit}]"
left, right = st.columns(2)
with left:
    points = pairs.dropna(subset=["d_milestone", "d_rate"])
    chart = charts.pairs(points, "d_milestone", "d_rate", x_title, "Δ CAGR [pp/yr]")
    ui.chart(chart, f"delay_rates_{sel.year}", "delay_rates")
with right:
    points = pairs.dropna(subset=["d_milestone", "npv_ratio"])
    chart = charts.pairs(points, "d_milestone", "npv_ratio", x_title, "NPV ratio")
    ui.chart(chart, f"delay_npv_{sel.year}", "delay_npv")

st.subheader("Across models, per group")
labels = {**names, "npv_ratio": f"{npv_words} (ratio later/first)", "d_npv": f"Δ {npv_words}"}
shown = summary.assign(metric=summary["metric"].map(labels)).rename(columns={"n": "pairs"})
shown["thin"] = stats.evidence(shown["models"])
ui.table(shown, f"delay_summary_{sel.year}", "delay_summary")

st.subheader("Pair by pair")
ui.table(
    pairs,
    f"delay_pairs_{sel.year}",
    "delay_pairs",
    columns={
        "scenario_first": "first",
        "scenario_later": "later",
        "milestone_first": f"{sel.year} first [{unit}]",
        "milestone_later": f"{sel.year} later [{unit}]",
        "d_milestone": f"Δ {sel.year} [{unit}]",
        "rate_first": f"CAGR {sel.year}–{next_year} first [%/yr]",
        "rate_later": f"CAGR {sel.year}–{next_year} later [%/yr]",
        "d_rate": "Δ CAGR [pp/yr]",
        "d_npv": "Δ NPV",
        "npv_ratio": "NPV ratio",
        "loss_first": f"GDP loss {loss_year} first [%]",
        "loss_later": f"GDP loss {loss_year} later [%]",
        "d_loss": f"Δ GDP loss {loss_year} [pp]",
    },
)
