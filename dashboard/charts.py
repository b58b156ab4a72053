"""Altair chart builders for the dashboard, and their PNG/SVG export through vl-convert."""

from __future__ import annotations

import altair as alt
import pandas as pd
import vl_convert

# page data is aggregated in DuckDB first; the largest frame (rate points, two kinds x 3,000 scenarios) exceeds
# Altair's default 5,000-row guard, which exists to stop accidental huge embeds
alt.data_transformers.disable_max_rows()

# Okabe & Ito's colour-blind-safe palette ("Color Universal Design", 2008; the colours of Wong, Nature Methods 8,
# 441, 2011) without its yellow, too pale on white: blue, orange, vermillion, bluish green, reddish purple, sky blue.
# Three bands take blue, orange and vermillion, which differ in lightness as well as hue, so they stay apart for
# red-green colour blindness.
PALETTE = ["#0072B2", "#E69F00", "#D55E00", "#009E73", "#CC79A7", "#56B4E9"]
# dash patterns of the single scenarios on Pathways, one each (solid first), told apart in black on the band colours
DASHES = [[1, 0], [6, 3], [2, 2], [10, 3, 2, 3], [4, 4], [12, 4], [2, 5], [8, 2, 2, 2, 2, 2]]
# the two ranges drawn around each band median, widest first, with their fill opacities
RANGES = {"5–95 %": ("q05", "q95", 0.16), "25–75 %": ("q25", "q75", 0.38)}


# What the chart builders return and st.altair_chart accepts (Altair's `properties` may turn a layer into a facet).
Chart = alt.Chart | alt.LayerChart | alt.FacetChart


def band_scale(labels: list[str]) -> alt.Scale:
    """One colour per band, the same on every page (three bands: low blue, middle orange, high vermillion)."""
    two = [PALETTE[0], PALETTE[2]]
    colours = two if len(labels) == 2 else [PALETTE[i % len(PALETTE)] for i in range(len(labels))]
    return alt.Scale(domain=labels, range=colours)


def histogram(df: pd.DataFrame, edges: list[float], labels: list[str], title: str, unit: str) -> Chart:
    """Counts of the ensemble at the milestone, coloured by band, with the band edges as rules."""
    bars = (
        alt.Chart(df)
        .mark_bar()
        .encode(
            x=alt.X("value:Q", bin=alt.Bin(maxbins=30), title=f"{title} [{unit}]"),
            # whole scenarios only: no 0.5 ticks when the tallest bar holds one or two
            y=alt.Y("count():Q", title="scenarios", stack=True, axis=alt.Axis(tickMinStep=1, format="d")),
            color=alt.Color("band_label:N", scale=band_scale(labels), sort=labels, title="band"),
            tooltip=[alt.Tooltip("band_label:N", title="band"), alt.Tooltip("count():Q", title="scenarios")],
        )
    )
    rules = (
        alt.Chart(pd.DataFrame({"edge": edges}))
        .mark_rule(color="black", strokeDash=[4, 3])
        .encode(x="edge:Q", tooltip=[alt.Tooltip("edge:Q", format=",.4~g", title="band edge")])
    )
    return alt.layer(bars, rules).properties(height=280)


def rates_box(df: pd.DataFrame, labels: list[str], title: str) -> Chart:
    """Per band, box plot and jittered points of the rates; one panel per rate (`rate`, its label with its unit,
    in the order the rows come), each with its own scale."""
    base = alt.Chart().encode(
        x=alt.X("band_label:N", sort=labels, title="band", axis=alt.Axis(labelAngle=0)),
        color=alt.Color("band_label:N", scale=band_scale(labels), sort=labels, legend=None),
    )
    box = base.mark_boxplot(extent=1.5, opacity=0.6, size=40, outliers=False).encode(y=alt.Y("value:Q", title=title))
    points = (
        base.mark_circle(size=28, opacity=0.75)
        .encode(
            y="value:Q",
            xOffset=alt.XOffset("jitter:Q", scale=alt.Scale(domain=[-1, 1])),
            tooltip=[
                alt.Tooltip("model:N"),
                alt.Tooltip("scenario:N"),
                alt.Tooltip("band_label:N", title="band"),
                alt.Tooltip("rate:N"),
                alt.Tooltip("value:Q", format=",.4~g", title="rate"),
                alt.Tooltip("band_value:Q", format=",.4~g", title="milestone value"),
            ],
        )
        .transform_calculate(jitter="(random() - 0.5) * 1.2")
    )
    return (
        alt.layer(box, points, data=df)
        .properties(width=300, height=320)
        .facet(column=alt.Column("rate:N", title=None, sort=list(dict.fromkeys(df["rate"]))))
        .resolve_scale(y="independent")
    )


