"""Every dashboard page in AppTest on the ingested demo database: widgets change the numbers, which match SQL."""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest
from streamlit.testing.v1 import AppTest

from milepost.dashboard import queries
from milepost.dashboard.headlines import sig
from milepost.dashboard.ui import fmt
from milepost.example_db.generate import CONTRACT_DIR
from milepost.validate.store.ingest import ingest

from dashboard_fixtures import milestone_values, numpy_bands, open_app

RESULT_PAGES = (
    "views/screen.py",
    "views/budgets.py",
    "views/rates.py",
    "views/costs.py",
    "views/delay.py",
    "views/pathways.py",
)


def frame(at: AppTest, must_have: str) -> pd.DataFrame:
    """The shown table that has a column containing `must_have`."""
    for d in at.dataframe:
        if any(must_have in str(c) for c in d.value.columns):
            return d.value
    raise AssertionError(f"no table with a column like {must_have!r}: {[list(d.value.columns) for d in at.dataframe]}")


def band_rates(sql, year_from: int, year_to: int, kind: str = "rate_cagr") -> tuple[np.ndarray, pd.DataFrame]:
    sel = milestone_values(sql, "emissions.ghg", 2030)
    _, band = numpy_bands(sel["value"].to_numpy())
    sel = sel.assign(band=band)
    r = sql.execute(
        """SELECT model, scenario, value AS rate FROM current_indicators
                       WHERE kind = ? AND variable = 'emissions.ghg' AND region = 'World'
                         AND year_from = ? AND year_to = ?""",
        [kind, year_from, year_to],
    ).df()
    return band, sel.merge(r, on=["model", "scenario"])


def test_screen_numbers_follow_the_milestone_year(demo_db, sql):
    at = open_app(demo_db)
    assert at.title[0].value == "Screen"
    assert len(at.get("vega_lite_chart")) == 1
    for year in (2030, 2050):
        if year != 2030:
            at.selectbox(key="band_year").set_value(year).run()
            assert not at.exception
        want = milestone_values(sql, "emissions.ghg", year)
        shown = frame(at, f"{year} [")
        col = next(c for c in shown.columns if str(c).startswith(f"{year} ["))
        got = shown.set_index(["model", "scenario"])[col].sort_index()
        exp = want.set_index(["model", "scenario"])["value"].sort_index()
        assert got.index.equals(exp.index)
        np.testing.assert_allclose(got.to_numpy(), exp.to_numpy())
        median = next(m for m in at.metric if m.label == f"Median {year}")
        assert median.value.startswith(fmt(float(np.median(exp)), 0))
        _, band = numpy_bands(exp.to_numpy())
        bands = frame(at, "range")
        assert bands["scenarios"].tolist() == np.bincount(band, minlength=3).tolist()
    assert at.query_params["year"] == ["2050"] or at.query_params["year"] == "2050"


def test_screen_edges_models_and_attribute_filter(demo_db, sql):
    at = open_app(demo_db)
    at.text_input(key="band_edges").set_value("45000").run()
    bands = frame(at, "range")
    values = milestone_values(sql, "emissions.ghg", 2030)["value"].to_numpy()
    assert bands["band"].tolist() == ["low", "high"]
    assert bands["scenarios"].tolist() == [int((values < 45000).sum()), int((values >= 45000).sum())]

    at.multiselect(key="band_models").set_value(["Ferrow"]).run()
    shown = frame(at, "2030 [")
    assert set(shown["model"]) == {"Ferrow"}
    assert len(shown) == len(milestone_values(sql, "emissions.ghg", 2030, models=("Ferrow",)))

    at.selectbox(key="band_attr").set_value("family").run()
    at.multiselect(key="band_attr_values").set_value(["delayed"]).run()
    shown = frame(at, "2030 [")
    assert set(shown["family"]) == {"delayed"} and set(shown["model"]) == {"Ferrow"}


