"""`milepost harmonise` end to end on a demo submission: files written, report, options, usage errors."""

from __future__ import annotations

import csv
import json

import duckdb
import pytest
from typer.testing import CliRunner

from milepost.validate.cli import app
from milepost.validate.harmonise.notes import METHOD_COLUMNS

from conftest import DEMO_CONTRACT

runner = CliRunner()


def _run(*args):
    return runner.invoke(app, [str(a) for a in args])


@pytest.fixture(scope="module")
def ferrow(demo):
    return demo[1].submissions["Ferrow"]


def test_harmonise_writes_the_submission_and_the_methods_and_checks_the_result(tmp_path, ferrow):
    out = tmp_path / "ferrow-h.csv"
    res = _run("harmonise", *ferrow, "--contract", DEMO_CONTRACT, "-o", out)
    assert res.exit_code == 0, res.stdout
    lines = res.stdout.splitlines()
    assert lines[0].startswith(
        "Harmonised to the reference values of 2020 (the contract's methods; contract lowmoor-demo)"
    )
    assert any(line.split()[:3] == ["emissions.co2", "converging-ratio", "50"] for line in lines)
    assert any(line.split()[:3] == ["emissions.ghg", "from-parts", "60"] for line in lines)
    assert "note harmonise-parts-left-out: 60 series" in lines
    assert f"Check of {out} against the contract: passed (0 errors, 0 warnings, 0 notes)." in lines
    assert lines[-1] == "Harmonised values are model projections aligned with a historical reference, not forecasts."
    with out.open() as f:
        rows = list(csv.DictReader(f))
    assert list(rows[0]) == ["model", "scenario", "region", "variable", "unit", "year", "value"]
    methods = tmp_path / "ferrow-h-methods.csv"
    with methods.open() as f:
        table = list(csv.DictReader(f))
    assert list(table[0]) == list(METHOD_COLUMNS)
    by_series = {(r["scenario"], r["region"], r["variable"]): r for r in table}
    co2 = by_series[("drift", "Ardena", "emissions.co2")]
    assert co2["method"] == "converging-ratio" and co2["convergence_year"] == "2050"
    assert float(co2["factor"]) == pytest.approx(float(co2["reference_value"]) / float(co2["base_value"]))
    # the harmonised base year is the reference value; 2050 on, the model's own value
    raw = duckdb.sql(f"SELECT year, value FROM read_csv('{ferrow[0]}') WHERE scenario = 'drift' "
                     "AND region = 'Ardena' AND variable = 'emissions.co2' ORDER BY year").fetchall()  # fmt: skip
    got = {int(r["year"]): float(r["value"]) for r in rows
           if (r["scenario"], r["region"], r["variable"]) == ("drift", "Ardena", "emissions.co2")}  # fmt: skip
    assert got[2020] == pytest.approx(9937.6)
    assert all(got[y] == pytest.approx(v, rel=1e-12) for y, v in raw if y >= 2050)


def test_options_replace_the_contracts_choice_for_every_series(tmp_path, ferrow):
    out = tmp_path / "h.parquet"
    res = _run(
        "harmonise", *ferrow, "-c", DEMO_CONTRACT, "-o", out, "--method", "converging-offset",
        "--convergence-year", "2040", "--format", "json", "--no-verify",
    )  # fmt: skip
    assert res.exit_code == 0, res.stdout
    report = json.loads(res.stdout)
    assert report["verification"] is None
    assert {c["method"] for c in report["choices"]} == {"converging-offset"}
    assert {c["converge_year"] for c in report["choices"]} == {2040}
    table = duckdb.sql(f"SELECT DISTINCT method, convergence_year FROM '{tmp_path / 'h-methods.parquet'}' "
                       "WHERE offset_value IS NOT NULL").fetchall()  # fmt: skip
    assert table == [("converging-offset", 2040)]
    lines = [m for m in report["methods"] if m["variable"] == "emissions.co2" and m["method"] == "converging-offset"]
    assert lines and lines[0]["series"] == 50 and lines[0]["median_offset"] is not None
    assert report["rows_written"] == duckdb.sql(f"SELECT count(*) FROM '{out}'").fetchall()[0][0]


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--convergence-year", "2020"], "must come after the base year 2020"),
        (["--method", "mean"], "'mean' is not one of"),
        # a usage error raised inside the command (once an internal error, exit 70)
        (["--methods", "{out}"], "the output must be a new file, not the methods table"),
    ],
)
def test_usage_errors_exit_2(tmp_path, ferrow, args, message):
    args = [str(a).format(out=tmp_path / "x.csv") for a in args]
    res = _run("harmonise", *ferrow, "-c", DEMO_CONTRACT, "-o", tmp_path / "x.csv", *args)
    assert res.exit_code == 2, res.output
    assert message in res.stderr
    assert not (tmp_path / "x.csv").exists()


def test_output_name_picks_the_format(tmp_path, ferrow):
    res = _run("harmonise", *ferrow, "-c", DEMO_CONTRACT, "-o", tmp_path / "x.txt")
    assert res.exit_code == 2
    assert "must end in .csv, .parquet, .xlsx" in res.stderr
