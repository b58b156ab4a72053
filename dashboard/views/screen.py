"""Screen: the ensemble at a milestone, its bands, and the selected scenarios with their key indicators."""

from __future__ import annotations

import streamlit as st

from milepost.dashboard import charts, queries, tables, ui

ch, sel = ui.results_page("Screen")
ui.caution()

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
later = [y for y in ch.milestones if y > sel.year]
df = ui.label_bands(
    ui.shared_query(queries.screen_table, sel, ch.base_year, later[0] if later else None, ch.attributes), labels
)
unit = ui.shared_query(queries.variable_unit, sel.variable)

if df.empty:
    st.warning("No scenario matches these filters.")
    ui.stop()

c1, c2, c3 = st.columns(3)
c1.metric("Scenarios", len(df))
c2.metric("Models", df["model"].nunique())
# The unit goes in the metric's help and below it: a long unit would cut the number off in a narrow column.
c3.metric(f"Median {sel.year}", ui.fmt(df["value"].median(), 0), help=f"{sel.variable} in {unit}")
c3.caption(unit)

st.subheader(f"{sel.variable} in {sel.year}, {sel.region}")
ui.chart(charts.histogram(df, edges, labels, sel.variable, unit), f"screen_{sel.variable}_{sel.year}", "screen_hist")
ranges = ui.band_ranges(edges)
st.caption(
    "Band edges: "
    + ("terciles of the selected scenarios" if not sel.edges else "as set")
    + " — "
    + "; ".join(f"{lab} {rng}" for lab, rng in zip(labels, ranges, strict=True))
    + f" {unit}."
)

summary = queries.summarise(df, ["band"], model_weighted=sel.model_weighted)
summary.insert(1, "range", [ranges[b] for b in summary["band"]])
summary["band"] = [labels[b] for b in summary["band"]]
ui.table(summary, "screen_bands", "screen_bands", unit=unit)

st.subheader("Selected scenarios")
base = ch.base_year
cum_unit = df["cumulative_unit"].dropna()
df["net_zero_year"] = ui.net_zero_text(df["net_zero_year"], df["net_zero_searched_to"], df["net_zero_note"])
shown = df.drop(columns=["band", "cumulative_unit", "net_zero_searched_to", "net_zero_note"])
labels_here: dict[str, tables.Column | str] = {
    "band_label": "band",
    "value": f"{sel.year} [{unit}]",
    "base_value": f"{base} [{unit}]",
    "cagr_to": f"CAGR {base}–{sel.year} [%/yr]",
    "cagr_after": f"CAGR {sel.year}–{later[0]} [%/yr]" if later else "CAGR after [%/yr]",
    "cumulative": f"cumulative {base}–{sel.year} [{cum_unit.iloc[0] if len(cum_unit) else ''}]",
    "peak_year": f"peak year (from {base})",
}
front = ["model", "scenario", "band_label"]
ui.table(shown, f"screen_scenarios_{sel.year}", "screen_table", columns=labels_here, first=tuple(front))
st.caption(
    f"Cumulative {base}–{sel.year}: the sum of the annual values of every year from {base} to {sel.year}, both "
    "included, as carbon budgets are counted (IPCC AR6 WG1 counts remaining budgets from 1 January 2020; common "
    "practice sums annual values). "
    f"Net-zero year: the first whole year from {base} on whose annual value is at or below zero; peak year: the "
    f"year of the highest annual value from {base} on. Annual values are read from the straight lines between the "
    "reported years."
)
