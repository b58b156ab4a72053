"""The outcome filter, model weighting, and the Budgets and Delay pages in AppTest, against SQL on the same file."""

from __future__ import annotations

from math import lcm
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from test_dashboard_app import frame

from milepost.dashboard.headlines import sig
from milepost.dashboard.ui import fmt

from dashboard_fixtures import milestone_values, numpy_bands, open_app

CLASS_2C = {"outcome": "class", "class": "2", "lik": "67%"}


def in_class(sql, level: float | None, likelihood: str = "67%") -> set[tuple[str, str]]:
    """(model, scenario) whose budget_level at the likelihood is `level` (None: above every budget), by SQL."""
    rows = sql.execute(
        "SELECT model, scenario, value FROM current_indicators WHERE kind = 'budget_level' AND variable = ?",
        [likelihood],
    ).fetchall()
    return {(m, s) for m, s, v in rows if (v is None if level is None else v == level)}


def selection(sql, keys: set[tuple[str, str]], year: int = 2030) -> pd.DataFrame:
    """The band selection restricted to `keys`, with numpy tercile bands."""
    sel = milestone_values(sql, "emissions.ghg", year)
    sel = sel[[(m, s) in keys for m, s in zip(sel["model"], sel["scenario"], strict=True)]].reset_index(drop=True)
    _, band = numpy_bands(sel["value"].to_numpy())
    return sel.assign(band=band)


def keys_of(df: pd.DataFrame) -> set[tuple[str, str]]:
    return set(zip(df["model"], df["scenario"], strict=True))


def indicator(sql, kind: str, variable: str, year_from: int, year_to: int) -> pd.DataFrame:
    return sql.execute(
        """SELECT model, scenario, value AS x FROM current_indicators
           WHERE kind = ? AND variable = ? AND region = 'World' AND year_from = ? AND year_to = ?""",
        [kind, variable, year_from, year_to],
    ).df()


def test_outcome_class_on_rates_and_costs_matches_sql(demo_db, sql):
    at = open_app(demo_db, "views/rates.py")
    at.selectbox(key="outcome_mode").set_value("class").run()
    at.multiselect(key="outcome_classes").set_value(["2"]).run()
    assert not at.exception
    keys = in_class(sql, 2.0)
    sel = selection(sql, keys).merge(indicator(sql, "rate_cagr", "emissions.ghg", 2030, 2050), on=["model", "scenario"])
    hi, lo = (float(np.median(sel.loc[sel["band"] == b, "x"])) for b in (2, 0))
    text = at.info[0].value
    assert text.startswith("Within the 2 °C budget (67 %): Median CAGR 2030–2050")
    assert f"high band {fmt(hi)} %/yr vs low band {fmt(lo)} %/yr" in text
    assert hi < lo  # within one outcome class, the high-2030 band cuts faster afterwards (the demo's design)
    captions = " ".join(c.value for c in at.caption)
    assert "Outcome: within the 2 °C budget (67 %)" in captions and f"{len(keys)} scenarios" in captions
    assert at.query_params["outcome"] in ("class", ["class"]) and at.query_params["class"] in ("2", ["2"])

    at.switch_page("views/costs.py").run()  # the outcome stays selected on the next page
    assert at.multiselect(key="outcome_classes").value == ["2"]
    npv = selection(sql, keys).merge(indicator(sql, "npv", "cost.abatement", 2020, 2100), on=["model", "scenario"])
    nhi, nlo = (npv.loc[npv["band"] == b, "x"] for b in (2, 0))
    text = at.info[0].value
    assert text.startswith("Within the 2 °C budget (67 %): Median costs, high vs low band")
    want = f"NPV of abatement cost 2020–2100 {sig(float(np.median(nhi)))} vs {sig(float(np.median(nlo)))}"
    assert want in text and f"n = {len(nhi)} vs {len(nlo)}" in text
    assert np.median(nhi) > np.median(nlo)
    assert "What delay costs" not in text  # that is read pair by pair on the Delay page


def test_outcome_from_the_url_and_all_scenarios_by_default(demo_db, sql):
    at = open_app(demo_db, params={**CLASS_2C, "class": ["1.7", "above"]})
    keys = in_class(sql, 1.7) | in_class(sql, None)
    shown = frame(at, "2030 [")
    want = selection(sql, keys)
    assert keys_of(shown) == keys_of(want)
    assert any("within the 1.7 °C budget (67 %) or above every budget (67 %)" in c.value for c in at.caption)
    plain = open_app(demo_db)
    assert plain.selectbox(key="outcome_mode").value == "all"
    assert len(frame(plain, "2030 [")) == len(milestone_values(sql, "emissions.ghg", 2030))
    assert any("Outcome: all scenarios" in c.value for c in plain.caption)