def test_url_query_restores_the_view(demo_db, sql):
    # An edge between Halvik's lowest and highest 2050 value, so both bands are populated whatever the demo holds.
    halvik = milestone_values(sql, "emissions.ghg", 2050, models=("Halvik",))["value"]
    edge = f"{(halvik.min() + halvik.max()) / 2:.0f}"
    at = open_app(demo_db, params={"year": "2050", "model": ["Halvik"], "edges": edge, "period": "2050-2100"})
    assert at.selectbox(key="band_year").value == 2050
    assert at.multiselect(key="band_models").value == ["Halvik"]
    shown = frame(at, "2050 [")
    assert set(shown["model"]) == {"Halvik"}
    assert frame(at, "range")["band"].tolist() == ["low", "high"]
    # switching page keeps the filters (and puts them in the new page's URL)
    at.switch_page("views/rates.py").run()
    assert at.selectbox(key="band_year").value == 2050 and at.selectbox(key="rates_period").value == "2050-2100"
    assert at.info[0].value.startswith("Median CAGR 2050–2100")
    # a value that does not exist falls back to the default
    bad = open_app(demo_db, params={"year": "1999", "region": "Atlantis"})
    assert bad.selectbox(key="band_year").value == 2030 and bad.selectbox(key="band_region").value == "World"


def test_rates_sentence_and_table_match_sql(demo_db, sql):
    at = open_app(demo_db, "views/rates.py")
    for period in ((2030, 2050), (2050, 2100)):
        if period != (2030, 2050):
            at.selectbox(key="rates_period").set_value(f"{period[0]}-{period[1]}").run()
        _, df = band_rates(sql, *period)
        hi = np.median(df.loc[df["band"] == 2, "rate"].dropna())
        lo = np.median(df.loc[df["band"] == 0, "rate"].dropna())
        text = at.info[0].value
        assert text.startswith(f"Median CAGR {period[0]}–{period[1]} of emissions.ghg (World)")
        assert f"high band {fmt(hi)} %/yr vs low band {fmt(lo)} %/yr" in text
        table = frame(at, "interquartile range")
        row = table[(table["rate"] == "CAGR") & (table["band"] == "high")].iloc[0]
        assert row["median"] == pytest.approx(hi)
        assert row["75th percentile"] == pytest.approx(np.percentile(df.loc[df["band"] == 2, "rate"].dropna(), 75))
    spec = json.loads(at.get("vega_lite_chart")[0].proto.spec)
    assert {"model", "scenario"} <= {t.get("field") for t in _tooltips(spec)}


def test_rates_page_picks_the_linear_rate_and_counts_undefined_cagr(demo_db, sql):
    at = open_app(demo_db, "views/rates.py")
    assert at.selectbox(key="rates_kind").value == "rate_linear_base"  # the default: one denominator per period
    at.selectbox(key="rates_period").set_value("2050-2100").run()
    for kind, unit in (("rate_linear_base", "%/yr"), ("rate_absolute", "Mt CO2e/yr per year"), ("rate_linear", "%/yr")):
        at.selectbox(key="rates_kind").set_value(kind).run()
        assert not at.exception
        label = {"rate_linear_base": "% of the base-year value", "rate_absolute": "absolute", "rate_linear": "start"}
        assert any("Shown beside CAGR: " in c.value and label[kind] in c.value for c in at.caption)
        _, df = band_rates(sql, 2050, 2100, kind)
        table = frame(at, "interquartile range")
        assert set(table["rate"]) == {"CAGR", queries.RATE_LABELS[kind]}
        row = table[(table["rate"] == queries.RATE_LABELS[kind]) & (table["band"] == "high")].iloc[0]
        assert row["unit"] == unit
        assert row["median"] == pytest.approx(np.median(df.loc[df["band"] == 2, "rate"].dropna()))
        assert f"{queries.RATE_LABELS[kind]} " in at.info[0].value
        assert at.query_params["rate"] in (kind, [kind])
    # CAGR is empty where 2050 or 2100 is at or below zero; the page counts them per band (numpy bands, SQL rates)
    _, cagr = band_rates(sql, 2050, 2100, "rate_cagr")
    _, absolute = band_rates(sql, 2050, 2100, "rate_absolute")
    both = cagr.merge(absolute[["model", "scenario", "rate"]], on=["model", "scenario"], suffixes=("", "_abs"))
    undefined = both[both["rate"].isna() & both["rate_abs"].notna()]
    assert len(undefined) > 0, "the demo should have scenarios below zero by 2100"
    (warning,) = [w.value for w in at.warning if "CAGR is undefined" in w.value]
    labels = queries.band_labels(3)
    for b, n in undefined.groupby("band").size().items():
        assert f"{labels[b]} band {n}" in warning
    assert "linear rates are defined" in warning


