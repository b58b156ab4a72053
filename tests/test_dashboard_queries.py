"""The dashboard's query functions on the ingested demo database, checked against numpy and direct SQL."""

from __future__ import annotations

import os
import shutil
import struct
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

from milepost.dashboard import charts, connection, contracts, queries
from milepost.example_db.generate import CONTRACT_DIR
from milepost.validate.store.database import Reader

from dashboard_fixtures import milestone_values, numpy_bands


@pytest.fixture
def con(demo_db: Path):
    with Reader(demo_db) as reader:
        yield reader.con


def test_choices_list_what_the_database_holds(con, sql):
    ch = queries.choices(con)
    assert ch.base_year == 2020
    assert ch.milestones == [2030, 2050, 2100]  # the demo contract's milestones (example_db/contract)
    assert ch.regions[0] == "World"
    assert ch.models == sorted(m for (m,) in sql.execute("SELECT DISTINCT model FROM current_scenarios").fetchall())
    assert "Vossel" not in ch.models  # the rejected submission stores no scenarios
    assert {"family", "ambition"} <= set(ch.attributes) and "reference" not in ch.attributes


def test_default_bands_are_numpy_terciles_and_each_scenario_lands_in_its_band(con, sql):
    sel = queries.Selection()
    got = queries.screen_table(con, sel, 2020, 2050)
    want = milestone_values(sql, "emissions.ghg", 2030)
    # numpy.quantile (linear interpolation, numpy's default) is the reference for terciles
    edges, band = numpy_bands(want["value"].to_numpy())
    assert queries.band_edges(con, sel) == pytest.approx(edges.tolist(), rel=1e-12)
    merged = got.merge(want.assign(expected=band), on=["model", "scenario"], validate="one_to_one")
    assert len(merged) == len(want) == len(got)
    assert (merged["band"] == merged["expected"]).all()
    assert merged["value_x"].to_numpy() == pytest.approx(merged["value_y"].to_numpy())


def test_user_edges_filters_and_reference_scenarios(con, sql):
    sel = queries.Selection(year=2050, edges=(20000.0, 5000.0), models=("Ferrow", "Ormund"))
    got = queries.selected(con, sel)
    want = milestone_values(sql, "emissions.ghg", 2050, models=("Ferrow", "Ormund"))
    _, band = numpy_bands(want["value"].to_numpy(), [5000.0, 20000.0])
    assert queries.band_edges(con, sel) == [5000.0, 20000.0]
    assert sorted(zip(got["scenario"] + got["model"], got["band"], strict=True)) == sorted(
        zip(want["scenario"] + want["model"], band, strict=True)
    )
    assert set(got["model"]) == {"Ferrow", "Ormund"}

    with_refs = queries.selected(con, queries.Selection(include_references=True))
    assert len(with_refs) == len(milestone_values(sql, "emissions.ghg", 2030, with_references=True))
    assert len(with_refs) > len(queries.selected(con, queries.Selection()))

    delayed = queries.selected(con, queries.Selection(attribute="family", attribute_values=("delayed",)))
    expect = sql.execute("""SELECT count(*) FROM current_scenarios
                            WHERE json_extract_string(attributes, '$.family') = 'delayed'""").fetchall()[0][0]
    assert 0 < len(delayed) == expect


def test_rates_are_the_cagr_of_the_stored_series(con, sql):
    sel = queries.Selection()
    df = queries.rates(con, sel, 2030, 2050)
    cagr = df[df["kind"] == "rate_cagr"].set_index(["model", "scenario"])["value"]
    pts = sql.execute("""SELECT model, scenario, year, value FROM current_data
                         WHERE variable = 'emissions.ghg' AND region = 'World' AND year IN (2030, 2050)""").df()
    wide = pts.pivot(index=["model", "scenario"], columns="year", values="value").loc[cagr.index]
    # CAGR = (V_end/V_start)^(1/n) - 1 (US BEA regional data definitions, "compound annual growth rate"); the demo
    # reports 2030 and 2050 directly, so no interpolation is involved
    v0, v1 = wide[2030].to_numpy(), wide[2050].to_numpy()
    expected = np.where((v0 > 0) & (v1 > 0), ((v1 / v0) ** (1 / 20) - 1) * 100, np.nan)
    np.testing.assert_allclose(cagr.to_numpy(dtype=float), expected, rtol=1e-9, equal_nan=True)
    assert set(df["kind"]) == set(queries.RATE_KINDS)
    # the linear rates from the same two values and the base year (2020 is reported too): definitions in
    # schema/indicators.toml, computed here with numpy
    base = (
        sql.execute("""SELECT model, scenario, value FROM current_data WHERE variable = 'emissions.ghg'
                          AND region = 'World' AND year = 2020""")
        .df()
        .set_index(["model", "scenario"])["value"]
    )
    vb = base.loc[cagr.index].to_numpy()
    by_kind = {k: g.set_index(["model", "scenario"])["value"].loc[cagr.index].to_numpy() for k, g in df.groupby("kind")}
    np.testing.assert_allclose(by_kind["rate_absolute"], (v1 - v0) / 20, rtol=1e-9)
    np.testing.assert_allclose(by_kind["rate_linear"], (v1 - v0) / (np.abs(v0) * 20) * 100, rtol=1e-9)
    np.testing.assert_allclose(by_kind["rate_linear_base"], (v1 - v0) / (np.abs(vb) * 20) * 100, rtol=1e-9)
    assert queries.rate_periods(con, "emissions.ghg", "World") == [
        (2020, 2030),
        (2020, 2050),
        (2020, 2100),
        (2030, 2050),
        (2050, 2100),
    ]


