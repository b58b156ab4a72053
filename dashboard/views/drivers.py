"""Drivers: which Kaya levers (population, GDP per person, energy intensity, carbon intensity) move fossil CO2
from the base year to each milestone, per scenario, per band median, band against band and pair by pair."""

from __future__ import annotations

import streamlit as st

from milepost.dashboard import charts_drivers, contracts, headlines, queries, stats, ui
from milepost.dashboard import queries_drivers as qd
from milepost.validate.store.pairs import rule_for

UNIT = "Mt CO2"
METHOD = (
    "Additive LMDI-I decomposition (Ang 2005) of the change in fossil CO2 (emissions.co2.fossil) from the base year "
    "to the milestone, in Mt CO2 per year: fossil CO2 = population × GDP (PPP) per person × primary energy per GDP "
    "× CO2 per primary energy, and each effect is L(C₁, C₀) · ln(x₁ / x₀) with L the logarithmic mean. The four "
    "effects of a scenario add up exactly to its change. Negative = the lever cuts emissions."
)

ch, sel = ui.results_page("Drivers")
ui.caution()
st.caption(METHOD)

edges = ui.shared_query(queries.band_edges, sel)
labels = queries.band_labels(len(edges) + 1)
df = ui.shared_query(qd.effects, sel, sel.region)
gaps = ui.shared_query(qd.gaps, sel, tuple(qd.EFFECTS))
if df.empty:
    st.warning(
        f"No driver decomposition for these scenarios in {sel.region} ({ui.BASIS_LABELS.get(sel.basis, sel.basis)})."
        + (" Missing inputs are listed below." if len(gaps) else "")
    )
    if len(gaps):
        ui.table(gaps, "drivers_gaps", "drivers_gaps_empty")
    ui.stop()

years = sorted(df["year"].unique().tolist())
year = ui.url_selectbox("Milestone", years, key="drivers_year", param="dyear", default=years[-1], cast=int)
df = ui.label_bands(df, labels)
summary = qd.lever_shares(df, sel.model_weighted)
counts = qd.band_counts(df, year)
present = sorted(df["band"].unique().tolist())
top, bottom = present[-1], present[0]

sentence = headlines.drivers(summary[summary["year"] == year], counts, labels, top, bottom, year, UNIT)
st.info(
    sentence + f" Bands by {sel.variable} in {sel.year}{sel.outcome_label and ', ' + sel.outcome_label}.",
    icon=":material/account_tree:",
)
thin_bands = counts[stats.thin(counts["models"])]
if len(thin_bands):
    # named, never left out: the thin bands' medians stay in the waterfalls and the table, flagged
    named = ", ".join(
        f"{labels[b]} band ({m} model{'s' if m != 1 else ''})"
        for b, m in thin_bands[["band", "models"]].itertuples(index=False)
    )
    st.warning(f"Thin evidence ({stats.THIN_RULE}) in {year}: {named}.", icon=":material/warning:")

st.subheader(f"Waterfall, base year to {year}")
mode = ui.url_selectbox(
    "Waterfall of", ["band medians", "one scenario"], key="drivers_mode", param="dmode", default="band medians"
)
if mode == "one scenario":
    names = df[df["year"] == year].drop_duplicates(["model", "scenario"])
    options = [f"{m} / {s}" for m, s in zip(names["model"], names["scenario"], strict=True)]
    picked = ui.url_selectbox("Scenario", options, key="drivers_scenario", param="dscen", default=options[0])
    model, scenario = picked.split(" / ", 1)
    steps = qd.scenario_waterfall(df, model, scenario, year)
    if steps.empty:
        note = qd.undefined(df[(df["model"] == model) & (df["scenario"] == scenario) & (df["year"] == year)])
        st.warning(f"No decomposition for {picked} in {year}: {', '.join(note['note'].dropna()) or 'no value'}.")
    else:
        ui.chart(charts_drivers.waterfall(steps, picked, UNIT), f"drivers_{model}_{scenario}_{year}", "drivers_one")