def _tooltips(spec: dict) -> list[dict]:
    out: list[dict] = []
    if isinstance(spec, dict):
        tip = spec.get("encoding", {}).get("tooltip") if isinstance(spec.get("encoding"), dict) else None
        if isinstance(tip, list):
            out += tip
        for v in spec.values():
            out += _tooltips(v)
    elif isinstance(spec, list):
        for v in spec:
            out += _tooltips(v)
    return out


def _npv_medians(sql, models: tuple[str, ...] = ()) -> tuple[float, float, int, int]:
    """Median NPV 2020-2100 of the highest and lowest tercile band, recomputed from the stored rows with numpy."""
    sel = milestone_values(sql, "emissions.ghg", 2030, models=models)
    _, band = numpy_bands(sel["value"].to_numpy())
    npv = sql.execute("""SELECT model, scenario, value FROM current_indicators
                         WHERE kind = 'npv' AND region = 'World' AND year_from = 2020 AND year_to = 2100""").df()
    npv = sel.assign(band=band).merge(npv, on=["model", "scenario"], suffixes=("_ms", ""))
    hi, lo = npv.loc[npv["band"] == 2, "value"], npv.loc[npv["band"] == 0, "value"]
    return float(np.median(hi)), float(np.median(lo)), len(hi), len(lo)


def _npv_models(sql, models: tuple[str, ...] = ()) -> dict[str, int]:
    """The models behind each tercile band's NPV 2020-2100, recomputed from the stored rows."""
    sel = milestone_values(sql, "emissions.ghg", 2030, models=models)
    _, band = numpy_bands(sel["value"].to_numpy())
    npv = sql.execute("""SELECT model, scenario, value FROM current_indicators
                         WHERE kind = 'npv' AND region = 'World' AND year_from = 2020 AND year_to = 2100""").df()
    npv = sel.assign(band=np.array(["low", "middle", "high"])[band]).merge(npv, on=["model", "scenario"])
    return {str(b): int(n) for b, n in npv.groupby("band")["model"].nunique().items()}


def test_costs_sentence_ratio_and_thin_evidence(demo_db, sql):
    at = open_app(demo_db, "views/costs.py")
    for models in ((), ("Ferrow",)):
        if models:
            at.multiselect(key="band_models").set_value(list(models)).run()
        hi, lo, n_hi, n_lo = _npv_medians(sql, models)
        text = at.info[0].value
        assert (
            f"NPV of abatement cost 2020–2100 {sig(hi)} vs {sig(lo)} billion USD_2015 "
            f"(×{fmt(hi / lo, 2)}, n = {n_hi} vs {n_lo})"
        ) in text
        ratio = frame(at, "ratio of medians")
        row = ratio[(ratio["metric"] == "NPV of abatement cost") & (ratio["year"] == 2100)].iloc[0]
        assert row["ratio of medians"] == pytest.approx(hi / lo)
        assert (row["scenarios high"], row["scenarios low"]) == (n_hi, n_lo)
        # a band median on fewer than three models is thin evidence, as on every page (stats.THIN_MODELS)
        bands = frame(at, "scenarios without a value")
        npv = bands[(bands["metric"] == "NPV of abatement cost") & (bands["year"] == 2100)].set_index("band")
        behind = _npv_models(sql, models)
        assert npv["models"].to_dict() == behind
        assert npv["evidence"].to_dict() == {b: ("thin evidence" if m < 3 else "") for b, m in behind.items()}
        assert any("Thin evidence" in w.value for w in at.warning) == (bands["evidence"] != "").any()
    assert models and set(npv["evidence"]) == {"thin evidence"}  # one model: every median is thin


