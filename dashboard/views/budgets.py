"""Budgets: each scenario's CO2 summed to net zero against the remaining carbon budgets, coloured by band."""

from __future__ import annotations

import pandas as pd
import streamlit as st

from milepost.dashboard import charts, contracts, queries, tables, ui

BUDGET_CAUTION = (
    "Warming estimates from carbon budgets are indicative: they read a published near-linear relation (remaining "
    "budgets by warming level and likelihood, and the TCRE) backwards, not a climate-model assessment of each "
    "scenario. The budgets already set aside warming from non-CO2 emissions as assumed in the report's scenarios."
)

ch, sel = ui.results_page("Budgets")
ui.caution()
st.caption(f"⚠️ {BUDGET_CAUTION}")

region = ui.shared_query(queries.budget_region)
if region is None:
    st.info(
        "No carbon-budget indicators are stored: the database was loaded with a contract without [budgets], "
        "or before budgets were computed. Re-ingest with a contract that has them (the core contract does)."
    )
    ui.stop()

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
df = ui.label_bands(ui.shared_query(queries.budget_scenarios, sel, region), labels)
if df.empty:
    st.warning("No scenario matches these filters.")
    ui.stop()
unit = ui.shared_query(queries.variable_unit, sel.variable)
df["reached"] = df["net_zero_year"].notna()
df["outcome"] = [
    queries.class_label(None if pd.isna(v) else float(v), sel.likelihood) if has else "no estimate"
    for v, has in zip(df["level"], df["has_level"], strict=True)
]

found = contracts.find(ui.shared_query(queries.contract_name))
budgets = found.contract.budgets if found.contract is not None else None
lik = float(sel.likelihood.rstrip("%"))
lines = pd.DataFrame(columns=["label", "budget"])
if budgets is not None and lik in budgets.likelihoods:
    lines = pd.DataFrame(
        [
            {"label": f"{level:g} °C ({sel.likelihood})", "budget": budgets.budget(level, lik)}
            for level in budgets.levels
        ]
    )

c1, c2, c3 = st.columns(3)
c1.metric("Scenarios", len(df))
c2.metric(f"Within a budget ({sel.likelihood})", int(df["level"].notna().sum()))
c3.metric("Reach net zero CO2", int(df["reached"].sum()))

cum_unit = str(df["unit"].dropna().iloc[0]) if df["unit"].notna().any() else "Gt CO2"
ui.chart(
    charts.budgets(
        df, lines, labels, f"{sel.variable} {sel.year} ({sel.region}) [{unit}]", f"CO2 to net zero [{cum_unit}]"
    ),
    f"budgets_{sel.likelihood.rstrip('%')}",
    "budgets_chart",
)
notes = [ui.bands_note(sel.variable, sel.year, sel.region, labels, edges) + "."]
notes.append(
    f"CO2 ({region}) is summed from the base year to the net-zero year, both included; hollow points never reach "
    "net zero and are summed to their last year. Dashed lines: remaining budgets at "
    f"{sel.likelihood} likelihood"
    + (f" ({budgets.source})." if budgets is not None else f" (no contract found: {found.source}).")
)
st.caption(" ".join(notes))

st.subheader(f"Outcome classes per band ({sel.likelihood})")
present = [lb for lb in labels if lb in set(df["band_label"])]
counts = pd.crosstab(df["outcome"], df["band_label"]).reindex(columns=present)
ui.table(
    counts.reset_index().rename_axis(columns=None),
    f"budget_classes_{sel.year}",
    "budgets_classes",
    columns={lb: tables.Column(f"{lb} band (scenarios)", "count") for lb in present},
)

st.subheader("Scenarios")
# the same explained cells as on Screen: "not reached by YEAR", and "(already ≤ 0)" from the stored note
df["net_zero_year"] = ui.net_zero_text(df["net_zero_year"], df["net_zero_searched_to"], df["net_zero_note"])
cols = ["model", "scenario", "band_label", "band_value", "cumulative", "until", "net_zero_year", "outcome"]
cols += ["warming", "warming_low", "warming_high"]
ui.table(
    df[cols],
    f"budgets_scenarios_{sel.year}",
    "budgets_table",
    columns={"band_value": f"{sel.year} [{unit}]", "cumulative": f"CO2 to net zero [{cum_unit}]"},
)