else:
    cols = st.columns(len(present))
    for col, band in zip(cols, present, strict=True):
        with col:
            steps = qd.band_waterfall(df, band, year, sel.model_weighted)
            if steps.empty:
                st.caption(f"{labels[band]}: no decomposition")
                continue
            n, models = int(steps["n"].iloc[-1]), int(steps["models"].iloc[-1])
            title = f"{labels[band]} band: median of {headlines.counted(n, models)}"
            ui.chart(
                charts_drivers.waterfall(steps, title + (f" ({stats.THIN})" if stats.is_thin(models) else ""), UNIT),
                f"drivers_band{band}_{year}",
                f"drivers_band{band}",
            )
    st.caption(
        "Band waterfalls stack the median of each effect on the median base-year CO2; medians do not add up, so "
        "the last bar need not be the band's median milestone CO2. Red raises emissions, blue cuts them. Each "
        f"title counts the scenarios and models behind the band's medians; {stats.THIN_RULE} is {stats.THIN}."
    )

st.subheader("Compare bands: which levers, by milestone")
ui.chart(charts_drivers.levers(summary, labels, qd.EFFECTS, UNIT), "drivers_levers", "drivers_levers")
st.caption(
    ui.bands_note(sel.variable, sel.year, sel.region, labels, edges, sel.model_weighted)
    + ". Point: median; line: 25–75 % range. Carbon share = the carbon-intensity effect over the sum of the two "
    "intensity effects, where they cut."
)
shown = summary.assign(lever=summary["kind"].map({**qd.EFFECTS, "carbon_share": "carbon share of intensity cuts (%)"}))
shown = ui.label_bands(shown, labels).assign(thin=lambda d: stats.evidence(d["models"]))
ui.table(
    shown[["lever", "year", "band_label", "n", "models", "median", "q25", "q75", "thin"]].rename(
        columns={"band_label": "band"}
    ),
    f"drivers_levers_{sel.year}",
    "drivers_levers_table",
)

st.subheader("Delay pairs: the two scenarios of each pair")
found = contracts.find(ui.shared_query(queries.contract_name))
rule = rule_for(found.contract, sel.likelihood)
pairs = qd.pair_effects(ui.shared_query(queries.pair_rows, sel, rule, [qd.CO2]))
pairs = pairs[pairs["year"] == year] if len(pairs) else pairs
st.caption(f"{rule.describe()} Effects in {sel.region}, {UNIT}; difference = later − first.")
if pairs.empty:
    st.info("No pairs for these filters: both scenarios of a pair must pass the filters and the outcome.")
else:
    medians = qd.pair_medians(pairs, sel.model_weighted)
    # the pairs and models behind the medians: those with a difference (a pair with an undefined effect has none)
    n_pairs, n_models = (int(medians[c].max()) if len(medians) else 0 for c in ("n", "models"))
    balanced = " (model-balanced)" if sel.model_weighted else ""
    st.write(
        f"Median difference{balanced}, later minus first start, over {n_pairs} pair{'s' if n_pairs != 1 else ''} "
        f"of {n_models} model{'s' if n_models != 1 else ''}: "
        + "; ".join(f"{e} {ui.fmt(v, 0)} {UNIT}" for e, v in zip(medians["effect"], medians["median"], strict=True))
        + "."
        + (f" Thin evidence: {stats.THIN_RULE}." if stats.is_thin(n_models) else "")
    )
    ui.table(
        medians[["effect", "n", "models", "median", "q25", "q75"]]
        .assign(thin=stats.evidence(medians["models"]))
        .rename(columns={"n": "pairs"}),
        f"drivers_pair_medians_{year}",
        "drivers_pair_medians",
        unit=UNIT,
    )
    ui.table(pairs, f"drivers_pairs_{year}", "drivers_pairs")

empty = qd.undefined(df)
if len(gaps) or len(empty):
    with st.expander(f"Not decomposed: {len(gaps)} missing inputs, {len(empty)} undefined scenario-milestones"):
        st.caption(
            "A scenario lacking population, GDP (PPP), primary energy or fossil CO2 has no decomposition (never a "
            "zero); negative fossil CO2 has no logarithmic decomposition."
        )
        if len(gaps):
            ui.table(gaps, "drivers_gaps", "drivers_gaps")
        if len(empty):
            ui.table(empty, "drivers_undefined", "drivers_undefined")
