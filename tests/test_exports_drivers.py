"""Drivers, burden sharing and gaps through `milepost export` on the demo database (the CLI's real entry point)."""

from __future__ import annotations

from pathlib import Path

import duckdb
import pandas as pd
import pytest

from milepost.validate.store.exports import Filters, export


def test_export_indicators_and_gaps_through_the_cli(demo_db: Path, tmp_path: Path, run_milepost) -> None:
    ind, raw_gaps, gaps = tmp_path / "i.csv", tmp_path / "raw-gaps.csv", tmp_path / "gaps.csv"
    codes, _ = run_milepost(
        [
            ["export", "--what", "indicators", "-f", "csv", "-o", ind, "--db", demo_db],
            ["export", "--what", "gaps", "-f", "csv", "-o", raw_gaps, "--db", demo_db],
            ["export", "--what", "gaps", "--basis", "harmonised", "-f", "csv", "-o", gaps, "--db", demo_db],
        ]
    )
    assert codes == [0, 0, 0]
    df = pd.read_csv(ind)
    lmdi = df[df.kind.str.startswith("lmdi_")]
    assert set(lmdi.unit) == {"Mt CO2"} and lmdi.value.notna().any()
    # the four effects add up to the change of fossil CO2 between the base year and the milestone
    effects = lmdi.dropna(subset=["value"]).groupby(["model", "scenario", "region", "year_to"]).value.sum()
    co2 = (
        df[(df.kind == "value") & (df.variable == "emissions.co2.fossil")]
        .set_index(["model", "scenario", "region", "year_to"])
        .value
    )
    base = (
        df[(df.kind == "value") & (df.variable == "emissions.co2.fossil") & (df.year_to == 2020)]
        .set_index(["model", "scenario", "region"])
        .value
    )
    change = co2.loc[effects.index] - base.reindex(effects.index.droplevel("year_to")).to_numpy()
    assert len(effects) > 100
    assert (effects - change).abs().max() == pytest.approx(0.0, abs=1e-6)
    transfers = df[df.kind == "transfer"]
    assert set(transfers.variable) == {"grandfathering", "per_capita", "convergence"}
    assert set(transfers.unit) == {"billion USD_2015/yr"}
    assert transfers.groupby(["model", "scenario", "variable", "year_to"]).value.sum().abs().max() < 1e-6
    # every demo scenario reports every input in raw values; harmonisation leaves fossil CO2 out (a total whose
    # parts are not all harmonised), so the harmonised drivers are gaps that say so
    assert pd.read_csv(raw_gaps).empty
    g = pd.read_csv(gaps)
    assert not g.empty and g.kind.str.startswith("lmdi_").any()
    assert g.note.str.contains("no emissions.co2.fossil is reported").all()


def test_gaps_export_of_a_database_before_schema_6_is_empty(demo_db: Path, tmp_path: Path) -> None:
    old = tmp_path / "old.duckdb"
    old.write_bytes(demo_db.read_bytes())
    con = duckdb.connect(str(old))
    con.execute("DROP VIEW current_indicator_gaps_by_basis")
    con.execute("DROP VIEW current_indicator_gaps")
    con.execute("DROP TABLE indicator_gaps")
    con.execute("UPDATE meta SET value = '5' WHERE key = 'schema_version'")
    con.close()
    assert export(old, "gaps", "csv", tmp_path / "g.csv", Filters()) == 0
