"""Rates: per band, how fast the band variable falls over a period after the milestone (CAGR and linear)."""

from __future__ import annotations

import streamlit as st

from milepost.dashboard import charts, headlines, queries, ui

ch, sel = ui.results_page("Rates")

periods = ui.query(queries.rate_periods, sel.variable, sel.region)
after = [p for p in periods if p[0] >= sel.year]
if periods and not after:
    st.caption(f"No stored period starts in or after {sel.year}: every stored period is offered.")
after = after or periods
if not after:
    st.warning(f"No reduction rates of {sel.variable} in {sel.region} are stored.")
    ui.stop()
names = [f"{a}-{b}" for a, b in after]
default = next((n for n, p in zip(names, after, strict=True) if p[0] == sel.year), names[0])
period_name = ui.url_selectbox(
    "Period",
    names,
    key="rates_period",
    param="period",
    default=default,
    help="Rates are stored for base year → each milestone and between consecutive milestones.",
)
period = after[names.index(period_name)]

edges = ui.query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
df = ui.label_bands(ui.query(queries.rates, sel, *period), labels)
df["rate"] = df["kind"].map(queries.RATE_LABELS)
summary = queries.summarise(df, ["kind", "band"])
present = sorted(df["band"].unique().tolist()) or [0]

st.info(
    headlines.rates(summary, labels, present[-1], present[0], period, sel.variable, sel.region), icon=":material/speed:"
)
ui.caution()
st.caption(
    ui.bands_note(sel.variable, sel.year, sel.region, labels, edges)
    + ". CAGR = (v1/v0)^(1/(y1−y0)) − 1; linear = (v1 − v0)/(v0·(y1−y0)); negative = falling."
)

if df.empty:
    st.warning("No scenario matches these filters.")
    ui.stop()
ui.chart(
    charts.rates_box(df.dropna(subset=["value"]), labels, f"{sel.variable} {period[0]}–{period[1]}"),
    f"rates_{sel.variable}_{period[0]}_{period[1]}",
    "rates_box",
)

table = summary.assign(rate=summary["kind"].map(queries.RATE_LABELS), band=[labels[b] for b in summary["band"]])
ui.table(
    table[["rate", "band", "n", "n_missing", "median", "q25", "q75", "iqr"]],
    f"rates_summary_{period[0]}_{period[1]}",
    "rates_summary",
)

with st.expander("Every scenario's rates"):
    wide = df.pivot(index=["model", "scenario", "band_label", "band_value"], columns="rate", values="value")
    wide = wide.reset_index().rename(columns={"band_label": "band"}).rename_axis(columns=None)
    ui.table(wide, f"rates_{period[0]}_{period[1]}", "rates_scenarios")