def test_summarise_matches_numpy_percentiles(con):
    df = queries.rates(con, queries.Selection(), 2030, 2050)
    s = queries.summarise(df, ["kind", "band"])
    for (kind, band), grp in df.groupby(["kind", "band"]):
        v = grp["value"].dropna().to_numpy()
        row = s[(s["kind"] == kind) & (s["band"] == band)].iloc[0]
        assert row["n"] == len(v) and row["n_missing"] == grp["value"].isna().sum()
        # numpy.percentile, default linear method, as the reference for median and quartiles
        assert row["median"] == pytest.approx(np.median(v))
        assert row["q25"] == pytest.approx(np.percentile(v, 25))
        assert row["q75"] == pytest.approx(np.percentile(v, 75))


def test_costs_and_ratio_of_band_medians(con, sql):
    sel = queries.Selection()
    df = queries.costs(con, sel, 2020)
    assert {("loss_pct", "gdp.mer"), ("npv", "cost.abatement"), ("value", "price.carbon")} <= set(
        zip(df["kind"], df["variable"], strict=True)
    )
    assert not ((df["kind"] == "value") & (df["year"] == 2020)).any()  # carbon price at milestones only
    by = ["kind", "variable", "year"]
    ratios = queries.band_ratio(queries.summarise(df, [*by, "band"]), by, top=2, bottom=0)
    r = ratios[(ratios["kind"] == "npv") & (ratios["year"] == 2100)].iloc[0]
    bands = queries.selected(con, sel).set_index(["model", "scenario"])["band"]
    npv = sql.execute("""SELECT model, scenario, value FROM current_indicators
                         WHERE kind = 'npv' AND region = 'World' AND year_to = 2100""").df()
    npv = npv.join(bands, on=["model", "scenario"], how="inner")
    hi, lo = npv.loc[npv["band"] == 2, "value"], npv.loc[npv["band"] == 0, "value"]
    assert (r["n_top"], r["n_bottom"]) == (len(hi), len(lo))
    assert r["median_top"] == pytest.approx(np.median(hi))
    assert r["ratio"] == pytest.approx(np.median(hi) / np.median(lo))


def test_band_ratio_needs_a_positive_denominator():
    s = pd.DataFrame(
        {"m": ["a", "a", "b", "b"], "band": [0, 1, 0, 1], "median": [2.0, 3.0, 0.0, 1.0], "n": [4, 5, 4, 5]}
    )
    r = queries.band_ratio(s, ["m"], top=1, bottom=0).set_index("m")
    assert r.loc["a", "ratio"] == 1.5 and r["ratio"].isna()["b"]
    assert r.loc["a", "n_top"] == 5 and r.loc["a", "n_bottom"] == 4


def test_pathway_quantiles_match_numpy(con, sql):
    sel = queries.Selection()
    got = queries.pathway_bands(con, sel, "emissions.co2", "Belmora")
    bands = queries.selected(con, sel).set_index(["model", "scenario"])["band"]
    pts = sql.execute("""SELECT model, scenario, year, value FROM current_data
                         WHERE variable = 'emissions.co2' AND region = 'Belmora'""").df()
    pts = pts.join(bands, on=["model", "scenario"], how="inner")
    for (band, year), grp in pts.groupby(["band", "year"]):
        row = got[(got["band"] == band) & (got["year"] == year)].iloc[0]
        q = np.quantile(grp["value"].to_numpy(), [0.05, 0.25, 0.5, 0.75, 0.95])  # numpy reference
        assert [row["q05"], row["q25"], row["median"], row["q75"], row["q95"]] == pytest.approx(q.tolist())
        assert row["n"] == len(grp)
    keys = [("Ferrow", "act-bold"), ("Halvik", "wait-firm")]
    one = queries.scenario_series(con, "emissions.co2", "Belmora", keys)
    assert set(zip(one["model"], one["scenario"], strict=True)) == set(keys)
    assert len(one) == len(pts[pts.set_index(["model", "scenario"]).index.isin(keys)])


def test_submissions_versions_and_findings(con, sql):
    subs = queries.submissions(con)
    assert len(subs) == sql.execute("SELECT count(*) FROM submissions").fetchall()[0][0]
    halvik = subs[subs["model"] == "Halvik"].sort_values("id")
    assert halvik["version"].tolist() == [1, 2]  # the demo's revision is the second Halvik submission
    rejected = int(subs.loc[subs["status"] == "rejected", "id"].iloc[0])
    counts = queries.rule_counts(con)
    mine = counts[counts["submission_id"] == rejected]
    assert (
        mine["n"].sum()
        == sql.execute("SELECT count(*) FROM findings WHERE submission_id = ?", [rejected]).fetchall()[0][0]
    )
    rule = mine.sort_values("n").iloc[-1]["rule"]
    found = queries.findings(con, rejected, [rule])
    assert len(found) == int(mine.loc[mine["rule"] == rule, "n"].sum()) and set(found["rule"]) == {rule}
    assert queries.findings(con, rejected, [], ["note"]).empty or set(
        queries.findings(con, rejected, [], ["note"])["severity"]
    ) == {"note"}
    assert queries.contract_name(con) == "lowmoor-demo"


