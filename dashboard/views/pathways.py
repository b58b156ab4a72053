"""Pathways: any variable over time per band (median, 25-75 % and 5-95 % ranges), with the base-year reference;
raw and harmonised side by side when the database holds both, with the method used for each series."""

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
    regions = ui.shared_query(queries.data_regions, variable)
    region = ui.url_selectbox("Region shown", regions, key="path_region", param="show_region", default=sel.region)

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
both = "harmonised" in ch.bases
shown = ["raw", "harmonised"] if both else ["raw"]
bands = {b: ui.label_bands(ui.shared_query(queries.pathway_bands, sel, variable, region, b), labels) for b in shown}
if all(df.empty for df in bands.values()):
    st.warning(f"No {variable} in {region} for the selected scenarios.")
    ui.stop()
unit = str(next(df for df in bands.values() if not df.empty)["unit"].iloc[0])

chosen = ui.shared_query(queries.selected, sel)
options = (chosen["model"] + " | " + chosen["scenario"]).tolist()
picked = ui.url_multiselect(
    "Single scenarios",
    options,
    key="path_scenarios",
    param="scenario",
    placeholder="none",
    help="Draw these scenarios as dashed lines.",
)
keys = [tuple(p.split(" | ", 1)) for p in picked]
series: dict[str, pd.DataFrame | None] = dict.fromkeys(shown)
for b in shown if keys else ():
    found_series = ui.shared_query(queries.scenario_series, variable, region, keys, b)
    found_series["label"] = found_series["model"] + " | " + found_series["scenario"]
    series[b] = found_series

found = contracts.find(ui.shared_query(queries.contract_name))
# in the contract unit, like the stored data: a reference given in Gt for an Mt variable lands where it belongs
ref = contracts.reference_value(found.contract, region, variable, ch.base_year)
reference = None
if ref is not None:
    reference = pd.DataFrame({"year": [ch.base_year], "value": [ref.value], "label": [f"reference {ch.base_year}"]})

# one value axis for both panels, so that the harmonised pathway compares with the raw one by eye
values = pd.concat(
    [df[["q05", "q95"]] for df in bands.values()]
    + [s[["value"]].rename(columns={"value": "q05"}) for s in series.values() if s is not None]
    + ([reference[["value"]].rename(columns={"value": "q05"})] if reference is not None else []),
    ignore_index=True,
)
low, high = float(values.min(numeric_only=True).min()), float(values.max(numeric_only=True).max())
pad = (high - low) * 0.05 or abs(high) * 0.05 or 1.0
domain = (low - pad, high + pad)

TITLES = {"raw": "As submitted", "harmonised": "Harmonised"}
panels = st.columns(len(shown))
for panel, b in zip(panels, shown, strict=True):
    with panel:
        st.subheader(TITLES[b])
        if bands[b].empty:
            st.info(
                f"No harmonised {variable} in {region}: the harmonisation left it out (a part of a harmonised "
                "total without a reference value of its own, or a series it could not harmonise). "
                "The table below says why for each scenario."
            )
            continue
        ui.chart(
            charts.pathway(bands[b], labels, variable, unit, series[b], reference, y_domain=domain),
            f"pathway_{variable}_{region}_{b}",
            f"path_chart_{b}" if both else "path_chart",
        )

note = ui.bands_note(sel.variable, sel.year, sel.region, labels, edges, sel.model_weighted)
notes = [note + f" ({ui.BASIS_LABELS[sel.basis]})."]
if ref is not None:
    given = "" if ref.given_unit == ref.unit else f", given as {ui.fmt(ref.given_value, 2)} {ref.given_unit}"
    notes.append(f"◆ reference value {ui.fmt(ref.value, 0)} {ref.unit} in {ch.base_year} ({found.source}{given}).")
    if ref.unit != unit:
        notes.append(f"The stored values are in {unit}, the contract unit is {ref.unit}.")
else:
    notes.append(f"No reference value for {variable} in {region} in {ch.base_year} ({found.source}).")
if both:
    notes.append(ui.HARMONISED_NOTE)
st.caption(" ".join(notes))

table = pd.concat([df.assign(values=ui.BASIS_LABELS[b]) for b, df in bands.items()], ignore_index=True)
ui.table(
    table[["values", "band_label", "year", "n", "median", "q25", "q75", "q05", "q95"]],
    f"pathway_{variable}_{region}",
    "path_table",
    unit=unit,
)

if both:
    st.subheader("How each series was harmonised")
    methods = ui.label_bands(ui.shared_query(queries.harmonisation_methods, sel, variable, region), labels)
    if methods.empty:
        st.info(f"The selected scenarios of {variable} in {region} were stored without harmonisation.")
    else:
        counts = methods.groupby("method", sort=True).agg(
            series=("method", "size"), median_factor=("factor", "median"), median_offset=("offset", "median")
        )
        parts = []
        for method, row in counts.iterrows():
            text = f"{method} {int(row['series'])}"
            if pd.notna(row["median_factor"]):
                text += f" (median factor {ui.fmt(row['median_factor'], 3)})"
            if pd.notna(row["median_offset"]):
                text += f" (median offset {ui.fmt(row['median_offset'], 1)} {unit})"
            parts.append(text)
        st.caption(f"{variable} in {region}, per method: " + "; ".join(parts) + ".")
        columns = ["model", "scenario", "band_label", "method", "factor", "offset", "convergence_year"]
        one_unit = methods["unit"].nunique() == 1
        columns += ["base_value", "reference_value", *([] if one_unit else ["unit"]), "note"]
        ui.table(
            methods.drop(columns=["band"])[columns],
            f"harmonisation_{variable}_{region}",
            "path_methods",
            unit=str(methods["unit"].iloc[0]) if one_unit else None,
        )