def test_pathways_variable_change_and_reference(demo_db, sql):
    at = open_app(demo_db, "views/pathways.py")
    at.selectbox(key="path_variable").set_value("energy.primary").run()
    table = frame(at, "95th percentile [EJ/yr]")
    table = table[table["values"] == "as submitted"]
    sel = milestone_values(sql, "emissions.ghg", 2030)
    _, band = numpy_bands(sel["value"].to_numpy())
    pts = sql.execute("""SELECT model, scenario, year, value FROM current_data
                         WHERE variable = 'energy.primary' AND region = 'World'""").df()
    pts = sel[["model", "scenario"]].assign(band=np.array(["low", "middle", "high"])[band]).merge(pts)
    exp = pts.groupby(["band", "year"])["value"].median()
    got = table.set_index(["band", "year"])["median [EJ/yr]"]
    np.testing.assert_allclose(got.loc[exp.index].to_numpy(), exp.to_numpy())
    ref = pd.read_csv(CONTRACT_DIR / "reference.csv")
    value = ref[(ref["region"] == "World") & (ref["variable"] == "energy.primary")]["value"].iloc[0]
    assert any(f"reference value {fmt(value, 0)} EJ/yr in 2020" in c.value for c in at.caption)
    spec = at.get("vega_lite_chart")[0].proto.spec
    assert "diamond" in spec

    picked = ["Ferrow | act-bold", "Halvik | act-deep"]
    at.multiselect(key="path_scenarios").set_value(picked).run()
    spec = json.loads(at.get("vega_lite_chart")[0].proto.spec)
    # each single scenario is named in a legend and drawn with a dash pattern of its own
    (dash,) = [layer["encoding"]["strokeDash"] for layer in spec["layer"] if "strokeDash" in layer.get("encoding", {})]
    assert dash["field"] == "label" and dash["legend"]["title"] == "single scenario"
    assert dash["scale"]["domain"] == picked
    patterns = dash["scale"]["range"][: len(picked)]
    assert len({tuple(p) for p in patterns}) == len(picked)


def test_submissions_and_drill_down(demo_db, sql):
    at = open_app(demo_db, "views/submissions.py")
    subs = frame(at, "version")
    assert len(subs) == sql.execute("SELECT count(*) FROM submissions").fetchall()[0][0]
    rejected = sql.execute("SELECT id FROM submissions WHERE status = 'rejected'").fetchall()[0][0]
    per_rule = dict(
        sql.execute("SELECT rule, count(*) FROM findings WHERE submission_id = ? GROUP BY rule", [rejected]).fetchall()
    )
    row = subs[subs["submission"] == rejected].iloc[0]
    assert {r: int(row[r]) for r in per_rule} == per_rule
    assert_readable_tables(at)
    # blanks explained: a rejected submission has no version; a submission no later one replaced is current
    replaced = dict(sql.execute("SELECT id, superseded_by FROM submissions").fetchall())
    shown = subs.set_index("submission")
    assert shown.loc[rejected, "version"] == "rejected, no version"  # the words of `milepost submissions`
    assert {i: shown.loc[i, "replaced by submission"] for i in replaced} == {
        i: "current" if r is None else str(r) for i, r in replaced.items()
    }
    # the one submission with findings is preselected
    assert at.selectbox(key="subs_id").value == rejected
    found = frame(at, "how to fix")
    assert list(found.columns[:2]) == ["message", "how to fix"]  # what to read and what to do, visible first
    assert len(frame(at, "how to fix")) == sum(per_rule.values())
    rule = max(per_rule, key=lambda r: per_rule[r])
    at.multiselect(key="subs_rules").set_value([rule]).run()
    found = frame(at, "how to fix")
    assert len(found) == per_rule[rule] and set(found["rule"]) == {rule}


def test_submissions_fold_retried_rejections_as_the_cli_does(demo_db, tmp_path):
    """A rejected attempt submitted again (the same files) is folded away until "Show all attempts" is ticked;
    the ids listed either way are those of `milepost submissions` with and without --all."""
    from typer.testing import CliRunner

    from milepost.example_db.generate import write_demo
    from milepost.validate.cli import app

    db = tmp_path / "retried.duckdb"
    shutil.copy(demo_db, db)
    flawed = write_demo(tmp_path / "files").flawed
    data = flawed[0].read_text().splitlines(keepends=True)
    flawed[0].write_text("".join(data[:-1]))  # one row fewer: new files of the same model, rejected again
    ingest(flawed, db, CONTRACT_DIR)  # the first rejected attempt is now history
    cli = {}
    for flag in ([], ["--all"]):
        out = CliRunner().invoke(app, ["submissions", "--db", str(db), "--format", "json", *flag])
        cli[bool(flag)] = [s["id"] for s in json.loads(out.stdout)]
        labels = {s["id"]: s["version_label"] for s in json.loads(out.stdout)}
    assert len(cli[True]) == len(cli[False]) + 1
    (first,) = set(cli[True]) - set(cli[False])
    at = open_app(db, "views/submissions.py")
    assert sorted(frame(at, "version")["submission"]) == cli[False]
    assert any(f"not listed: {first}" in c.value for c in at.caption)
    at.checkbox(key="subs_all").check().run()
    assert not at.exception, [e.message for e in at.exception]
    shown = frame(at, "version").set_index("submission")
    assert sorted(shown.index) == cli[True]
    assert shown.loc[first, "version"] == "rejected, no version" == labels[first]
    assert shown["version"].to_dict() == labels  # the page shows the CLI's JSON labels
    assert any(o.startswith(f"#{first} ") for o in at.selectbox(key="subs_id").options)


