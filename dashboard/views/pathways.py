"""Pathways: any variable over time per band (median, 25-75 % and 5-95 % ranges), with the base-year reference."""

from __future__ import annotations

import pandas as pd
import streamlit as st

from milepost.dashboard import charts, contracts, queries, ui

ch, sel = ui.results_page("Pathways")
ui.caution()

c1, c2 = st.columns(2)
with c1:
    variable = ui.url_selectbox(
        "Variable shown", ch.data_variables, key="path_variable", param="show", default=sel.variable
    )
with c2:
    regions = ui.query(queries.data_regions, variable)
    region = ui.url_selectbox("Region shown", regions, key="path_region", param="show_region", default=sel.region)

edges = ui.query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
bands = ui.label_bands(ui.query(queries.pathway_bands, sel, variable, region), labels)
if bands.empty:
    st.warning(f"No {variable} in {region} for the selected scenarios.")
    ui.stop()
unit = str(bands["unit"].iloc[0])

chosen = ui.query(queries.selected, sel)
options = (chosen["model"] + " | " + chosen["scenario"]).tolist()
picked = ui.url_multiselect(
    "Single scenarios",
    options,
    key="path_scenarios",
    param="scenario",
    placeholder="none",
    help="Draw these scenarios as dashed lines.",
)
series = None
if picked:
    keys = [tuple(p.split(" | ", 1)) for p in picked]
    series = ui.query(queries.scenario_series, variable, region, keys)
    series["label"] = series["model"] + " | " + series["scenario"]

found = contracts.find(ui.query(queries.contract_name))
# in the contract unit, like the stored data: a reference given in Gt for an Mt variable lands where it belongs
ref = contracts.reference_value(found.contract, region, variable, ch.base_year)
reference = None
if ref is not None:
    reference = pd.DataFrame({"year": [ch.base_year], "value": [ref.value], "label": [f"reference {ch.base_year}"]})

ui.chart(charts.pathway(bands, labels, variable, unit, series, reference), f"pathway_{variable}_{region}", "path_chart")
notes = [ui.bands_note(sel.variable, sel.year, sel.region, labels, edges) + "."]
if ref is not None:
    given = "" if ref.given_unit == ref.unit else f", given as {ui.fmt(ref.given_value, 2)} {ref.given_unit}"
    notes.append(f"◆ reference value {ui.fmt(ref.value, 0)} {ref.unit} in {ch.base_year} ({found.source}{given}).")
    if ref.unit != unit:
        notes.append(f"The stored values are in {unit}, the contract unit is {ref.unit}.")
else:
    notes.append(f"No reference value for {variable} in {region} in {ch.base_year} ({found.source}).")
st.caption(" ".join(notes))

ui.table(
    bands[["band_label", "year", "n", "median", "q25", "q75", "q05", "q95", "unit"]].rename(
        columns={"band_label": "band"}
    ),
    f"pathway_{variable}_{region}",
    "path_table",
)
