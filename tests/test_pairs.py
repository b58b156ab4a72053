"""Delay pairs (`milepost export --what pairs`) against a pandas computation from the exported indicators."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from milepost.validate.cli import app
from milepost.validate.store.pairs import OWN_PERIOD_KINDS, PAIR_COLUMNS

from conftest import BASIC_CONTRACT

KEY = ["kind", "variable", "region"]


def milepost(*args: str | Path):
    result = CliRunner().invoke(app, [str(a) for a in args])
    assert result.exit_code == 0, result.output + str(result.stderr)
    return result


@pytest.fixture(scope="module")
def indicators(demo_db: Path, tmp_path_factory: pytest.TempPathFactory) -> pd.DataFrame:
    out = tmp_path_factory.mktemp("pairs") / "indicators.csv"
    milepost("export", "--db", demo_db, "--what", "indicators", "--format", "csv", "-o", out)
    return pd.read_csv(out, keep_default_na=False, na_values=[""])


@pytest.fixture(scope="module")
def attributes(demo) -> pd.DataFrame:
    """The scenario attributes as the modelling teams submitted them (the demo's own scenario files)."""
    _, files = demo
    frames = []
    for paths in [*files.submissions.values(), files.revision]:
        for p in paths:
            if p.suffix == ".xlsx":
                frames.append(pd.read_excel(p, sheet_name="scenarios"))
            elif p.name.endswith("-scenarios.csv"):
                frames.append(pd.read_csv(p))
    return pd.concat(frames).drop_duplicates(["model", "scenario"], keep="last").reset_index(drop=True)


def expected_pairs(indicators: pd.DataFrame, keys: pd.DataFrame) -> pd.DataFrame:
    """Pair rows from (model, group, scenario_first, scenario_later) and the exported indicators, with pandas."""
    first = keys.merge(indicators, left_on=["model", "scenario_first"], right_on=["model", "scenario"])
    later = keys.merge(indicators, left_on=["model", "scenario_later"], right_on=["model", "scenario"])
    on = ["model", "group", "scenario_first", "scenario_later", *KEY]
    own = first["kind"].isin(OWN_PERIOD_KINDS)
    fixed = first[~own].merge(later[~later["kind"].isin(OWN_PERIOD_KINDS)], on=[*on, "year_from", "year_to"])
    mine = first[own].merge(later[later["kind"].isin(OWN_PERIOD_KINDS)], on=on, suffixes=("_x", "_y"))
    for col in ("year_from", "year_to"):
        mine[col] = mine[f"{col}_x"].where(mine[f"{col}_x"] == mine[f"{col}_y"])
    both = pd.concat([fixed, mine], ignore_index=True)
    out = both.rename(columns={"value_x": "value_first", "value_y": "value_later", "unit_x": "unit"})
    out["delta"] = out["value_later"] - out["value_first"]
    out["ratio"] = out["value_later"] / out["value_first"].where(out["value_first"] != 0)
    return out[list(PAIR_COLUMNS)]


def compare(got: pd.DataFrame, want: pd.DataFrame) -> None:
    order = ["model", "scenario_first", "scenario_later", *KEY, "year_from", "year_to"]
    got = got.sort_values(order, na_position="first").reset_index(drop=True)
    want = want.sort_values(order, na_position="first").reset_index(drop=True)
    assert list(got.columns) == list(PAIR_COLUMNS)
    pd.testing.assert_frame_equal(got, want, check_dtype=False, check_exact=False, rtol=1e-9)


def test_pairs_by_the_contract_rule(demo_db: Path, tmp_path: Path, indicators, attributes) -> None:
    out = tmp_path / "pairs.csv"
    result = milepost("export", "--db", demo_db, "--what", "pairs", "--format", "csv", "-o", out)
    assert "same ambition, ordered by policy_start" in result.stderr
    got = pd.read_csv(out, keep_default_na=False, na_values=[""])
    # [pairs] of the demo contract: same model and ambition; the earliest policy_start is first
    a = attributes.dropna(subset=["ambition", "policy_start"])
    earliest = a.loc[a.groupby(["model", "ambition"])["policy_start"].idxmin()]
    keys = a.merge(earliest, on=["model", "ambition"], suffixes=("", "_first"))
    keys = keys[keys["policy_start"] > keys["policy_start_first"]]
    keys = keys.rename(columns={"ambition": "group", "scenario": "scenario_later"})
    keys = keys[["model", "group", "scenario_first", "scenario_later"]]
    assert len(keys) == 12 and set(keys["scenario_later"]) == {"wait-firm", "wait-bold", "wait-deep"}
    compare(got, expected_pairs(indicators, keys))


def test_pairs_by_outcome_class_without_a_pairs_table(demo_db: Path, tmp_path: Path, indicators) -> None:
    out = tmp_path / "pairs.parquet"
    result = milepost(
        "export", "--db", demo_db, "--what", "pairs", "--format", "parquet", "-o", out, "--contract", BASIC_CONTRACT
    )
    assert "same outcome class" in result.stderr
    got = pd.read_parquet(out)
    # same model and budget_level at 67 % (not above every budget); lowest World CO2 in 2030 first
    refs = {(m, "drift") for m in indicators["model"]}  # every policy scenario's reference (scenario files)
    level = indicators[(indicators["kind"] == "budget_level") & (indicators["variable"] == "67%")]
    level = level.dropna(subset=["value"])[["model", "scenario", "value"]].rename(columns={"value": "level"})
    co2 = indicators[
        (indicators["kind"] == "value")
        & (indicators["variable"] == "emissions.co2")
        & (indicators["region"] == "World")
        & (indicators["year_from"] == 2030)
    ][["model", "scenario", "value"]]
    c = level.merge(co2, on=["model", "scenario"])
    c = c[~c.apply(lambda r: (r["model"], r["scenario"]) in refs, axis=1)]
    c = c.sort_values(["model", "level", "value", "scenario"])
    firsts = c.groupby(["model", "level"]).head(1)
    keys = c.merge(firsts, on=["model", "level"], suffixes=("", "_first"))
    keys = keys[keys["value"] > keys["value_first"]]
    keys["group"] = keys["level"].map(lambda v: f"{v:g} °C (67%)")
    keys = keys.rename(columns={"scenario": "scenario_later"})[["model", "group", "scenario_first", "scenario_later"]]
    assert len(keys) >= 8
    compare(got, expected_pairs(indicators, keys))


def test_pair_filters_and_refusals(demo_db: Path, tmp_path: Path) -> None:
    out = tmp_path / "p.csv"
    milepost(
        "export", "--db", demo_db, "--what", "pairs", "-f", "csv", "-o", out,
        "--model", "Ferrow", "--scenario", "wait-bold", "--variable", "cost.abatement",
    )  # fmt: skip
    got = pd.read_csv(out)
    assert set(got["model"]) == {"Ferrow"} and set(got["scenario_later"]) == {"wait-bold"}
    assert set(got["variable"]) == {"cost.abatement"} and len(got) > 0
    bad = CliRunner().invoke(
        app, ["export", "--db", str(demo_db), "--what", "pairs", "-f", "csv", "-o", str(out), "--submission", "1"]
    )
    assert bad.exit_code == 2 and "--submission does not apply to pairs" in bad.stderr
    bad = CliRunner().invoke(
        app, ["export", "--db", str(demo_db), "--what", "pairs", "-f", "csv", "-o", str(out), "--likelihood", "67"]
    )
    assert bad.exit_code == 2 and "percentage" in bad.stderr
