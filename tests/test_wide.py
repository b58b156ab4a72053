"""Wide tables (one column per year): read as the long table, with the same findings as its long twin."""

from __future__ import annotations

from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from builders import consistent_rows, write_csv
from conftest import rules_at

KEYS = ["model", "scenario", "region", "variable", "unit"]


def _broken_rows(contract) -> list[dict]:
    """A consistent submission with three things wrong: a text value, a negative non-negative value, an
    unknown region (on every year of its series)."""
    rows = consistent_rows(contract)
    rows[3]["value"] = "lots"
    neg = next(i for i, r in enumerate(rows) if r["variable"] == "energy.primary" and r["year"] == 2050)
    rows[neg]["value"] = -5.0
    odd = [r for r in rows if r["variable"] == "population"][:1]
    rows += [dict(r, region="Atlantis") for r in consistent_rows(contract) if r["variable"] == odd[0]["variable"]][:4]
    return rows


def _wide(rows: list[dict]) -> pd.DataFrame:
    frame = pd.DataFrame(rows).astype({"value": "str"})
    wide = frame.pivot_table(index=KEYS, columns="year", values="value", aggfunc="first", sort=False)
    wide.columns = [str(c) for c in wide.columns]
    return wide.reset_index()


def _comparable(result) -> list[tuple]:
    """Findings without what a layout changes: the line, the column name and the message's location suffix."""
    return sorted(
        (f.rule, f.severity, f.model, f.scenario, f.region, f.variable, f.unit, f.year, f.value, f.expected)
        for f in result.findings
        if f.rule not in ("wide-table",)
    )


@pytest.fixture(scope="module")
def twins(tmp_path_factory, basic):
    d: Path = tmp_path_factory.mktemp("wide")
    rows = _broken_rows(basic)
    long_csv = write_csv(d / "long.csv", rows)
    wide = _wide(rows)
    wide_csv = d / "wide.csv"
    wide.to_csv(wide_csv, index=False)
    wide_xlsx = d / "wide.xlsx"
    with pd.ExcelWriter(wide_xlsx) as xw:
        # year headers as numbers, as a spreadsheet keeps them
        wide.rename(columns={c: int(c) for c in wide.columns if c.isdigit()}).to_excel(
            xw, sheet_name="data", index=False
        )
    wide_parquet = d / "wide.parquet"
    wide.to_parquet(wide_parquet)
    return rows, wide, {"long": long_csv, "csv": wide_csv, "xlsx": wide_xlsx, "parquet": wide_parquet}


@pytest.mark.parametrize("kind", ["csv", "xlsx", "parquet"])
def test_wide_file_gives_the_findings_of_its_long_twin(twins, basic, check, kind):
    _, _, paths = twins
    long = check(paths["long"], basic)
    wide = check(paths[kind], basic)
    assert _comparable(long)  # the twins are broken, so the comparison means something
    assert _comparable(wide) == _comparable(long)
    assert wide.usable_rows == long.usable_rows
    assert wide.rows == long.rows
    (note,) = rules_at(wide, "wide-table")
    assert note.severity == "note"
    assert "wide table: 4 year columns (2020–2100)" in wide.inputs[0].notes[0]
    assert not rules_at(wide, "unexpected-column") and not rules_at(wide, "missing-column")


def test_wide_findings_keep_the_files_line_and_name_the_year_column(twins, basic, check):
    rows, wide, paths = twins
    bad = rows[3]
    # the line of the wide row holding that series (header = line 1)
    match = (wide[KEYS] == pd.Series({k: bad[k] for k in KEYS})).all(axis=1)
    line = int(match.to_numpy().nonzero()[0][0]) + 2
    year = str(bad["year"])
    (f,) = rules_at(check(paths["csv"], basic), "bad-value")
    assert (f.line, f.column_name, f.year) == (line, year, bad["year"])
    assert f.message.endswith(f"(column {year})")
    (x,) = rules_at(check(paths["xlsx"], basic), "bad-value")
    letter = "ABCDEFGHIJ"[list(wide.columns).index(year)]
    assert x.line == line and x.sheet == "data"
    assert x.message.endswith(f"(column {year}, cell {letter}{line})")
    # the cell named is the cell holding the text (read back with openpyxl)
    ws = openpyxl.load_workbook(paths["xlsx"], read_only=True)["data"]
    assert ws[f"{letter}{line}"].value == "lots"
    # a finding about the series, not a year's cell, keeps its own column
    region = rules_at(check(paths["csv"], basic), "unknown-region")
    assert region and all(r.column_name == "region" for r in region)


