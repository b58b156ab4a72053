"""Rates: per band, how fast the band variable changes over a period after the milestone: CAGR beside a linear rate
the user picks (% of the start value, % of the base-year value, or the variable's unit per year)."""

from __future__ import annotations

import streamlit as st

from milepost.dashboard import charts, headlines, queries, ui

ch, sel = ui.results_page("Rates")
base = ch.base_year

periods = ui.shared_query(queries.rate_periods, sel.variable, sel.region)
after = [p for p in periods if p[0] >= sel.year]
if periods and not after:
    st.caption(f"No stored period starts in or after {sel.year}: every stored period is offered.")
after = after or periods
if not after:
    st.warning(f"No reduction rates of {sel.variable} in {sel.region} are stored.")
    ui.stop()
names = [f"{a}-{b}" for a, b in after]
default = next((n for n, p in zip(names, after, strict=True) if p[0] == sel.year), names[0])
c1, c2 = st.columns(2)
with c1:
    period_name = ui.url_selectbox(
        "Period",
        names,
        key="rates_period",
        param="period",
        default=default,
        help="Rates are stored for base year → each milestone and between consecutive milestones.",
    )
with c2:
    linear = ui.url_selectbox(
        "Beside CAGR",
        list(queries.LINEAR_RATES),
        key="rates_kind",
        param="rate",
        default="rate_linear_base",
        format_func=lambda k: queries.RATE_LABELS[k],
        help="Linear rates are defined where CAGR is not (a value at or below zero). The base-year share gives every "
        "period one denominator, so a delayed scenario's faster cut is not hidden by its higher starting level.",
    )
period = after[names.index(period_name)]

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
df = ui.label_bands(ui.shared_query(queries.rates, sel, *period), labels)
units = df.groupby("kind")["unit"].first().to_dict() if not df.empty else {}
linear_unit = str(units.get(linear, "%/yr"))
df["rate"] = df["kind"].map(queries.RATE_LABELS) + " [" + df["unit"].fillna("") + "]"
summary = queries.summarise(df, ["kind", "band"], model_weighted=sel.model_weighted)
present = sorted(df["band"].unique().tolist()) or [0]

st.info(
    headlines.rates(
        summary,
        labels,
        present[-1],
        present[0],
        period,
        sel.variable,
        sel.region,
        linear,
        linear_unit,
        sel.outcome_label,
    ),
    icon=":material/speed:",
)
ui.caution()
formulas = {
    "rate_linear": "linear = (v1 − v0)/(|v0|·(y1−y0)), v0 the value at the start of the period",
    "rate_linear_base": f"linear = (v1 − v0)/(|v{base}|·(y1−y0)), v{base} the base-year value",
    "rate_absolute": f"absolute = (v1 − v0)/(y1−y0) in {linear_unit}",
}
st.caption(
    ui.bands_note(sel.variable, sel.year, sel.region, labels, edges, sel.model_weighted)
    + f". Shown beside CAGR: {queries.RATE_LABELS[linear]}. CAGR = (v1/v0)^(1/(y1−y0)) − 1; {formulas[linear]};"
    " negative = falling."
)

if df.empty:
    st.warning("No scenario matches these filters.")
    ui.stop()

undefined = queries.cagr_undefined(df)
if int(undefined["n"].sum()):
    per_band = "; ".join(
        f"{labels[int(b)]} band {int(n)}" for b, n in zip(undefined["band"], undefined["n"], strict=True)
    )
    st.warning(
        f"CAGR is undefined where a value is at or below zero ({period[0]} or {period[1]}): {per_band} scenario(s). "
        f"Their linear rates are defined: see {queries.RATE_LABELS[linear]} here, or pick another linear rate.",
        icon=":material/info:",
    )

shown = df[df["kind"].isin(["rate_cagr", linear])].dropna(subset=["value"])
ui.chart(
    charts.rates_box(
        shown.sort_values("kind", key=lambda k: k != "rate_cagr"), labels, f"{sel.variable} {period[0]}–{period[1]}"
    ),
    f"rates_{sel.variable}_{period[0]}_{period[1]}",
    "rates_box",
)

table = summary[summary["kind"].isin(["rate_cagr", linear])]
table = table.assign(
    rate=table["kind"].map(queries.RATE_LABELS),
    unit=table["kind"].map(units),
    band=[labels[b] for b in table["band"]],
)
ui.table(
    table[["rate", "unit", "band", "n", "n_missing", "models", "median", "q25", "q75", "iqr"]].reset_index(drop=True),
    f"rates_summary_{period[0]}_{period[1]}",
    "rates_summary",
)

with st.expander("Every scenario's rates (all four kinds)"):
    wide = df.pivot(index=["model", "scenario", "band_label", "band_value"], columns="rate", values="value")
    wide = wide.reset_index().rename_axis(columns=None)
    band_unit = ui.shared_query(queries.variable_unit, sel.variable)
    ui.table(
        wide, f"rates_{period[0]}_{period[1]}", "rates_scenarios", columns={"band_value": f"{sel.year} [{band_unit}]"}
    )