def _signature(p: Path) -> tuple[int, int, str]:
    s = p.stat()
    return s.st_ino, s.st_mtime_ns, hashlib.sha256(p.read_bytes()).hexdigest()


def test_selfcheck_reports_findings_without_writing(demo, sql):
    db, files = demo
    before = _signature(db)
    at = open_app(db, "views/selfcheck.py")
    at.file_uploader(key="check_files").set_value([(p.name, p.read_bytes(), "text/csv") for p in files.flawed]).run()
    assert not at.exception, [e.message for e in at.exception]
    sid, errors = sql.execute("SELECT id, errors FROM submissions WHERE model = 'Vossel'").fetchall()[0]
    metric = {m.label: m.value for m in at.metric}
    assert int(metric["Errors"].replace(",", "")) == errors
    assert any("rejected" in e.value for e in at.error)
    stored = dict(
        sql.execute("SELECT rule, count(*) FROM findings WHERE submission_id = ? GROUP BY rule", [sid]).fetchall()
    )
    shown = frame(at, "how to fix")
    assert shown.groupby("rule").size().to_dict() == stored
    assert list(shown.columns[:2]) == ["message", "how to fix"]
    assert_readable_tables(at)
    assert {b.label for b in at.get("download_button")} >= {"JSON report", "XLSX report"}
    assert _signature(db) == before  # nothing was written to the database

    at.file_uploader(key="check_files").set_value(
        [(p.name, p.read_bytes(), "text/csv") for p in files.submissions["Ferrow"]]
    ).run()
    assert any("would be accepted" in s.value for s in at.success)


# query column names a reader should never see (issue: raw n_missing, q25, iqr, superseded_by headers)
RAW_NAMES = {"n", "n_missing", "q05", "q25", "q75", "q95", "iqr", "superseded_by", "band_label", "year_from"}
RAW_NAMES |= {"net_zero_year", "convergence_year", "submitted_at", "column_name", "hint", "base_value", "id"}
YEAR = re.compile(r"(year|from year|measured from|summed to|net-zero year|convergence year|peak year.*)")
YEAR_TEXT = re.compile(r"\d{4}( \(already ≤ 0\))?|not reached by \d{4}|not reached|not used")


def assert_readable_tables(at: AppTest) -> None:
    """Every shown table: readable labels, whole-number years, no cell reading "None"."""
    assert len(at.dataframe) > 0
    for d in at.dataframe:
        df, config = d.value, json.loads(d.proto.columns)
        assert d.proto.placeholder == "–"  # a blank with no more specific meaning is a dash, not "None"
        assert not RAW_NAMES & set(df.columns), list(df.columns)
        for c in df.columns:
            values = df[c].dropna()
            if YEAR.fullmatch(str(c)):
                if values.dtype.kind in "iuf" or str(values.dtype) == "Int64":
                    assert (values == values.round()).all() and config[c]["type_config"]["format"] == "%d", c
                else:
                    assert values.astype(str).str.fullmatch(YEAR_TEXT).all(), (c, values.unique()[:5])
            if values.dtype == object or str(values.dtype) in ("str", "string"):
                assert not (values.astype(str) == "None").any(), c


