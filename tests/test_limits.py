"""Limits of a check run: each bomb (built small here, with the limit lowered to match) gives its finding.

Their peak memory and time at full size are measured by `make bench` (the "bombs" step), not here.
"""

from __future__ import annotations

import dataclasses
import json
import zipfile

import pandas as pd
import pytest

from milepost.schema.contract import ContractError, load
from milepost.schema.limits import Limits
from milepost.validate.bench import bombs

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT, rules_at


def limited(tmp_path, **limits):
    """The basic test contract with some limits lowered."""
    folder = tmp_path / "limited"
    folder.mkdir(exist_ok=True)
    table = "\n".join(f"{k} = {v}" for k, v in limits.items())
    (folder / "contract.toml").write_text(f'name = "limited"\nextends = "{BASIC_CONTRACT}"\n[limits]\n{table}\n')
    return load(folder)


def counts(result):
    return {r: n for r, _, n in result.rule_counts}


def test_findings_beyond_the_cap_are_counted_not_stored(tmp_path, check):
    contract = limited(tmp_path, findings_stored_per_rule=50)
    path = bombs.empty_rows_csv(tmp_path / "empty.csv", rows=3000)
    result = check(path, contract)
    assert counts(result)["missing-value"] == 3000 * 7  # every cell of every row
    assert result.counts["error"] == 3000 * 7
    stored = result.con.execute("SELECT count(*) FROM findings WHERE rule = 'missing-value'").fetchall()[0][0]
    assert stored == 50
    assert result.truncated


def test_rows_beyond_the_limit_are_not_read(tmp_path, check, basic):
    contract = limited(tmp_path, max_rows=10)
    rows = consistent_rows(basic)
    assert len(rows) > 10
    csv_path = write_csv(tmp_path / "many.csv", rows)
    xlsx_path = tmp_path / "many.xlsx"
    pd.DataFrame(rows).to_excel(xlsx_path, index=False)
    parquet_path = tmp_path / "many.parquet"
    pd.DataFrame(rows).to_parquet(parquet_path)
    for path in (csv_path, xlsx_path, parquet_path):
        result = check(path, contract)
        found = rules_at(result, "limit-exceeded")
        assert len(found) == 1 and "max_rows" in found[0].message, path
        assert result.rows == 10, path


def test_a_header_wider_than_the_limit_is_refused(tmp_path, check):
    contract = limited(tmp_path, max_columns=50)
    result = check(bombs.many_columns_csv(tmp_path / "wide.csv", columns=100), contract)
    assert [f.rule for f in result.findings] == ["limit-exceeded"]
    assert "107 columns" in result.findings[0].message


def test_an_xlsx_cell_longer_than_the_limit_stops_the_reading(tmp_path, check, basic):
    result = check(bombs.huge_cell_xlsx(tmp_path / "cell.xlsx", chars=40_000), basic)
    found = rules_at(result, "limit-exceeded")
    assert len(found) == 1 and "32,767 characters" in found[0].message  # Excel's own cell limit, the default


def test_a_shared_text_longer_than_the_limit_stops_the_reading(tmp_path, check, basic):
    row = "".join(bombs.sheet_xml([bombs.HEADER])).replace(
        "</sheetData>", '<row r="2"><c r="A2" t="s"><v>0</v></c></row></sheetData>'
    )
    shared = (
        f'<sst xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><si><t>{"x" * 40_000}</t></si></sst>'
    )
    path = bombs.write_xlsx(tmp_path / "shared.xlsx", {"data": row}, extra={"xl/sharedStrings.xml": shared})
    assert "limit-exceeded" in {f.rule for f in check(path, basic).findings}


def test_an_xlsx_that_unzips_beyond_the_limit_is_refused_before_reading(tmp_path, check):
    contract = limited(tmp_path, max_xlsx_bytes=100_000)
    path = bombs.huge_cell_xlsx(tmp_path / "big.xlsx", chars=200_000)
    assert sum(i.file_size for i in zipfile.ZipFile(path).infolist()) > 100_000
    assert path.stat().st_size < 100_000  # small on disk
    result = check(path, contract)
    assert [f.rule for f in result.findings] == ["limit-exceeded"]
    assert "unzips to" in result.findings[0].message


def test_a_lying_dimension_is_not_trusted(tmp_path, check, basic):
    result = check(bombs.lying_dimension_xlsx(tmp_path / "dim.xlsx"), basic)
    assert result.rows == 1  # one data row, whatever the dimension and the far empty row claim
    assert {f.line for f in rules_at(result, "unknown-variable")} == {2}


def test_only_the_first_unknown_names_get_a_hint(tmp_path, check):
    contract = limited(tmp_path, hinted_names=5)
    result = check(bombs.unknown_variables_csv(tmp_path / "unknown.csv", n=400), contract)
    assert counts(result)["unknown-variable"] == 400
    names = result.con.execute("SELECT count(*), count(suggestion) FROM unknown_variables").fetchall()[0]
    assert names[0] == 400 and names[1] <= 5


