"""The dashboard's table formatting layer and chart specs, without the app: labels, years, blanks, legends, axes."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
import vl_convert

from milepost.dashboard import charts, queries, tables
from milepost.dashboard.ui import net_zero_text

LABELS = ["low", "middle", "high"]


def test_statistics_get_readable_labels_with_the_unit():
    df = pd.DataFrame(
        {
            "band": ["low", "high"],
            "n": [12, 3],
            "n_missing": [0, 1],
            "median": [1.5, 2.5],
            "q25": [1.0, 2.0],
            "q75": [2.0, 3.0],
            "iqr": [1.0, 1.0],
        }
    )
    shown, config = tables.prepare(df, unit="Mt CO2e/yr")
    assert list(shown.columns) == [
        "band",
        "scenarios",
        "scenarios without a value",
        "median [Mt CO2e/yr]",
        "25th percentile [Mt CO2e/yr]",
        "75th percentile [Mt CO2e/yr]",
        "interquartile range [Mt CO2e/yr]",
    ]
    assert config["scenarios"]["type_config"]["format"] == "%d"
    assert config["median [Mt CO2e/yr]"]["type_config"]["format"] == "%.2f"
    # without a unit the label stands alone
    assert "median" in tables.prepare(df)[0].columns


def test_years_are_whole_numbers_and_a_fractional_net_zero_year_is_rounded_up():
    df = pd.DataFrame({"year": [2020.0, 2030.0], "net_zero_year": [2073.01, 2050.0], "until": [2074.0, 2050.0]})
    shown, config = tables.prepare(df)
    assert shown["year"].tolist() == [2020, 2030] and str(shown["year"].dtype) == "Int64"
    assert config["year"]["type_config"]["format"] == "%d"
    # a crossing during 2073 means 2074 is the first whole year at or below zero
    assert shown["net-zero year"].tolist() == [2074, 2050]
    assert "rounded up" in config["net-zero year"]["help"]


def test_blanks_say_what_they_mean():
    df = pd.DataFrame(
        {
            "net_zero_year": [2060.0, np.nan],
            "loss_first": [1.25, np.nan],
            "version": ["v1", "rejected, no version"],
            "superseded_by": [6.0, np.nan],
            "hint": ["fix it", None],
        }
    )
    shown, config = tables.prepare(df)
    assert shown["net-zero year"].tolist() == ["2060", "not reached"]
    assert shown["GDP loss first [%]"].tolist() == ["1.25", "no reference"]
    # the version arrives as the label the CLI prints too (store.exports.version_label), shown as it is
    assert shown["version"].tolist() == ["v1", "rejected, no version"]
    assert shown["replaced by submission"].tolist() == ["6", "current"]
    assert shown["how to fix"].tolist() == ["fix it", ""]
    assert config["GDP loss first [%]"]["alignment"] == "right"  # numbers written as text stay right-aligned
    # without a blank nothing is rewritten: numbers stay numbers and sort as numbers
    full, _ = tables.prepare(pd.DataFrame({"loss_first": [1.25, 2.5]}))
    assert full["GDP loss first [%]"].dtype.kind == "f"


def test_net_zero_text_names_the_last_year_searched():
    years = pd.Series([2073.01, np.nan, 2020.0])
    text = net_zero_text(years, pd.Series([2100, 2100, 2100]), pd.Series([None, None, "already at or below zero"]))
    assert text.tolist() == ["2074", "not reached by 2100", "2020 (already ≤ 0)"]


def test_findings_put_message_and_hint_first_and_show_the_cell_as_found():
    df = pd.DataFrame(
        {
            "rule": ["unknown-region"],
            "severity": ["error"],
            "path": ["a.csv"],
            "line": [4],
            "year": [2030],
            "value": ["Atlantis"],
            "message": ["region Atlantis is not in the contract"],
            "hint": ["Did you mean Ardena?"],
            "column_name": ["region"],
        }
    )
    shown, config = tables.prepare(df, first=tables.FINDINGS_FIRST, known=tables.FINDING_COLUMNS)
    assert list(shown.columns)[:4] == ["message", "how to fix", "severity", "rule"]
    assert {"file", "line", "value found", "column"} <= set(shown.columns)
    assert config["message"]["width"] == "large"


def test_page_labels_override_and_unknown_columns_keep_their_name():
    df = pd.DataFrame({"band_value": [1.0], "cagr_to": [np.nan], "ambition": ["max"], "k": [3]})
    shown, config = tables.prepare(df, columns={"band_value": "2030 [Mt]", "cagr_to": "CAGR 2020–2030 [%/yr]"})
    assert list(shown.columns) == ["2030 [Mt]", "CAGR 2020–2030 [%/yr]", "ambition", "k"]
    assert shown["CAGR 2020–2030 [%/yr]"].tolist() == ["undefined (a value ≤ 0)"]  # the override keeps the blank
    assert config["k"]["type_config"]["format"] == "%d"


def _bands() -> pd.DataFrame:
    rows = []
    for b, label in enumerate(LABELS):
        for year in (2020, 2050, 2100):
            m = 100.0 - 20 * b - year / 100
            rows.append(
                {"band_label": label, "year": year, "n": 4, "median": m, "q05": m - 9, "q25": m - 3}
                | {"q75": m + 3, "q95": m + 9, "unit": "Mt"}
            )
    return pd.DataFrame(rows)


def _scenarios(names: list[str]) -> pd.DataFrame:
    return pd.DataFrame(
        [
            {"model": n.split(" | ")[0], "scenario": n.split(" | ")[1], "label": n, "year": y, "value": 50.0 + i + y}
            for i, n in enumerate(names)
            for y in (2020, 2100)
        ]
    )


def test_pathway_legend_names_the_two_shades_and_each_single_scenario():
    names = ["Ferrow | act-bold", "Halvik | act-deep", "Pellin | act-max"]
    chart = charts.pathway(_bands(), LABELS, "emissions.ghg", "Mt", _scenarios(names))
    spec = chart.to_dict()
    (opacity,) = [la["encoding"]["opacity"] for la in spec["layer"] if "opacity" in la.get("encoding", {})]
    assert opacity["scale"]["domain"] == ["5–95 %", "25–75 %"]
    low, high = opacity["scale"]["range"]
    assert low < high  # the wider range is the lighter shade
    assert opacity["legend"]["title"] == "range of the band's scenarios"
    (dash,) = [la["encoding"]["strokeDash"] for la in spec["layer"] if "strokeDash" in la.get("encoding", {})]
    assert dash["scale"]["domain"] == names and len({tuple(p) for p in dash["scale"]["range"][:3]}) == 3
    # rendered (vl-convert, the engine of the PNG/SVG downloads): the legend texts are in the picture
    svg = vl_convert.vegalite_to_svg(chart.to_json())
    texts = set(re.findall(r"<text[^>]*>([^<]*)</text>", svg))
    assert {"5–95 %", "25–75 %", *names, *LABELS} <= texts


def test_histogram_counts_whole_scenarios_and_box_plot_labels_are_horizontal():
    df = pd.DataFrame({"value": [10.0, 20.0, 50.0], "band_label": ["low", "middle", "high"]})
    chart = charts.histogram(df, [15.0, 30.0], LABELS, "x", "Mt")
    assert chart.to_dict()["layer"][0]["encoding"]["y"]["axis"] == {"format": "d", "tickMinStep": 1}
    # rendered with one scenario in the tallest bar (Vega's default ticks there are 0.0, 0.1, ... 1.0): whole numbers
    svg = charts.to_svg(chart)
    ticks = re.findall(r"<text[^>]*>([^<]*)</text>", svg)
    assert "1" in ticks and not [t for t in ticks if re.fullmatch(r"\d+\.\d+", t)]
    rates = pd.DataFrame(
        {"band_label": LABELS, "value": [1.0, 2.0, 3.0], "rate": "CAGR [%/yr]", "model": "M", "scenario": "s"}
        | {"band_value": [1.0, 2.0, 3.0]}
    )
    box = charts.rates_box(rates, LABELS, "t").to_dict()
    assert {la["encoding"]["x"]["axis"]["labelAngle"] for la in box["spec"]["layer"]} == {0}
    summary = pd.DataFrame(
        {"band_label": LABELS, "year": 2050, "median": [1.0, 2.0, 3.0], "q25": 0.5, "q75": 3.5, "n": 4}
        | {"metric": "NPV", "panel": "NPV [USD]"}
    )
    costs = charts.cost_ranges(summary, LABELS).to_dict()
    assert {la["encoding"]["x"]["axis"]["labelAngle"] for la in costs["spec"]["layer"]} == {0}


def _luminance(hex_colour: str) -> float:
    """Relative luminance, W3C WCAG 2.1 (section 'relative luminance'): sRGB linearised, 0.2126 R + 0.7152 G +
    0.0722 B."""
    rgb = [int(hex_colour[i : i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


@pytest.mark.parametrize("n_bands", [2, 3, 6])
def test_band_colours_are_okabe_ito_and_none_is_pale(n_bands):
    colours = charts.band_scale(queries.band_labels(n_bands)).to_dict()["range"]
    # Okabe & Ito's eight colours, as printed by Wong, Nature Methods 8:441 (2011), Fig. 2 (from memory)
    okabe_ito = {"#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000"}
    assert set(colours) <= okabe_ito and len(set(colours)) == n_bands
    for c in colours:
        # WCAG 2.1 contrast ratio against the white page, (L1 + 0.05) / (L2 + 0.05); 2:1 is a threshold of our own
        # (common practice for graphics is 3:1, which Okabe-Ito's orange misses): the former middle band #fdae61
        # had 1.7:1 and looked disabled
        assert 1.05 / (_luminance(c) + 0.05) >= 2.0, c


def test_former_pale_middle_band_fails_the_contrast_check():
    assert 1.05 / (_luminance("#fdae61") + 0.05) < 2.0  # the check above can fail