def cost_ranges(summary: pd.DataFrame, labels: list[str]) -> Chart:
    """Per cost metric and year: the band medians (points) and interquartile ranges (bars), side by side.

    Panels keep the order of `summary["panel"]`."""
    base = alt.Chart().encode(
        x=alt.X("year:O", title=None, axis=alt.Axis(labelAngle=0)),
        xOffset=alt.XOffset("band_label:N", sort=labels),
        color=alt.Color(
            "band_label:N", scale=band_scale(labels), sort=labels, title="band", legend=alt.Legend(orient="top")
        ),
        tooltip=[
            alt.Tooltip("metric:N"),
            alt.Tooltip("year:O"),
            alt.Tooltip("band_label:N", title="band"),
            alt.Tooltip("n:Q"),
            alt.Tooltip("median:Q", format=",.4~g"),
            alt.Tooltip("q25:Q", format=",.4~g"),
            alt.Tooltip("q75:Q", format=",.4~g"),
        ],
    )
    iqr = base.mark_rule(strokeWidth=6, opacity=0.6).encode(y=alt.Y("q25:Q", title=None), y2="q75:Q")
    med = base.mark_point(filled=True, size=60).encode(y="median:Q")
    return (
        alt.layer(iqr, med, data=summary)
        .properties(width=210, height=200)
        .facet(
            facet=alt.Facet(
                "panel:N",
                title=None,
                header=alt.Header(labelFontWeight="bold"),
                sort=list(dict.fromkeys(summary["panel"])),
            ),
            columns=3,
        )
        .resolve_scale(y="independent")
    )


def pathway_ranges(bands: pd.DataFrame) -> pd.DataFrame:
    """The band ranges in long form, one row per band, year and range (`range` names it, `lo`/`hi` bound it), so
    that one area mark draws both shades and the legend can say which is which."""
    parts = [
        bands[["band_label", "year"]].assign(range=name, lo=bands[lo], hi=bands[hi])
        for name, (lo, hi, _) in RANGES.items()
    ]
    return pd.concat(parts, ignore_index=True)


def pathway(
    bands: pd.DataFrame,
    labels: list[str],
    title: str,
    unit: str,
    scenarios: pd.DataFrame | None = None,
    reference: pd.DataFrame | None = None,
    y_domain: tuple[float, float] | None = None,
) -> Chart:
    """Median line and 25-75 % / 5-95 % ranges per band over time, optional single scenarios and the reference.

    The two ranges are two shades of the band colour, named in a legend of their own; the 5-95 % range also gets
    a thin outline, so that the ranges of neighbouring bands stay apart where they overlap. Single scenarios are
    black lines with a dash pattern each, named in the legend.
    `y_domain` fixes the value axis, so that two pathways drawn side by side (raw, harmonised) compare by eye."""
    # legends above and below the plot, not beside it, where they would take half of a half-width panel
    colour = alt.Color(
        "band_label:N",
        scale=band_scale(labels),
        sort=labels,
        title="band",
        legend=alt.Legend(orient="top", direction="horizontal"),
    )
    x = alt.X("year:Q", axis=alt.Axis(format="d"), title=None)
    scale = alt.Scale(domain=list(y_domain)) if y_domain is not None else alt.Undefined
    names = list(RANGES)
    shades = (
        alt.Chart(pathway_ranges(bands))
        .mark_area()
        .encode(
            x=x,
            y=alt.Y("lo:Q", title=f"{title} [{unit}]", scale=scale),
            y2="hi:Q",
            color=colour,
            detail="range:N",
            opacity=alt.Opacity(
                "range:N",
                sort=names,
                scale=alt.Scale(domain=names, range=[o for _, _, o in RANGES.values()]),
                legend=alt.Legend(
                    title="range of the band's scenarios", symbolType="square", orient="top", direction="horizontal"
                ),
            ),
        )
    )
    base = alt.Chart(bands).encode(x=x, color=colour)
    edges = [base.mark_line(strokeWidth=0.8, opacity=0.7).encode(y=f"{q}:Q") for q in ("q05", "q95")]
    line = base.mark_line(strokeWidth=2.5).encode(
        y="median:Q",
        tooltip=[
            alt.Tooltip("band_label:N", title="band"),
            alt.Tooltip("year:Q"),
            alt.Tooltip("n:Q", title="scenarios"),
            alt.Tooltip("median:Q", format=",.4~g"),
            alt.Tooltip("q25:Q", format=",.4~g", title="25th percentile"),
            alt.Tooltip("q75:Q", format=",.4~g", title="75th percentile"),
            alt.Tooltip("q05:Q", format=",.4~g", title="5th percentile"),
            alt.Tooltip("q95:Q", format=",.4~g", title="95th percentile"),
        ],
    )
    layers: list[alt.Chart] = [shades, *edges, line]
    if scenarios is not None and not scenarios.empty:
        order = list(dict.fromkeys(scenarios["label"]))
        layers.append(
            alt.Chart(scenarios)
            .mark_line(strokeWidth=1.6, color="#222222")
            .encode(
                x=x,
                y="value:Q",
                strokeDash=alt.StrokeDash(
                    "label:N",
                    sort=order,
                    scale=alt.Scale(domain=order, range=DASHES),
                    legend=alt.Legend(
                        title="single scenario",
                        symbolStrokeColor="#222222",
                        symbolType="stroke",
                        symbolSize=600,
                        symbolStrokeWidth=1.6,
                        labelLimit=400,
                        orient="bottom",
                        direction="vertical",
                    ),
                ),
                tooltip=[
                    alt.Tooltip("model:N"),
                    alt.Tooltip("scenario:N"),
                    alt.Tooltip("year:Q"),
                    alt.Tooltip("value:Q", format=",.4~g"),
                ],
            )
        )
    if reference is not None and not reference.empty:
        layers.append(
            alt.Chart(reference)
            .mark_point(shape="diamond", size=160, filled=True, color="black")
            .encode(
                x=x,
                y="value:Q",
                tooltip=[
                    alt.Tooltip("label:N", title="reference"),
                    alt.Tooltip("year:Q"),
                    alt.Tooltip("value:Q", format=",.4~g"),
                ],
            )
        )
        layers.append(
            alt.Chart(reference)
            .mark_text(align="left", dx=8, dy=-8, fontSize=11)
            .encode(x=x, y="value:Q", text="label:N")
        )
    # Streamlit fits the whole chart, legends included, into the height: leave room for the legends
    n_single = 0 if scenarios is None or scenarios.empty else scenarios["label"].nunique()
    return alt.layer(*layers).properties(height=380 + 50 + (30 + 18 * n_single if n_single else 0))


