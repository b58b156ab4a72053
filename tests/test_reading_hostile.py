"""Reading careless and hostile files: physical lines, line endings, decimal commas, control characters in names,
paths that are not files, and damaged workbooks. Each gives its own finding with the right line."""

from __future__ import annotations

import os
import re

import pytest

from milepost.validate.bench import bombs
from milepost.validate.readers import logical_lines

from builders import consistent_rows, line_of, write_csv
from conftest import rules_at


def _lines(rows, tmp_path, name="x.csv", **kw):
    return write_csv(tmp_path / name, rows, **kw)


def test_findings_name_the_physical_line_after_a_quoted_newline(tmp_path, check, basic):
    rows = consistent_rows(basic)
    rows[0]["scenario"] = "S1"
    rows[3]["model"] = "M1\nsecond line"  # a quoted newline: this record spans lines 5 and 6
    rows[10]["variable"] = "no.such.variable"
    path = _lines(rows, tmp_path)
    text = path.read_text().splitlines()
    bad_line = next(i for i, t in enumerate(text, start=1) if "no.such.variable" in t)
    assert bad_line == line_of(rows, variable="no.such.variable") + 1  # one line further down than its record
    result = check(path, basic)
    assert [f.line for f in rules_at(result, "unknown-variable")] == [bad_line]
    assert [f.line for f in rules_at(result, "control-character")] == [5]


def test_blank_lines_and_rejected_lines_keep_the_lines_right(tmp_path, check, basic):
    rows = consistent_rows(basic)
    rows[6]["value"] = "abc"
    lines = _lines(rows, tmp_path).read_text().splitlines()
    lines.insert(3, "")  # a blank line: DuckDB skips it
    lines.insert(5, lines[4] + ",extra")  # an unsplittable line
    lines[2] = lines[2].replace("M1", '"M1\n"', 1)  # and a quoted newline before both
    path = tmp_path / "messy.csv"
    path.write_text("\n".join(lines) + "\n")
    physical = path.read_text().splitlines()
    abc = next(i for i, t in enumerate(physical, start=1) if t.endswith(",abc"))
    extra = next(i for i, t in enumerate(physical, start=1) if t.endswith(",extra"))
    result = check(path, basic)
    assert [f.line for f in rules_at(result, "bad-value")] == [abc]
    assert extra in [f.line for f in rules_at(result, "unreadable-file")]


def test_logical_lines_across_chunk_boundaries(tmp_path):
    # chunks of 7 bytes cut records, quotes and CRLF pairs anywhere; the answer must not depend on the cut
    text = b'a,b\r\n"x\r\ny",1\r\n\r\nc,"d\n\n"\nlast'
    path = tmp_path / "t.csv"
    path.write_bytes(text)
    # records: "a,b" (line 1), "x\r\ny",1 (lines 2-3), a blank one (4), c,"d\n\n" (5-7), last (8)
    whole = logical_lines(path)
    for size in (1, 2, 3, 7, 64):
        number, first = logical_lines(path, chunk_bytes=size)
        assert number.tolist() == whole[0].tolist() == [1, 2, 4, 5], size
        assert first.tolist() == whole[1].tolist() == [1, 2, 5, 8], size
        number, first = logical_lines(path, chunk_bytes=size, max_records=3)
        assert number.tolist() == [1, 2, 4] and first.tolist() == [1, 2, 5], size


def test_rows_between_long_runs_of_empty_lines_are_each_read_once(tmp_path, check, basic):
    """DuckDB 2.0's parallel reader, keeping rejected lines, reads some rows twice in a file of 34 MB with a
    million empty lines after each row (36 rows for 35: found by the bench's blank-lines file). Every row must be
    read once, on its physical line; the expected lines are counted in the file's bytes."""
    path = bombs.blank_lines_csv(tmp_path / "blank.csv", lines=34_000_000, every=1_000_000)
    data = path.read_bytes()
    # the physical line of each non-empty line after the header: the newlines before it, plus one
    expected = [data.count(b"\n", 0, m.start()) + 1 for m in re.finditer(rb"[^\n]+", data)][1:]
    result = check(path, basic)
    assert result.rows == len(expected) == 35
    assert [f.line for f in rules_at(result, "unknown-variable")] == expected
    assert any("read again in one thread" in n for n in result.inputs[0].notes)


def test_mixed_line_endings_are_read_with_a_note(tmp_path, check, basic):
    rows = consistent_rows(basic)
    lines = _lines(rows, tmp_path).read_text().splitlines()
    mixed = "".join(line + ("\r\n" if i % 3 else "\n") for i, line in enumerate(lines))
    path = tmp_path / "mixed.csv"
    path.write_bytes(mixed.encode())
    result = check(path, basic)
    assert result.findings == []
    assert result.rows == len(rows)
    assert any("mixed line endings" in n for n in result.inputs[0].notes)


def test_a_value_like_a_thousands_separator_under_decimal_commas_is_a_warning(tmp_path, check, basic):
    rows = consistent_rows(basic)
    path = _lines(rows, tmp_path, delimiter=";")
    lines = path.read_text().splitlines()
    out = [lines[0]] + [";".join([*ln.split(";")[:-1], "12,5"]) for ln in lines[1:]]
    out[4] = ";".join([*lines[4].split(";")[:-1], "51,169"])
    path.write_text("\n".join(out) + "\n")
    result = check(path, basic)
    found = rules_at(result, "ambiguous-decimal-comma")
    assert len(found) == 1 and found[0].severity == "warning"
    assert found[0].line == 5 and "51,169" in found[0].message and "1 values" in found[0].message