def test_connection_is_read_only_and_follows_a_replaced_file(demo_db: Path, tmp_path: Path):
    live = tmp_path / "live.duckdb"
    shutil.copyfile(demo_db, live)
    first = connection.connection(live)
    cur = connection.cursor(live)
    with pytest.raises(duckdb.InvalidInputException):
        cur.execute("DELETE FROM submissions")
    before = cur.execute("SELECT count(*) FROM submissions").fetchall()[0][0]

    # a writer builds a new version beside the live file and os.replace-s it in, as ingest does
    new = tmp_path / "live.duckdb.tmp-test"
    shutil.copyfile(demo_db, new)
    with duckdb.connect(str(new)) as w:
        w.execute("DELETE FROM submissions WHERE status = 'rejected'")
    os.replace(new, live)

    assert connection.connection(live) is not first
    after = connection.cursor(live).execute("SELECT count(*) FROM submissions").fetchall()[0][0]
    assert after == before - 1
    # a query already running on the old version keeps its snapshot
    assert cur.execute("SELECT count(*) FROM submissions").fetchall()[0][0] == before
    assert connection.connection(live) is connection.connection(live)  # unchanged file: cached


def test_reference_value_comes_from_the_demo_contract():
    found = contracts.find("lowmoor-demo")
    assert found.contract is not None and found.contract.name == "lowmoor-demo"
    ref = pd.read_csv(CONTRACT_DIR / "reference.csv")
    row = ref[(ref["region"] == "World") & (ref["variable"] == "emissions.ghg") & (ref["year"] == 2020)].iloc[0]
    ref_value = contracts.reference_value(found.contract, "World", "emissions.ghg", 2020)
    assert ref_value is not None and (ref_value.value, ref_value.unit) == (row["value"], row["unit"])
    assert contracts.reference_value(found.contract, "World", "price.carbon", 2020) is None
    assert contracts.find("no-such-contract").contract is None


def test_chart_exports_are_real_png_and_svg(con):
    df = queries.screen_table(con, queries.Selection(), 2020, 2050)
    df["band_label"] = np.array(queries.band_labels(3))[df["band"].to_numpy()]
    chart = charts.histogram(
        df, queries.band_edges(con, queries.Selection()), queries.band_labels(3), "emissions.ghg", "Mt CO2e/yr"
    )
    png = charts.to_png(chart, scale=1)
    # PNG signature and IHDR chunk (ISO/IEC 15948): width and height are the first two big-endian uint32
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and png[12:16] == b"IHDR"
    width, height = struct.unpack(">II", png[16:24])
    assert width > 300 and height > 200
    svg = charts.to_svg(chart)
    assert svg.lstrip().startswith("<svg") and svg.rstrip().endswith("</svg>")


def test_reference_value_is_in_the_contract_unit(tmp_path: Path):
    # A contract that gives World CO2 in Gt CO2/yr for a variable in Mt CO2/yr: the marker must sit at the Mt value
    # (SI: 1 Gt = 1000 Mt), the same number the checker compares the base year with.
    from milepost.schema.contract import load

    folder = tmp_path / "gt"
    folder.mkdir()
    (folder / "contract.toml").write_text('name = "gt-reference"\nextends = "core"\n', encoding="utf-8")
    (folder / "reference.csv").write_text(
        "region,variable,unit,year,value\nWorld,emissions.co2,Gt CO2/yr,2020,38.5\n", encoding="utf-8"
    )
    c = load(folder)
    ref = contracts.reference_value(c, "World", "emissions.co2", 2020)
    assert ref is not None
    assert (ref.value, ref.unit) == (pytest.approx(38_500.0), "Mt CO2/yr")
    assert (ref.given_value, ref.given_unit) == (38.5, "Gt CO2/yr")
    assert [(r.unit, r.value) for r in c.references_in_contract_units()] == [("Mt CO2/yr", pytest.approx(38_500.0))]


def test_cagr_undefined_is_counted_per_band():
    df = pd.DataFrame(
        {
            "model": ["M"] * 6,
            "scenario": ["a", "a", "b", "b", "c", "c"],
            "band": [0, 0, 2, 2, 2, 2],
            "kind": ["rate_cagr", "rate_absolute"] * 3,
            # a crosses zero (CAGR empty, absolute defined); b is fine; c has no values at all (both empty)
            "value": [np.nan, -40.0, -2.0, -30.0, np.nan, np.nan],
        }
    )
    got = queries.cagr_undefined(df)
    assert got.to_dict("records") == [{"band": 0, "n": 1}]