def test_a_line_longer_than_the_limit_is_a_limit_finding(tmp_path, check, basic):
    contract = limited(tmp_path, max_line_bytes=500)
    rows = consistent_rows(basic)
    rows[1]["scenario"] = "s" * 2000
    result = check(write_csv(tmp_path / "long.csv", rows), contract)
    found = rules_at(result, "limit-exceeded")
    assert len(found) == 1 and "max_line_bytes" in found[0].message


@pytest.mark.parametrize(
    ("table", "message"),
    [
        ("max_rows = 0", "positive whole number"),
        ('max_rows = "many"', "positive whole number"),
        ("max_rows = 1.5", "positive whole number"),
        ("rows = 5", "unknown keys rows"),
    ],
)
def test_bad_limits_are_contract_errors(tmp_path, table, message):
    (tmp_path / "contract.toml").write_text(f'name = "x"\nextends = "core"\n[limits]\n{table}\n')
    with pytest.raises(ContractError, match=message):
        load(tmp_path)


def test_the_defaults_hold_without_a_limits_table(basic):
    assert basic.limits == Limits()
    assert Limits().max_cell_chars == 32_767  # Excel's cell limit (from memory of Excel's specifications table)


def test_the_limits_a_contract_sets_enter_its_hash(tmp_path):
    folder = tmp_path / "plain"
    folder.mkdir()
    (folder / "contract.toml").write_text(f'name = "limited"\nextends = "{BASIC_CONTRACT}"\n')
    plain = load(folder)
    assert plain.limits_set == () and plain.limits == Limits()
    ten, twenty = limited(tmp_path, max_rows=10), limited(tmp_path, max_rows=20)
    assert ten.limits_set == ("max_rows",) and ten.limits.max_rows == 10
    # the same contract checked under other limits is another contract for the database
    assert len({plain.hash, ten.hash, twenty.hash}) == 3
    assert limited(tmp_path, max_rows=10).hash == ten.hash  # stable for the same limits


def test_contract_show_prints_the_effective_limits(tmp_path):
    from typer.testing import CliRunner

    from milepost.validate.cli import app

    limited(tmp_path, max_rows=10)
    folder = str(tmp_path / "limited")
    res = CliRunner().invoke(app, ["contract", "show", folder])
    assert res.exit_code == 0, res.output
    assert "max_rows 10 (set)" in res.stdout and "max_columns 1,000," in res.stdout
    res = CliRunner().invoke(app, ["contract", "show", folder, "-f", "json"])
    shown = json.loads(res.stdout)["limits"]
    assert shown == {**dataclasses.asdict(Limits()), "max_rows": 10}


def _stored_lines(result, rule):
    rows = result.con.execute("SELECT line FROM findings WHERE rule = ? ORDER BY line", [rule]).fetchall()
    return [r[0] for r in rows]


def test_findings_beyond_the_cap_are_the_first_in_the_file_on_every_run(tmp_path, check):
    """Rules found through a join (unknown variable, unit that does not convert) and by a plain scan (year out of
    range), over enough rows for DuckDB to scan in parallel threads: a bare LIMIT would keep whichever rows the
    threads met first. The expected lines are read from the file with Python's csv module."""
    import csv

    contract = limited(tmp_path, findings_stored_per_rule=40)
    path = tmp_path / "many.csv"
    with path.open("w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["model", "scenario", "region", "variable", "unit", "year", "value"])
        for k in range(360_000):
            variable, unit, year = "emissions.co2", "Mt CO2/yr", 2030
            if k % 3 == 0:
                variable = f"made.up.{k % 11}"
            elif k % 5 == 0:
                unit = "EJ/yr"  # energy for an emission: does not convert
            elif k % 7 == 0:
                year = 1850
            w.writerow(["M1", f"S{k // 1000}", "World", variable, unit, year, 1.0])
    expected: dict[str, list[int]] = {"unknown-variable": [], "wrong-unit": [], "bad-year": []}
    with path.open(newline="") as f:
        for line, row in enumerate(csv.DictReader(f), start=2):
            known = not row["variable"].startswith("made.up.")
            rule = (
                "unknown-variable"
                if not known
                else "wrong-unit"
                if row["unit"] == "EJ/yr"
                else "bad-year"
                if row["year"] == "1850"
                else None
            )
            if rule and len(expected[rule]) < 40:
                expected[rule].append(line)
    first = check(path, contract)
    again = check(path, contract)
    for rule, lines in expected.items():
        assert counts(first)[rule] > 40
        assert _stored_lines(first, rule) == lines, rule
        assert _stored_lines(again, rule) == lines, rule
    assert [f.to_dict() for f in first.findings] == [f.to_dict() for f in again.findings]