@pytest.mark.parametrize(("text", "code"), [("\x07", 7), ("\t", 9), ("\ufeff", 0xFEFF), ("\x1b", 27), ("\x85", 0x85)])
def test_names_with_control_characters_get_their_own_finding(tmp_path, check, basic, text, code):
    rows = consistent_rows(basic)
    for r in rows:
        if r["region"] == rows[0]["region"]:
            r["scenario"] = f"S{text}1"
    result = check(_lines(rows, tmp_path), basic)
    found = rules_at(result, "control-character")
    assert found and all(f.column_name == "scenario" for f in found)
    assert f"(code {code})" in found[0].message
    assert found[0].line == 2


def test_control_characters_in_two_columns_are_found_in_each_and_nowhere_else(tmp_path, check, basic):
    rows = consistent_rows(basic)
    rows[0]["model"] = rows[0]["model"] + "\x07"
    rows[3]["unit"] = rows[3]["unit"] + "\t"
    found = rules_at(check(_lines(rows, tmp_path), basic), "control-character")
    assert sorted((f.column_name, f.line) for f in found) == [("model", 2), ("unit", 5)]


def test_a_nul_in_a_name_is_not_silent(tmp_path, check, basic):
    rows = consistent_rows(basic)
    path = _lines(rows, tmp_path)
    data = path.read_bytes()
    # far enough into the file that it is not taken for a binary file at once
    cut = data.index(b"\n", 5000) + 1
    path.write_bytes(data[:cut] + b"M1\x00" + data[cut + 2 :])
    line = data[:cut].count(b"\n") + 1
    result = check(path, basic)
    found = rules_at(result, "control-character")
    assert [(f.line, f.column_name) for f in found] == [(line, "model")]
    assert "(code 0)" in found[0].message


def test_paths_that_are_not_files_say_what_they_are(tmp_path, check, basic):
    folder = tmp_path / "folder.csv"
    folder.mkdir()
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    loop = tmp_path / "loop.csv"
    loop.symlink_to(loop)
    dangling = tmp_path / "dangling.csv"
    dangling.symlink_to(tmp_path / "gone.csv")
    result = check([folder, fifo, loop, dangling, tmp_path / "missing.csv"], basic)
    messages = [f.message for f in rules_at(result, "unreadable-file")]
    assert any("a folder" in m for m in messages)
    assert any("named pipe" in m for m in messages)
    assert any("link loop" in m for m in messages)
    assert any("does not exist" in m for m in messages)
    assert any(m.endswith("no such file") for m in messages)


ROW = ("M1", "S1", "World", "emissions.co2", "Mt CO2/yr", 2020, 1.0)


@pytest.mark.parametrize(
    ("build", "words"),
    [
        (lambda p: bombs.write_xlsx(p, {}), "no worksheet"),
        (lambda p: bombs.write_xlsx(p, {}, chartsheets=["Chart1"]), "only 'Chart1' (chartsheet)"),
        (lambda p: bombs.write_xlsx(p, {"data": "<worksheet><sheetData><row r='1'><c"}), "not well-formed XML"),
        (
            lambda p: bombs.write_xlsx(
                p, {"data": "".join(bombs.sheet_xml([bombs.HEADER, ROW])).replace('r="A2"', 'r="2A"')}
            ),
            "not a cell reference",
        ),
        (
            lambda p: bombs.write_xlsx(
                p,
                {
                    "data": '<?xml version="1.0"?><!DOCTYPE x [<!ENTITY a "aaaa"><!ENTITY b "&a;&a;&a;">]>'
                    "<worksheet><sheetData><row r='1'><c r='A1' t='inlineStr'><is><t>&b;</t></is></c></row>"
                    "</sheetData></worksheet>"
                },
            ),
            "DTD",
        ),
        (
            lambda p: bombs.write_xlsx(
                p, {"data": "".join(bombs.sheet_xml([bombs.HEADER, ROW])).replace("<v>2020</v>", "<v>2020")}
            ),
            "not well-formed XML",
        ),
    ],
    ids=["no-sheets", "chartsheet", "malformed", "bad-reference", "dtd", "unclosed"],
)
def test_damaged_workbooks_are_findings(tmp_path, check, basic, build, words):
    result = check(build(tmp_path / "w.xlsx"), basic)
    found = rules_at(result, "unreadable-file")
    assert len(found) == 1 and words in found[0].message, [f.message for f in result.findings]


def test_a_sheet_name_with_a_quote_is_checked_like_any_other(tmp_path, check, basic):
    rows = consistent_rows(basic)
    body = bombs.sheet_xml([bombs.HEADER, *([r[k] for k in bombs.HEADER] for r in rows)])
    result = check(bombs.write_xlsx(tmp_path / "bob.xlsx", {"Bob's data": body}), basic)
    assert result.findings == []
    assert result.inputs[0].sheet == "Bob's data" and result.rows == len(rows)


def test_a_chartsheet_before_the_data_is_skipped(tmp_path, check, basic):
    rows = consistent_rows(basic)
    body = "".join(bombs.sheet_xml([bombs.HEADER, *([r[k] for k in bombs.HEADER] for r in rows)]))
    path = bombs.write_xlsx(tmp_path / "c.xlsx", {"numbers": body}, chartsheets=["Chart1"])
    result = check(path, basic)
    assert result.findings == [] and result.rows == len(rows)