def test_outcome_range_of_an_indicator(demo_db, sql):
    at = open_app(
        demo_db, params={"outcome": "range", "ind": "cumulative_net_zero|emissions.co2||", "lo": "700", "hi": "1150"}
    )
    assert at.number_input(key="outcome_lo").value == 700 and at.number_input(key="outcome_hi").value == 1150
    cum = sql.execute(
        "SELECT model, scenario, value FROM current_indicators WHERE kind = 'cumulative_net_zero' AND region = 'World'"
    ).fetchall()
    keys = {(m, s) for m, s, v in cum if v is not None and 700 <= v <= 1150}
    shown = frame(at, "2030 [")
    assert keys_of(shown) == keys & keys_of(milestone_values(sql, "emissions.ghg", 2030))
    at.number_input(key="outcome_hi").set_value(900.0).run()
    assert len(frame(at, "2030 [")) < len(shown)


def _weighted_median_by_repetition(values: pd.Series, models: pd.Series) -> float:
    """Each model weighted equally: repeat each value (lcm of counts / its model's count) times and take numpy's
    averaged_inverted_cdf median of the repeated sample (equal to the weighted type-2 median)."""
    counts = models.map(models.value_counts())
    k = lcm(*counts.unique().astype(int).tolist())
    return float(
        np.quantile(np.repeat(values.to_numpy(), (k // counts).to_numpy()), 0.5, method="averaged_inverted_cdf")
    )


def test_model_weighting_of_band_medians(demo_db, sql):
    at = open_app(demo_db, "views/rates.py", params={"weight": "model"})
    assert at.checkbox(key="band_weight").value is True
    sel = milestone_values(sql, "emissions.ghg", 2030)
    _, band = numpy_bands(sel["value"].to_numpy())
    rates = sel.assign(band=band).merge(indicator(sql, "rate_cagr", "emissions.ghg", 2030, 2050))
    table = frame(at, "interquartile range")
    for b, name in enumerate(["low", "middle", "high"]):
        part = rates[rates["band"] == b].dropna(subset=["x"])
        row = table[(table["rate"] == "CAGR") & (table["band"] == name)].iloc[0]
        assert row["median"] == pytest.approx(_weighted_median_by_repetition(part["x"], part["model"]))
        assert row["models"] == part["model"].nunique()
    assert any("statistics weight each model equally" in c.value for c in at.caption)


def test_budgets_page_matches_sql(demo_db, sql):
    at = open_app(demo_db, "views/budgets.py", params=CLASS_2C)
    captions = " ".join(c.value for c in at.caption)
    assert "indicative" in captions and "not a climate-model assessment" in captions
    table = frame(at, "CO2 to net zero")
    cum = sql.execute(
        """SELECT model, scenario, value, year_to FROM current_indicators
           WHERE kind = 'cumulative_net_zero' AND region = 'World'"""
    ).df()
    got = table.merge(cum, on=["model", "scenario"])
    assert len(got) == len(table) == len(selection(sql, in_class(sql, 2.0)))
    np.testing.assert_allclose(got["CO2 to net zero [Gt CO2]"], got["value"])
    assert (got["summed to"] == got["year_to"]).all()
    # every scenario: the net-zero year as a whole number from SQL, or "not reached by" the last year summed
    every = frame(open_app(demo_db, "views/budgets.py"), "net-zero year")
    nz = sql.execute(
        """SELECT model, scenario, value AS nz FROM current_indicators
           WHERE kind = 'net_zero_year' AND variable = 'emissions.co2' AND region = 'World'"""
    ).df()
    every = every.merge(nz, on=["model", "scenario"], how="left")
    never = every["nz"].isna()
    assert never.any() and (~never).any()
    assert (every.loc[never, "net-zero year"] == "not reached by " + every.loc[never, "summed to"].astype(str)).all()
    assert (every.loc[~never, "net-zero year"] == every.loc[~never, "nz"].astype(int).astype(str)).all()
    assert (got["value"] > 700).all() and (got["value"] <= 1150).all()  # AR6 WG1 Table SPM.2 at 67 %
    # the chart's data travel as Arrow IPC streams beside the spec
    frames = [
        pa.ipc.open_stream(d.data.data).read_all().to_pandas() for d in at.get("vega_lite_chart")[0].proto.datasets
    ]
    lines = next(f for f in frames if "budget" in f.columns)
    assert sorted(lines["budget"]) == [400, 700, 1150]


def test_delay_page_pairs_and_model_counts(demo_db, sql, tmp_path: Path):
    from typer.testing import CliRunner

    from milepost.validate.cli import app

    at = open_app(demo_db, "views/delay.py", params=CLASS_2C)
    out = tmp_path / "pairs.csv"
    res = CliRunner().invoke(app, ["export", "--db", str(demo_db), "--what", "pairs", "-f", "csv", "-o", str(out)])
    assert res.exit_code == 0
    exported = pd.read_csv(out)
    keys = in_class(sql, 2.0)
    both = exported[
        [
            (m, a) in keys and (m, b) in keys
            for m, a, b in exported[["model", "scenario_first", "scenario_later"]].values
        ]
    ]
    npv = both[(both["kind"] == "npv") & (both["region"] == "World") & (both["year_to"] == 2100)]
    shown = frame(at, "NPV ratio")
    got = shown.set_index(["model", "later"])["NPV ratio"].sort_index()
    want = npv.set_index(["model", "scenario_later"])["ratio"].sort_index()
    np.testing.assert_allclose(got.to_numpy(), want.to_numpy())
    assert (got > 1).all()  # every later start costs more than its sibling within the class
    rates = both[(both["kind"] == "rate_cagr") & (both["variable"] == "emissions.ghg") & (both["year_from"] == 2030)]
    rates = rates[(rates["year_to"] == 2050) & (rates["region"] == "World")]
    assert (rates["delta"] < 0).all()  # and cuts faster after 2030
    summary = frame(at, "model-balanced median")
    per_group = summary.groupby("group")["models"].max()
    want_models = npv.groupby("group")["model"].nunique()
    assert per_group.drop("all pairs").to_dict() == want_models.to_dict()
    thin = set(summary.loc[summary["evidence"] == "thin evidence", "group"])
    assert thin == {g for g, n in want_models.items() if n < 3}
    headline = at.info[0].value
    assert headline.startswith("Within the 2 °C budget (67 %): What delay costs, pair by pair")
    assert f"across {len(npv)} pairs from {npv['model'].nunique()} models" in headline


def test_pathway_medians_with_model_weighting(demo_db, sql):
    at = open_app(demo_db, "views/pathways.py", params={**CLASS_2C, "weight": "model"})
    table = frame(at, "95th percentile")
    median = next(c for c in table.columns if c.startswith("median ["))
    sel = selection(sql, in_class(sql, 2.0))
    pts = sql.execute(
        "SELECT model, scenario, year, value FROM current_data WHERE variable = 'emissions.ghg' AND region = 'World'"
    ).df()
    pts = sel[["model", "scenario", "band"]].merge(pts, on=["model", "scenario"])
    names = ["low", "middle", "high"]
    for (band, year), part in pts[pts["year"].isin([2030, 2050, 2100])].groupby(["band", "year"]):
        row = table[(table["band"] == names[band]) & (table["year"] == year)].iloc[0]
        assert row[median] == pytest.approx(_weighted_median_by_repetition(part["value"], part["model"]))
        assert row["scenarios"] == len(part)


def test_outcome_modes_without_a_choice_yet_speak_of_all_scenarios(demo_db, sql):
    n = len(milestone_values(sql, "emissions.ghg", 2030))
    for params in ({"outcome": "class"}, {"outcome": "range"}):
        at = open_app(demo_db, params=params)
        assert len(frame(at, "2030 [")) == n
        assert any("Outcome: all scenarios (no" in c.value for c in at.caption)


def test_outcome_and_pairs_follow_the_harmonised_basis(demo_db, sql, tmp_path: Path):
    """With the Values switch on harmonised, the outcome classes and the pairs are read from harmonised indicators."""
    at = open_app(demo_db, "views/delay.py", params={**CLASS_2C, "basis": "harmonised"})
    rows = sql.execute(
        "SELECT model, scenario, value FROM current_indicators_by_basis"
        " WHERE basis = 'harmonised' AND kind = 'budget_level' AND variable = '67%'"
    ).fetchall()
    keys = {(m, s) for m, s, v in rows if v == 2.0}
    assert keys
    assert any(f"{len(keys)} scenarios" in c.value for c in at.caption)
    npv = sql.execute(
        "SELECT model, scenario, value FROM current_indicators_by_basis WHERE basis = 'harmonised' AND kind = 'npv'"
        " AND variable = 'cost.abatement' AND region = 'World' AND year_from = 2020 AND year_to = 2100"
    ).df()
    shown = frame(at, "NPV ratio")
    npv = npv.set_index(["model", "scenario"])["value"]
    want = [npv[(m, b)] / npv[(m, a)] for m, a, b in shown[["model", "first", "later"]].to_numpy()]
    np.testing.assert_allclose(shown["NPV ratio"].to_numpy(), want)
    assert {(m, a) for m, a in shown[["model", "first"]].to_numpy()} <= keys

    from typer.testing import CliRunner

    from milepost.validate.cli import app

    out = tmp_path / "pairs.csv"
    res = CliRunner().invoke(
        app, ["export", "--db", str(demo_db), "--what", "pairs", "-f", "csv", "-o", str(out), "--basis", "harmonised"]
    )
    assert res.exit_code == 0, res.output
    exported = pd.read_csv(out)
    got = exported[(exported["kind"] == "npv") & (exported["region"] == "World") & (exported["year_to"] == 2100)]
    for m, a, b, ratio in got[["model", "scenario_first", "scenario_later", "ratio"]].to_numpy():
        assert ratio == pytest.approx(npv[(m, b)] / npv[(m, a)])
