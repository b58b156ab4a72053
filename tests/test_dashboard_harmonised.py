"""The dashboard's raw/harmonised switch and the Pathways page with both, on the harmonised demo database."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from streamlit.testing.v1 import AppTest

from milepost.dashboard import queries
from milepost.example_db.generate import CONTRACT_DIR
from milepost.schema.contract import load
from milepost.validate.store.database import Reader

from dashboard_fixtures import open_app

REFERENCE = {(r.region, r.variable): r.value for r in load(CONTRACT_DIR).reference}


@pytest.fixture
def con(demo_db: Path):
    with Reader(demo_db) as reader:
        yield reader.con


def pathways(db: Path, variable: str, region: str) -> AppTest:
    at = open_app(db, "views/pathways.py")
    at.selectbox(key="path_variable").set_value(variable).run()
    at.selectbox(key="path_region").set_value(region).run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def test_choices_offer_both_bases(con):
    assert queries.choices(con).bases == ["raw", "harmonised"]


def test_bands_on_the_harmonised_basis_use_the_harmonised_milestone_values(con, sql):
    sel = queries.Selection(basis="harmonised", year=2030)
    got = queries.selected(con, sel)
    want = sql.execute(
        "SELECT model, scenario, value FROM current_indicators_by_basis WHERE basis = 'harmonised' "
        "AND kind = 'value' AND variable = 'emissions.ghg' AND region = 'World' AND year_from = 2030"
    ).df()
    merged = got.merge(want, on=["model", "scenario"])
    assert len(merged) == len(got) > 0
    assert merged["band_value"].to_numpy() == pytest.approx(merged["value"].to_numpy())
    raw = queries.selected(con, queries.Selection(year=2030)).merge(want, on=["model", "scenario"])
    assert not np.allclose(raw["band_value"], raw["value"])  # the raw milestone values differ
    # harmonised, every scenario starts at the reference value of World GHG (rebuilt from harmonised gases)
    base = queries.selected(con, queries.Selection(basis="harmonised", year=2020))
    assert np.allclose(base["band_value"], REFERENCE[("World", "emissions.ghg")], rtol=1e-9)


def test_harmonised_pathways_start_at_the_reference_and_raw_ones_do_not(con):
    sel = queries.Selection()
    raw = queries.pathway_bands(con, sel, "emissions.co2", "Belmora", "raw")
    harm = queries.pathway_bands(con, sel, "emissions.co2", "Belmora", "harmonised")
    h2020 = harm[harm["year"] == 2020]
    assert np.allclose(h2020[["q05", "q95"]].to_numpy(), REFERENCE[("Belmora", "emissions.co2")], rtol=1e-9)
    r2020 = raw[raw["year"] == 2020]
    assert (r2020["q95"] - r2020["q05"]).max() > 1  # models differ in the base year before harmonisation
    # from the convergence year (2050) on, harmonised equals raw
    late = raw[raw["year"] >= 2050].merge(harm, on=["band", "year"], suffixes=("_r", "_h"))
    assert np.allclose(late["median_r"], late["median_h"], rtol=1e-9)
    methods = queries.harmonisation_methods(con, sel, "emissions.co2", "Belmora")
    assert set(methods["method"]) == {"converging-ratio"}
    assert np.allclose(methods["factor"], methods["reference_value"] / methods["base_value"])


def test_pathways_page_draws_raw_and_harmonised_side_by_side(demo_db):
    at = pathways(demo_db, "emissions.co2", "Ardena")
    assert [s.value for s in at.subheader][:2] == ["As submitted", "Harmonised"]
    specs = [json.loads(c.proto.spec) for c in at.get("vega_lite_chart")]
    assert len(specs) == 2
    domains = [s["layer"][0]["encoding"]["y"]["scale"]["domain"] for s in specs]
    assert domains[0] == domains[1]  # one value axis for both
    table = next(d.value for d in at.dataframe if "note" in d.value.columns)
    assert set(table["method"]) == {"converging-ratio"}
    assert (table["convergence year"] == 2050).all()
    assert any("per method: converging-ratio" in c.value and "median factor" in c.value for c in at.caption)
    assert any("not forecasts" in c.value and "Harmonised values" in c.value for c in at.caption)
    bands = next(d.value for d in at.dataframe if any("95th percentile" in c for c in d.value.columns))
    assert set(bands["values"]) == {"as submitted", "harmonised"}


def test_a_variable_left_out_of_the_harmonisation_says_why(demo_db):
    at = pathways(demo_db, "emissions.co2.land", "Ardena")
    assert len(at.get("vega_lite_chart")) == 1
    assert any("left it out" in i.value for i in at.info)
    table = next(d.value for d in at.dataframe if "note" in d.value.columns)
    assert set(table["method"]) == {"left-out"}
    assert table["note"].str.contains("below emissions.co2 in Ardena").all()


def test_the_switch_lives_in_the_url_and_changes_every_results_page(demo_db, sql):
    at = open_app(demo_db, params={"year": "2030"})
    assert at.radio(key="band_basis").value == "raw"
    at.radio(key="band_basis").set_value("harmonised").run()
    assert at.query_params["basis"] == "harmonised"
    shown = next(d.value for d in at.dataframe if any("2030 [" in str(c) for c in d.value.columns))
    want = sql.execute(
        "SELECT model, scenario, value FROM current_indicators_by_basis WHERE basis = 'harmonised' "
        "AND kind = 'value' AND variable = 'emissions.ghg' AND region = 'World' AND year_from = 2030"
    ).df()
    merged = shown.merge(want, on=["model", "scenario"])
    assert len(merged) == len(shown) > 0
    column = next(c for c in shown.columns if str(c).startswith("2030 ["))
    assert np.allclose(merged[column], merged["value"])
    base = next(c for c in shown.columns if str(c).startswith("2020 ["))
    assert np.allclose(shown[base], REFERENCE[("World", "emissions.ghg")])
    at.switch_page("views/rates.py").run()
    assert not at.exception and at.radio(key="band_basis").value == "harmonised"
    restored = open_app(demo_db, params={"basis": "harmonised"})
    assert restored.radio(key="band_basis").value == "harmonised"