@pytest.mark.parametrize("page", RESULT_PAGES)
def test_results_pages_carry_cautions_and_downloads(demo_db, page):
    at = open_app(demo_db, page)
    assert_readable_tables(at)
    captions = " ".join(c.value for c in at.caption)
    assert "not forecasts" in captions and "avoided climate damages and co-benefits" in captions
    labels = [b.label for b in at.get("download_button")]
    n_charts = len(at.get("vega_lite_chart"))
    assert n_charts >= 1
    assert labels.count("PNG") == labels.count("SVG") == n_charts
    assert labels.count("CSV") == len(at.dataframe)


def test_missing_database_says_what_to_do(tmp_path):
    at = open_app(tmp_path / "none.duckdb")
    assert "No database at" in at.error[0].value and "milepost ingest" in at.error[0].value


def test_dashboard_reads_during_an_ingest_and_then_sees_the_new_version(demo, tmp_path):
    _, files = demo
    db = tmp_path / "live.duckdb"
    ingest(files.submissions["Ferrow"], db, CONTRACT_DIR)
    at = open_app(db)
    n_before = next(m for m in at.metric if m.label == "Scenarios").value

    flag = tmp_path / "paused"
    env = {
        **os.environ,
        "MILEPOST_PAUSE_AT": "in-transaction",
        "MILEPOST_PAUSE_FILE": str(flag),
        "MILEPOST_PAUSE_SECONDS": "3",
    }
    code = (
        "import sys; from milepost.validate.store.ingest import ingest; ingest(sys.argv[3:], sys.argv[1], sys.argv[2])"
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", code, str(db), str(CONTRACT_DIR), *map(str, files.submissions["Ormund"])], env=env
    )
    try:
        deadline = time.monotonic() + 60
        while not flag.exists():
            assert proc.poll() is None, "the ingest ended before it reached the pause"
            assert time.monotonic() < deadline
            time.sleep(0.05)
        at.run()  # the writer is mid-transaction on its copy: the page still works and shows the old version
        assert not at.exception
        assert next(m for m in at.metric if m.label == "Scenarios").value == n_before
        assert proc.wait(timeout=60) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
    at.run()  # same app, no restart: the replaced file is reopened
    with duckdb.connect(str(db), read_only=True) as con:
        expect = len(milestone_values(con, "emissions.ghg", 2030))
    assert int(next(m for m in at.metric if m.label == "Scenarios").value) == expect > int(n_before)


def test_screen_states_the_conventions_and_net_zero_not_reached(demo_db, sql):
    at = open_app(demo_db)
    captions = " ".join(c.value for c in at.caption)
    assert "both included" in captions and "IPCC AR6 WG1" in captions and "1 January 2020" in captions
    assert "first whole year from 2020 on" in captions
    shown = frame(at, "net-zero year").set_index(["model", "scenario"])["net-zero year"]
    nz = (
        sql.execute("""SELECT model, scenario, value, year_to FROM current_indicators WHERE kind = 'net_zero_year'
                        AND variable = 'emissions.ghg' AND region = 'World'""")
        .df()
        .set_index(["model", "scenario"])
    )
    nz = nz.loc[shown.index]
    never = nz["value"].isna()
    assert never.any() and (~never).any()
    assert (shown[never.to_numpy()] == "not reached by " + nz.loc[never, "year_to"].astype(int).astype(str)).all()
    assert (shown[(~never).to_numpy()] == nz.loc[~never, "value"].astype(int).astype(str)).all()


def test_costs_show_gdp_growth_reduction_against_the_named_reference(demo_db, sql):
    at = open_app(demo_db, "views/costs.py")
    captions = " ".join(c.value for c in at.caption)
    assert "each model's own reference scenario named in the scenarios table (here: drift)" in captions
    assert "may differ from a current-policies pathway" in captions
    bands = frame(at, "band")
    assert {"GDP (MER) growth reduction", "GDP (PPP) growth reduction", "Consumption growth reduction"} <= set(
        bands["metric"]
    )
    row = bands[(bands["metric"] == "GDP (MER) growth reduction") & (bands["year"] == 2050)]
    assert set(row["unit"]) == {"pp/yr"}


