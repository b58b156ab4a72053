"""Altair charts of the Drivers and Regions pages: LMDI waterfalls, lever comparisons, transfers by region."""

from __future__ import annotations

import altair as alt
import pandas as pd

from milepost.dashboard import stats
from milepost.dashboard.charts import PALETTE, Chart, band_scale

STEP_COLOURS = alt.Scale(domain=["level", "rise", "fall"], range=["#7f7f7f", PALETTE[2], PALETTE[0]])


def waterfall(steps: pd.DataFrame, title: str, unit: str) -> Chart:
    """Floating bars from the base-year level through each effect to the milestone level (see
    queries_drivers.steps); red raises emissions, blue cuts them. Steps of band medians (with `n` and `models`)
    say in the tooltip how many scenarios and models stand behind each bar, and whether that is thin evidence."""
    order = steps.sort_values("order")["step"].tolist()
    tooltip = [alt.Tooltip("step:N", title="step"), alt.Tooltip("value:Q", format=",.0f", title=f"{unit}")]
    if "models" in steps:
        steps = steps.assign(evidence=stats.evidence(steps["models"]))
        tooltip += [
            alt.Tooltip("n:Q", title="scenarios"),
            alt.Tooltip("models:Q", title="models"),
            alt.Tooltip("evidence:N", title="evidence"),
        ]
    return (
        alt.Chart(steps)
        .mark_bar(size=38)
        .encode(
            x=alt.X("step:N", sort=order, title=None, axis=alt.Axis(labelAngle=-30, labelLimit=120)),
            y=alt.Y("low:Q", title=f"fossil CO2 [{unit}]"),
            y2="high:Q",
            color=alt.Color("kind:N", scale=STEP_COLOURS, title=None),
            tooltip=tooltip,
        )
        .properties(title=title, height=300)
    )


def levers(summary: pd.DataFrame, labels: list[str], effect_labels: dict[str, str], unit: str) -> Chart:
    """Median effect per band (points) with the 25-75 % range (bars), one panel row per milestone."""
    data = summary[summary["kind"].isin(list(effect_labels))].copy()
    data["effect"] = data["kind"].map(effect_labels)
    data["band_label"] = [labels[int(b)] if int(b) < len(labels) else str(b) for b in data["band"]]
    data["evidence"] = stats.evidence(data["models"])
    order = list(effect_labels.values())
    base = alt.Chart().encode(
        y=alt.Y("effect:N", sort=order, title=None),
        color=alt.Color("band_label:N", scale=band_scale(labels), sort=labels, title="band"),
        yOffset=alt.YOffset("band_label:N", sort=labels),
    )
    bars = base.mark_rule(strokeWidth=3, opacity=0.6).encode(x=alt.X("q25:Q", title=f"effect [{unit}]"), x2="q75:Q")
    points = base.mark_point(filled=True, size=60).encode(
        x="median:Q",
        tooltip=[
            alt.Tooltip("effect:N"),
            alt.Tooltip("band_label:N", title="band"),
            alt.Tooltip("median:Q", format=",.0f"),
            alt.Tooltip("n:Q", title="scenarios"),
            alt.Tooltip("models:Q", title="models"),
            alt.Tooltip("evidence:N", title="evidence"),
        ],
    )
    zero = alt.Chart().mark_rule(color="black", strokeDash=[3, 3]).encode(x=alt.datum(0))
    return alt.layer(bars, points, zero, data=data).facet(row=alt.Row("year:O", title="milestone"))


def transfers(summary: pd.DataFrame, labels: list[str], unit: str) -> Chart:
    """Median transfer per region (positive = receives money, negative = pays), per band, one panel per rule."""
    data = summary.copy()
    data["band_label"] = [labels[int(b)] if int(b) < len(labels) else str(b) for b in data["band"]]
    data["evidence"] = stats.evidence(data["models"])
    base = alt.Chart().encode(
        y=alt.Y("region:N", title=None),
        yOffset=alt.YOffset("band_label:N", sort=labels),
        color=alt.Color("band_label:N", scale=band_scale(labels), sort=labels, title="band"),
    )
    bars = base.mark_bar().encode(
        x=alt.X("median:Q", title=f"median transfer [{unit}] (+ receives, − pays)"),
        tooltip=[
            alt.Tooltip("region:N"),
            alt.Tooltip("band_label:N", title="band"),
            alt.Tooltip("median:Q", format=",.1f", title=unit),
            alt.Tooltip("pays:Q", title="scenarios paying"),
            alt.Tooltip("receives:Q", title="scenarios receiving"),
            alt.Tooltip("n:Q", title="scenarios"),
            alt.Tooltip("models:Q", title="models"),
            alt.Tooltip("evidence:N", title="evidence"),
        ],
    )
    zero = alt.Chart().mark_rule(color="black").encode(x=alt.datum(0))
    return alt.layer(bars, zero, data=data).facet(column=alt.Column("rule_label:N", title=None))
