"""Duplicates family: duplicate-row (warning) and conflicting-row (error naming both lines)."""

from __future__ import annotations

from builders import consistent_rows, write_csv
from conftest import rules_at


def test_duplicate_row_is_a_warning(tmp_path, basic, check):
    rows = consistent_rows(basic)
    rows.append(dict(rows[5]))
    result = check(write_csv(tmp_path / "d.csv", rows), basic)
    (f,) = rules_at(result, "duplicate-row")
    assert (f.severity, f.line) == ("warning", 7)
    assert f"lines 7 and {len(rows) + 1}" in f.message
    assert result.counts["error"] == 0


def test_conflicting_row_names_both_lines(tmp_path, basic, check):
    rows = consistent_rows(basic)
    rows.append(dict(rows[5], value=rows[5]["value"] + 1))
    (f,) = rules_at(check(write_csv(tmp_path / "c.csv", rows), basic), "conflicting-row")
    assert (f.severity, f.line) == ("error", 7)
    assert f"lines 7 and {len(rows) + 1}" in f.message


def test_conflict_across_files_names_both_files(tmp_path, basic, check):
    rows = consistent_rows(basic)
    a = write_csv(tmp_path / "a.csv", rows)
    b = write_csv(tmp_path / "b.csv", [dict(rows[0], value=rows[0]["value"] * 2)])
    (f,) = rules_at(check([a, b], basic), "conflicting-row")
    assert f.path == str(a) and f.line == 2
    assert f"{a}:2 and {b}:2" in f.message
