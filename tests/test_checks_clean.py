"""A consistent submission passes with no findings at all, in each input format."""

from __future__ import annotations

import pandas as pd
import pytest

from builders import consistent_rows, write_csv


@pytest.mark.parametrize("fmt", ["csv", "xlsx", "parquet", "tsv"])
def test_consistent_submission_passes(tmp_path, basic, check, fmt):
    rows = consistent_rows(basic)
    frame = pd.DataFrame(rows)
    path = tmp_path / f"sub.{fmt}"
    if fmt == "csv":
        write_csv(path, rows)
    elif fmt == "tsv":
        write_csv(path, rows, delimiter="\t")
    elif fmt == "xlsx":
        frame.to_excel(path, sheet_name="data", index=False)
    else:
        frame.to_parquet(path, index=False)
    result = check(path, basic)
    assert result.findings == []
    assert result.passed("warning")
    assert result.rows == len(rows)
    assert result.usable_rows == len(rows)


def test_core_contract_accepts_iso_country_codes(tmp_path, core, check):
    rows = [r for r in consistent_rows(core) if r["region"] == "World"]
    rows += [dict(r, region="DEU") for r in rows if r["variable"] == "population"]
    result = check(write_csv(tmp_path / "iso.csv", rows), core)
    assert result.findings == []


def test_usable_rows_are_the_same_with_and_without_the_per_row_lookups(tmp_path, basic, check):
    # A clean file takes the short path (no unit or region lookups per row); one stray row forces the long one.
    rows = consistent_rows(basic)
    fast = check(write_csv(tmp_path / "fast.csv", rows), basic)
    slow = check(write_csv(tmp_path / "slow.csv", [*rows, dict(rows[0], variable="not.a.variable")]), basic)
    query = (
        "SELECT CAST(model AS VARCHAR), CAST(scenario AS VARCHAR), CAST(region AS VARCHAR), "
        "CAST(variable AS VARCHAR), CAST(unit AS VARCHAR), year, value, line FROM checked ORDER BY line"
    )
    assert fast.con.execute(query).fetchall() == slow.con.execute(query).fetchall()
    assert slow.counts["error"] == 1 and fast.counts["error"] == 0
