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