def test_a_table_with_year_and_value_columns_stays_long(tmp_path, basic, check):
    rows = consistent_rows(basic)
    path = write_csv(tmp_path / "l.csv", [dict(r, **{"2030": "x"}) for r in rows], header=[*rows[0], "2030"])
    result = check(path, basic)
    assert not result.inputs[0].wide
    (f,) = rules_at(result, "unexpected-column")
    assert "2030" in f.value


def test_empty_year_cells_are_rows_not_reported(tmp_path, basic, check):
    rows = consistent_rows(basic)
    wide = _wide(rows)
    wide.loc[0, "2100"] = None
    path = tmp_path / "gap.csv"
    wide.to_csv(path, index=False)
    result = check(path, basic)
    assert result.usable_rows == len(rows) - 1
    assert not rules_at(result, "missing-value")


def test_the_xlsx_report_marks_the_year_cell_of_a_wide_file(twins, basic, check, tmp_path):
    from milepost.validate.reports import to_xlsx

    _, _, paths = twins
    result = check(paths["xlsx"], basic)
    (f,) = rules_at(result, "bad-value")
    report = to_xlsx(result, tmp_path / "r.xlsx")
    copy = openpyxl.load_workbook(report)["copy 1"]
    cell = f.message.rsplit("cell ", 1)[1].rstrip(")")
    assert copy[cell].comment is not None and "bad-value" in copy[cell].comment.text


def test_the_dashboards_self_check_reads_a_wide_upload(twins, basic):
    from milepost.dashboard.checking import CheckedUpload

    _, _, paths = twins
    upload = CheckedUpload([("wide.csv", paths["csv"].read_bytes())], basic)
    try:
        rules = set(upload.findings["rule"])
        assert "wide-table" in rules and "missing-column" not in rules and "bad-value" in rules
    finally:
        upload.close()


def _wide_temp_table(con, path: Path):
    """The wide TEMP table a reader builds from a wide CSV (every cell as text), and its year columns."""
    from milepost.validate.sql import literal
    from milepost.validate.wide import wide_select, year_columns

    header = list(pd.read_csv(path, nrows=0).columns)
    years = year_columns(header, {k: k for k in KEYS})
    src = f"read_csv({literal(str(path))}, header = true, all_varchar = true)"
    con.execute(f"CREATE TEMP TABLE w AS {wide_select({k: k for k in KEYS}, years, header, src, 'NULL::BIGINT')}")
    return years


def test_the_row_limit_counts_the_long_rows_a_wide_table_makes(tmp_path, basic):
    import duckdb

    from milepost.validate.wide import fit_long_rows, long_source

    wide = _wide(consistent_rows(basic)).head(6)
    wide.loc[1, "2050"] = None  # an empty cell makes no long row
    path = tmp_path / "w.csv"
    wide.to_csv(path, index=False)
    # independent count of the long rows each wide row ends at: pandas over the same frame
    upto = wide[[c for c in wide.columns if c.isdigit()]].notna().sum(axis=1).cumsum().tolist()
    assert upto == [4, 7, 11, 15, 19, 23]
    con = duckdb.connect()
    years = _wide_temp_table(con, path)
    assert fit_long_rows(con, "w", years, max_rows=23) is None  # exactly at the limit: all of it
    why = fit_long_rows(con, "w", years, max_rows=12)
    # 6 wide rows are fewer than 12, but their 23 long rows are not: the first 3 rows (11 long rows) are kept
    assert why == (
        "more than 12 rows (max_rows, counted as long rows: one per non-empty year cell; the wide table holds 23): "
        "only its first 3 rows (11 long rows) were read"
    )
    assert con.execute(f"SELECT count(*), max(line) FROM {long_source('w', years)}").fetchall() == [(11, 4)]


def test_a_wide_file_beyond_max_rows_in_long_rows_is_a_limit_finding(tmp_path, check):
    from test_limits import limited

    contract = limited(tmp_path, max_rows=12)
    wide = _wide(consistent_rows(contract)).head(6)
    path = tmp_path / "w.csv"
    wide.to_csv(path, index=False)
    result = check(path, contract)
    (f,) = rules_at(result, "limit-exceeded")
    assert "counted as long rows" in f.message
    assert result.rows == 12
