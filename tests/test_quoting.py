"""Names with quotes (file names, sheet names, headers, names in the data) are checked and stored like any other."""

from __future__ import annotations

import json
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from typer.testing import CliRunner

from milepost.validate.cli import app
from milepost.validate.sql import enum_type, identifier, literal, literal_list, qualified
from milepost.validate.store.exports import export, snapshot
from milepost.validate.store.ingest import ingest

from builders import HEADER, consistent_rows, line_of, write_csv
from conftest import BASIC_CONTRACT

QUOTED = ["o'hara", 'say "hi"', 'Bob\'s "data"', "semi;colon, and 'both\""]


def test_sql_text_round_trips_through_duckdb():
    import duckdb

    con = duckdb.connect()
    for text in [*QUOTED, "", "back\\slash", "new\nline", "ünï"]:
        assert con.execute(f"SELECT {literal(text)}").fetchall() == [(text,)]
        assert con.execute(f"SELECT 1 AS {identifier(text or ' ')}").description[0][0] == (text or " ")
    assert con.execute(f"SELECT {literal_list(QUOTED)}").fetchall() == [(QUOTED,)]
    con.execute(f"CREATE TABLE {identifier('a.b')} (x {enum_type(QUOTED)})")
    con.execute(f"INSERT INTO {identifier('a.b')} VALUES (?)", [QUOTED[1]])
    assert con.execute(f"SELECT x::VARCHAR FROM {qualified('memory.main')}.{identifier('a.b')}").fetchall() == [
        (QUOTED[1],)
    ]
    assert enum_type([]) == "VARCHAR"
    with pytest.raises(ValueError, match="not a table name"):
        qualified("a..b")


@pytest.mark.parametrize("name", ["o'hara.csv", 'say "hi".csv', 'it\'s; "both".tsv'])
def test_a_csv_file_name_with_quotes_is_checked(tmp_path, basic, check, name):
    rows = consistent_rows(basic)
    rows[3]["value"] = "oops"
    path = write_csv(tmp_path / name, rows, delimiter="\t" if name.endswith(".tsv") else ",")
    result = check(path, basic)
    bad = [f for f in result.findings if f.rule == "bad-value"]
    assert [(f.path, f.line) for f in bad] == [(str(path), 5)]
    assert result.usable_rows == len(rows) - 1


@pytest.mark.parametrize("sheet", ["Bob's data", 'the "final" one'])
def test_an_xlsx_sheet_name_with_quotes_is_checked(tmp_path, basic, check, sheet):
    rows = consistent_rows(basic)
    rows[1]["region"] = "Atlantis"
    path = tmp_path / "o'brien.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = sheet
    ws.append(HEADER)
    for r in rows:
        ws.append([r[c] for c in HEADER])
    wb.save(path)
    result = check(path, basic)
    unknown = [f for f in result.findings if f.rule == "unknown-region"]
    assert [(f.path, f.sheet, f.line, f.value) for f in unknown] == [(str(path), sheet, 3, "Atlantis")]
    # the XLSX report copies the sheet and marks the region cell of that row
    out = tmp_path / "re'port.xlsx"
    res = CliRunner().invoke(app, ["check", str(path), "-c", str(BASIC_CONTRACT), "-f", "xlsx", "-o", str(out)])
    assert res.exit_code == 1, res.output
    copy = openpyxl.load_workbook(out)["copy 1"]
    assert copy.cell(row=3, column=HEADER.index("region") + 1).comment.text.startswith("unknown-region: ")


def test_names_in_the_data_and_headers_with_quotes(tmp_path, basic, check):
    rows = consistent_rows(basic, model='O\'Neil "M"', scenario="it's 1.5")
    rows.append({**rows[0], "variable": "emission's"})
    path = write_csv(tmp_path / "x.csv", rows, header=[*HEADER, 'note "it\'s"'])
    result = check(path, basic)
    assert sorted({f.rule for f in result.findings}) == ["unexpected-column", "unknown-variable"]
    (unknown,) = [f for f in result.findings if f.rule == "unknown-variable"]
    assert (unknown.model, unknown.scenario, unknown.value, unknown.line) == (
        'O\'Neil "M"',
        "it's 1.5",
        "emission's",
        line_of(rows, variable="emission's"),
    )
    assert result.scenarios[["model", "scenario"]].values.tolist() == [['O\'Neil "M"', "it's 1.5"]]


def test_ingest_export_and_snapshot_with_quoted_paths_and_attributes(tmp_path, basic):
    rows = consistent_rows(basic, model="O'Neil", scenario='say "hi"')
    data = write_csv(tmp_path / "o'hara.csv", rows)
    scen = tmp_path / 'scen "one".csv'
    pd.DataFrame({"model": ["O'Neil"], "scenario": ['say "hi"'], 'it\'s "x"': ["yes"]}).to_csv(scen, index=False)
    db = tmp_path / "bob's.duckdb"
    res = ingest([data, scen], db, BASIC_CONTRACT)
    assert res.status == "accepted", res.reason
    assert [f["name"] for f in res.files] == ["o'hara.csv", 'scen "one".csv']
    out = tmp_path / "it's out.csv"
    assert export(db, "data", "csv", out) == len(rows)
    assert set(pd.read_csv(out)["model"]) == {"O'Neil"}
    manifest = snapshot(db, tmp_path / "snap'shot")
    assert manifest["tables"]["data"]["rows"] == len(rows)
    stored = CliRunner().invoke(app, ["submissions", "--db", str(db), "-f", "json"])
    assert stored.exit_code == 0, stored.output
    (sub,) = json.loads(stored.stdout)
    assert [f["name"] for f in sub["files"]] == ["o'hara.csv", 'scen "one".csv']


def test_parquet_file_name_with_quotes(tmp_path: Path, basic, check):
    rows = consistent_rows(basic)
    path = tmp_path / 'it\'s "q".parquet'
    pd.DataFrame(rows).to_parquet(path)
    result = check(path, basic)
    assert result.findings == [] and result.usable_rows == len(rows)
