"""Costs: per band, GDP and consumption losses, carbon price and NPV of abatement cost, and the band ratios.

What delay costs is read pair by pair on the Delay page, not from bands.
"""

from __future__ import annotations

import streamlit as st

from milepost.dashboard import charts, headlines, queries, stats, ui

ch, sel = ui.results_page("Costs")

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
df = ui.shared_query(queries.costs, sel, ch.base_year)
keys = df["kind"] + "|" + df["variable"]
df["metric"] = keys.map({f"{k}|{v}": label for (k, v), label in queries.COST_METRICS.items()})
by = ["kind", "variable", "metric", "unit", "year_from", "year"]
summary = queries.summarise(df, [*by, "band"], model_weighted=sel.model_weighted)
present = sorted(df["band"].unique().tolist()) or [0]
top, bottom = present[-1], present[0]
ratios = queries.band_ratio(summary, by, top=top, bottom=bottom)

st.info(headlines.costs(ratios, labels, top, bottom, sel.year, sel.outcome_label), icon=":material/payments:")
ui.caution()
references = ui.shared_query(queries.reference_names, sel)
named = f" (here: {', '.join(references)})" if references else ""
st.caption(
    ui.bands_note(sel.variable, sel.year, sel.region, labels, edges, sel.model_weighted)
    + ". Losses and growth reductions are measured against each model's own reference scenario named in the "
    f"scenarios table{named}, which may differ from a current-policies pathway. Growth reduction = CAGR of the "
    "reference − CAGR of the scenario from the base year, in percentage points per year. NPV at the base year. "
    "What delay costs, pair by pair within one model and goal: see the Delay page."
)

if df.empty:
    st.warning("No cost indicators for the selected scenarios.")
    ui.stop()

# as on every page: a median over fewer than three models says more about those models than about the band
summary["evidence"] = stats.evidence(summary["models"])
thin = int((summary["evidence"] != "").sum())
if thin:
    st.warning(
        f"Thin evidence: {thin} of {len(summary)} band medians rest on {stats.THIN_RULE} (see models below).",
        icon=":material/warning:",
    )

order = list(queries.COST_METRICS.values())
summary = ui.label_bands(summary, labels)
summary["panel"] = summary["metric"] + " [" + summary["unit"] + "]"
summary["panel_order"] = summary["metric"].map({m: i for i, m in enumerate(order)})
summary = summary.sort_values(["panel_order", "year", "band"])
ui.chart(charts.cost_ranges(summary, labels), f"costs_{sel.variable}_{sel.year}", "costs_chart")
st.caption("Point: median; bar: 25–75 % range of the scenarios in the band.")

if top != bottom:
    st.subheader(f"{labels[top].capitalize()} band over {labels[bottom]} band: ratio of medians")
    ratios["order"] = ratios["metric"].map({m: i for i, m in enumerate(order)})
    shown = ratios.sort_values(["order", "year"])
    ui.table(
        shown.drop(columns=["kind", "variable", "order"]),
        f"costs_ratio_{sel.year}",
        "costs_ratio",
        columns={
            "median_top": f"median {labels[top]}",
            "n_top": f"scenarios {labels[top]}",
            "median_bottom": f"median {labels[bottom]}",
            "n_bottom": f"scenarios {labels[bottom]}",
        },
    )

with st.expander("Per band: scenarios, median and interquartile range"):
    ui.table(
        summary[["metric", "unit", "year_from", "year", "band_label", "n", "n_missing", "models", "evidence", "median"]]
        .join(summary[["q25", "q75"]])
        .reset_index(drop=True),
        f"costs_bands_{sel.year}",
        "costs_bands",
        columns={"year_from": "measured from"},
    )