def budgets(df: pd.DataFrame, lines: pd.DataFrame, labels: list[str], x_title: str, y_title: str) -> Chart:
    """Each scenario's CO2 to net zero (y) against its milestone value (x), coloured by band, hollow where net zero
    is not reached; the carbon budgets as horizontal rules with their warming level."""
    colour = alt.Color("band_label:N", scale=band_scale(labels), sort=labels, title="band")
    points = (
        alt.Chart(df)
        .mark_point(size=70, strokeWidth=2)
        .encode(
            x=alt.X("band_value:Q", title=x_title, scale=alt.Scale(zero=False)),
            y=alt.Y("cumulative:Q", title=y_title),
            color=colour,
            fill=alt.condition("datum.reached", colour, alt.value("transparent")),
            tooltip=[
                alt.Tooltip("model:N"),
                alt.Tooltip("scenario:N"),
                alt.Tooltip("band_label:N", title="band"),
                alt.Tooltip("cumulative:Q", format=",.0f", title=y_title),
                alt.Tooltip("until:Q", format="d", title="summed to"),
                alt.Tooltip("outcome:N", title="outcome class"),
                alt.Tooltip("warming:Q", format=".2f", title="indicative warming (°C, 50 %)"),
            ],
        )
    )
    rules = (
        alt.Chart(lines)
        .mark_rule(color="#444444", strokeDash=[6, 3])
        .encode(y="budget:Q", tooltip=[alt.Tooltip("label:N", title="budget"), alt.Tooltip("budget:Q", title="Gt CO2")])
    )
    text = (
        alt.Chart(lines)
        .mark_text(align="left", dx=4, dy=-6, fontSize=11, color="#444444")
        .encode(x=alt.value(2), y="budget:Q", text="label:N")
    )
    return alt.layer(points, rules, text).properties(height=380)


def pairs(df: pd.DataFrame, x: str, y: str, x_title: str, y_title: str) -> Chart:
    """One point per pair: the difference in milestone emissions (x) against a difference afterwards (y)."""
    return (
        alt.Chart(df)
        .mark_circle(size=90, opacity=0.8)
        .encode(
            x=alt.X(f"{x}:Q", title=x_title),
            y=alt.Y(f"{y}:Q", title=y_title, scale=alt.Scale(zero=False)),
            color=alt.Color("group:N", title="group", scale=alt.Scale(range=PALETTE)),
            shape=alt.Shape("model:N", title="model"),
            tooltip=[
                alt.Tooltip("model:N"),
                alt.Tooltip("group:N"),
                alt.Tooltip("scenario_first:N", title="first"),
                alt.Tooltip("scenario_later:N", title="later"),
                alt.Tooltip(f"{x}:Q", format=",.4~g", title=x_title),
                alt.Tooltip(f"{y}:Q", format=",.4~g", title=y_title),
            ],
        )
        .properties(height=300)
    )


def to_png(chart: alt.TopLevelMixin, scale: float = 2.0) -> bytes:
    """The chart as a PNG image (rendered offline by vl-convert)."""
    return vl_convert.vegalite_to_png(chart.to_json(), scale=scale)


def to_svg(chart: alt.TopLevelMixin) -> str:
    """The chart as an SVG document (rendered offline by vl-convert)."""
    return vl_convert.vegalite_to_svg(chart.to_json())
