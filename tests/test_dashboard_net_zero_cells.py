"""The net-zero column says the same on Budgets as on Screen: a year, "not reached by YEAR", or a year marked
"(already ≤ 0)" where the stored note says the series was at or below zero in the base year already."""

from __future__ import annotations

import shutil
from pathlib import Path

import duckdb
import pandas as pd

from dashboard_fixtures import open_app

ALREADY = "at or below zero in every year from 2020 to 2100: already at net zero in 2020"  # timing.py's wording


def _table(at, column: str) -> pd.DataFrame:
    return next(d.value for d in at.dataframe if column in d.value.columns)


def test_budgets_explains_net_zero_cells_as_screen_does(demo_db: Path, tmp_path: Path) -> None:
    # a copy of the demo in which one scenario's World CO2 is at or below zero from the base year on: its stored
    # net-zero row is what ingest writes for such a series (year = base year, the note of timing.net_zero_sql)
    db = tmp_path / "already.duckdb"
    shutil.copy(demo_db, db)
    con = duckdb.connect(str(db))
    try:
        con.execute(
            "UPDATE indicators SET value = 2020, note = ? WHERE kind = 'net_zero_year' AND variable = 'emissions.co2'"
            " AND region = 'World' AND model = 'Ferrow' AND scenario = 'act-max'",
            [ALREADY],
        )
        never = con.execute(
            "SELECT count(*) FROM current_indicators WHERE kind = 'net_zero_year' AND variable = 'emissions.co2'"
            " AND region = 'World' AND value IS NULL"
        ).fetchone()[0]
    finally:
        con.close()
    assert never > 0

    # the same selection on both pages: every scenario (references too), banded by World CO2 in 2030, whose
    # net-zero year is the one Budgets sums to
    params = {"refs": "1", "var": "emissions.co2"}
    budgets = _table(open_app(db, "views/budgets.py", params), "net-zero year")
    screen = _table(open_app(db, "views/screen.py", params), "net-zero year")
    row = budgets[(budgets["model"] == "Ferrow") & (budgets["scenario"] == "act-max")]
    assert row["net-zero year"].tolist() == ["2020 (already ≤ 0)"]
    assert (budgets["net-zero year"] == "not reached by 2100").sum() == never
    both = budgets.merge(screen, on=["model", "scenario"], suffixes=("_budgets", "_screen"))
    assert len(both) == len(budgets)
    assert (both["net-zero year_budgets"] == both["net-zero year_screen"]).all()
