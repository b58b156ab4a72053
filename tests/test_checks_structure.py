"""Structure family: unreadable-file, missing-column, unexpected-column, bad-year, bad-value, missing-value."""

from __future__ import annotations

import pytest

from builders import HEADER, consistent_rows, line_of, write_csv
from conftest import rules_at


@pytest.fixture
def rows(basic):
    return consistent_rows(basic)


def test_unreadable_file_missing_path(tmp_path, basic, check):
    result = check(tmp_path / "absent.csv", basic)
    (f,) = rules_at(result, "unreadable-file")
    assert "no such file" in f.message
    assert not result.passed()


def test_missing_column_names_the_column_and_the_header(tmp_path, basic, check, rows):
    path = write_csv(tmp_path / "m.csv", rows, header=[h for h in HEADER if h != "unit"])
    (f,) = rules_at(check(path, basic), "missing-column")
    assert f.line == 1
    assert "unit" in f.message
    assert f.expected == ", ".join(HEADER)


def test_columns_match_ignoring_case_and_spaces(tmp_path, basic, check, rows):
    header = [" Model", "SCENARIO", "Region ", "Variable", "Unit", "Year", "Value"]
    renamed = [dict(zip(header, (r[h] for h in HEADER), strict=True)) for r in rows]
    result = check(write_csv(tmp_path / "c.csv", renamed, header=header), basic)
    assert result.findings == []


def test_unexpected_column_is_a_warning(tmp_path, basic, check, rows):
    path = write_csv(tmp_path / "u.csv", [dict(r, comment="x") for r in rows], header=[*HEADER, "comment"])
    result = check(path, basic)
    (f,) = rules_at(result, "unexpected-column")
    assert (f.severity, f.line, f.value) == ("warning", 1, "comment")
    assert result.passed("error") and not result.passed("warning")


@pytest.mark.parametrize(
    ("cell", "expected_rule"),
    [("2030.5", "bad-year"), ("twenty", "bad-year"), ("2200", "bad-year"), ("", "missing-value")],
)
def test_bad_year(tmp_path, basic, check, rows, cell, expected_rule):
    rows[7]["year"] = cell
    result = check(write_csv(tmp_path / "y.csv", rows), basic)
    found = rules_at(result, expected_rule)
    assert [f.line for f in found] == [9]
    if expected_rule == "bad-year":
        assert "2010" in found[0].expected and "2100" in found[0].expected


@pytest.mark.parametrize("cell", ["abc", "inf", "-Infinity", "1e400", "12,5.3"])
def test_bad_value(tmp_path, basic, check, rows, cell):
    rows[3]["value"] = cell
    (f,) = rules_at(check(write_csv(tmp_path / "v.csv", rows), basic), "bad-value")
    assert (f.line, f.value, f.expected) == (5, cell, "a finite number")


@pytest.mark.parametrize("cell", ["", "n/a", "NA", "NaN", "null"])
def test_missing_value(tmp_path, basic, check, rows, cell):
    rows[10]["value"] = cell
    (f,) = rules_at(check(write_csv(tmp_path / "n.csv", rows), basic), "missing-value")
    assert f.line == 12
    assert f.expected == "a value"


def test_missing_key_cell(tmp_path, basic, check, rows):
    rows[0]["scenario"] = ""
    (f,) = rules_at(check(write_csv(tmp_path / "k.csv", rows), basic), "missing-value")
    assert (f.line, f.expected) == (2, "a scenario")


def test_lines_follow_the_file_after_an_unparseable_row(tmp_path, basic, check, rows):
    path = write_csv(tmp_path / "r.csv", rows)
    lines = path.read_text().splitlines()
    lines.insert(4, "M1,S1,World")  # physical line 5: too few fields
    path.write_text("\n".join(lines) + "\n")
    rows[6]["value"] = "oops"  # originally line 8, now line 9
    text = path.read_text().splitlines()
    text[8] = text[8].rsplit(",", 1)[0] + ",oops"
    path.write_text("\n".join(text) + "\n")
    result = check(path, basic)
    assert [f.line for f in rules_at(result, "unreadable-file")] == [5]
    assert [f.line for f in rules_at(result, "bad-value")] == [9]
    assert line_of(rows, value="oops") == 8