def test_an_outdated_database_is_shown_with_a_warning(demo_db, tmp_path):
    # a copy of the demo as the previous milepost wrote it: schema 1, no note column
    db = tmp_path / "old.duckdb"
    shutil.copyfile(demo_db, db)
    con = duckdb.connect(str(db))
    # without what schema 3 added (harmonised values beside the raw ones) and schema 2's note
    con.execute("DELETE FROM data WHERE basis <> 'raw'")
    con.execute("DELETE FROM indicators WHERE basis <> 'raw'")
    for view in ("current_harmonisation", "current_indicators_by_basis", "current_data_by_basis", "current_data"):
        con.execute(f"DROP VIEW {view}")
    con.execute("DROP TABLE harmonisation")
    con.execute("ALTER TABLE data DROP COLUMN basis")
    con.execute(
        "CREATE VIEW current_data AS SELECT d.submission_id, d.model, d.scenario, d.region, d.variable, d.unit,"
        " d.year, d.value FROM data AS d JOIN current_versions AS c"
        " ON c.submission_id = d.submission_id AND c.model = d.model AND c.scenario = d.scenario"
    )
    con.execute("DROP VIEW current_indicators")
    con.execute("ALTER TABLE indicators DROP COLUMN basis")
    con.execute("ALTER TABLE indicators DROP COLUMN note")
    con.execute(
        "CREATE VIEW current_indicators AS SELECT i.submission_id, i.model, i.scenario, i.region, i.kind, i.variable,"
        " i.year_from, i.year_to, i.value, i.unit FROM indicators AS i JOIN current_versions AS c"
        " ON c.submission_id = i.submission_id AND c.model = i.model AND c.scenario = i.scenario"
    )
    con.execute("UPDATE meta SET value = '1' WHERE key = 'schema_version'")
    con.close()
    for page in (None, "views/rates.py", "views/pathways.py"):
        at = open_app(db, page)
        assert any("schema version 1" in w.value and "milepost ingest" in w.value for w in at.warning)
        assert "band_basis" not in [r.key for r in at.radio]  # no raw/harmonised switch without harmonised values
    at = open_app(demo_db)
    assert not any("older conventions" in w.value for w in at.warning)


def test_selfcheck_bomb_upload_gives_a_finding_and_the_app_stays_responsive(demo, sql, tmp_path, monkeypatch):
    from milepost.validate.bench import bombs

    db, files = demo
    at = open_app(db, "views/selfcheck.py")
    names = sql.execute("SELECT DISTINCT contract_name FROM submissions").fetchall()
    picker = at.selectbox(key="check_contract")
    assert picker.value == names[0][0] and set(picker.options) == {n for (n,) in names}
    assert any(f"contract **{picker.value}**" in c.value for c in at.caption)

    # a cell beyond Excel's limit: the child stops at the limit and says so
    bomb = bombs.huge_cell_xlsx(tmp_path / "cell.xlsx", chars=40_000)
    at.file_uploader(key="check_files").set_value([(bomb.name, bomb.read_bytes(), "application/octet-stream")]).run()
    assert not at.exception, [e.message for e in at.exception]
    shown = frame(at, "how to fix")
    assert shown["rule"].tolist() == ["limit-exceeded"] and "32,767 characters" in shown["message"][0]
    first_dir = at.session_state["_checked"][1].dir

    # a check that outruns its time budget is stopped: one finding, and the page goes on
    monkeypatch.setenv("MILEPOST_SELFCHECK_SECONDS", "0.05")
    slow = bombs.empty_rows_csv(tmp_path / "empty.csv", rows=20_000)
    at.file_uploader(key="check_files").set_value([(slow.name, slow.read_bytes(), "text/csv")]).run()
    assert not at.exception, [e.message for e in at.exception]
    assert any("time budget" in e.value for e in at.error)
    assert frame(at, "how to fix")["rule"].tolist() == ["check-aborted"]
    assert not Path(first_dir).exists()  # the previous upload's folder is gone
    monkeypatch.delenv("MILEPOST_SELFCHECK_SECONDS")

    # still responsive: a good submission checks as before, another page renders
    at.file_uploader(key="check_files").set_value(
        [(p.name, p.read_bytes(), "text/csv") for p in files.submissions["Ferrow"]]
    ).run()
    assert any("would be accepted" in s.value for s in at.success)
    held = Path(at.session_state["_checked"][1].dir)
    at.switch_page("views/screen.py").run()
    assert not at.exception
    at.session_state["_checked"][1].close()
    assert not held.exists()
