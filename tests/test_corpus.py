"""A corpus of bad inputs: each one gives a finding and exit code 1, never a traceback."""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys

import pandas as pd
import pytest
from hostile import BROKEN_CONTRACTS, broken_contract
from typer.testing import CliRunner

from milepost.validate.bench import bombs
from milepost.validate.cli import app

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT

NOT_FILES = {"folder.csv", "loop.csv"}


def _clean(tmp_path, basic):
    return write_csv(tmp_path / "clean.csv", consistent_rows(basic))


def _corpus(tmp_path, basic):
    clean = _clean(tmp_path, basic)
    text = clean.read_text()
    lines = text.splitlines()
    xlsx = tmp_path / "good.xlsx"
    pd.DataFrame(consistent_rows(basic)).to_excel(xlsx, index=False)
    data = xlsx.read_bytes()
    cases = {
        "empty.csv": (b"", "unreadable-file"),
        "garbage.csv": (os.urandom(3000).replace(b"\n", b"x") + b"\x00\x01", "unreadable-file"),
        "garbage.xlsx": (os.urandom(3000), "unreadable-file"),
        "truncated.xlsx": (data[: len(data) // 2], "unreadable-file"),
        "colon.csv": (text.replace(",", ":").encode(), "missing-column"),
        "header-only.csv": ((lines[0] + "\n").encode(), "empty-table"),
        "huge.csv": ("\n".join([lines[0], lines[1].rsplit(",", 1)[0] + ",1e999", *lines[2:]]).encode(), "bad-value"),
        "inf.csv": ("\n".join([lines[0], lines[1].rsplit(",", 1)[0] + ",inf", *lines[2:]]).encode(), "bad-value"),
        "na.csv": ("\n".join([lines[0], lines[1].rsplit(",", 1)[0] + ",n/a", *lines[2:]]).encode(), "missing-value"),
        "half-year.csv": (
            "\n".join([lines[0], lines[1].replace(",2020,", ",2030.5,"), *lines[2:]]).encode(),
            "bad-year",
        ),
        "ragged.csv": ("\n".join([lines[0], lines[1] + ",extra,cells", *lines[2:]]).encode(), "unreadable-file"),
        "old.xls": (b"\xd0\xcf\x11\xe0" + b"\x00" * 100, "unreadable-file"),
        "parquet.parquet": (b"PAR1 not really", "unreadable-file"),
    }
    for name, (content, _) in cases.items():
        (tmp_path / name).write_bytes(content)
    return {name: rule for name, (_, rule) in cases.items()} | _hostile(tmp_path, basic, lines)


def _hostile(tmp_path, basic, lines):
    """Files a hostile submitter would try: damaged workbooks, bombs (at a small size), invisible characters."""
    row = ("M1", "S1", "World", "no.such.variable", "Mt CO2/yr", 2020, 1.0)
    good_sheet = "".join(bombs.sheet_xml([bombs.HEADER, row]))
    hostile = {
        "no-sheets.xlsx": (lambda p: bombs.write_xlsx(p, {}), "unreadable-file"),
        "chartsheet.xlsx": (lambda p: bombs.write_xlsx(p, {}, chartsheets=["Chart1"]), "unreadable-file"),
        "malformed.xlsx": (lambda p: bombs.write_xlsx(p, {"data": good_sheet[:-40]}), "unreadable-file"),
        "bad-reference.xlsx": (
            lambda p: bombs.write_xlsx(p, {"data": good_sheet.replace('r="B2"', 'r="B0"')}),
            "unreadable-file",
        ),
        "dtd.xlsx": (
            lambda p: bombs.write_xlsx(
                p, {"data": good_sheet.replace("<worksheet", '<!DOCTYPE w [<!ENTITY a "b">]><worksheet', 1)}
            ),
            "unreadable-file",
        ),
        "bob.xlsx": (lambda p: bombs.write_xlsx(p, {"Bob's data": good_sheet}), "unknown-variable"),
        "huge-cell.xlsx": (lambda p: bombs.huge_cell_xlsx(p, chars=40_000), "limit-exceeded"),
        "lying-dimension.xlsx": (bombs.lying_dimension_xlsx, "unknown-variable"),
        "empty-rows.csv": (lambda p: bombs.empty_rows_csv(p, rows=2_000), "missing-value"),
        "unknown-variables.csv": (lambda p: bombs.unknown_variables_csv(p, n=2_000), "unknown-variable"),
        "many-columns.csv": (lambda p: bombs.many_columns_csv(p, columns=1_200), "limit-exceeded"),
        "bell.csv": (
            lambda p: p.write_text("\n".join([lines[0], lines[1].replace("M1", "M1\x07", 1), *lines[2:]])),
            "control-character",
        ),
        "nul.csv": (  # past the first 4 KiB, where a NUL no longer means "a binary file"
            lambda p: p.write_text("\n".join([*lines[:120], lines[120].replace("M1", "M1\x00", 1), *lines[121:]])),
            "control-character",
        ),
        "quoted-newline.csv": (
            lambda p: p.write_text("\n".join([lines[0], lines[1].replace("M1", '"M\n1"', 1), *lines[2:]])),
            "control-character",
        ),
        "mixed-endings.csv": (
            lambda p: p.write_bytes(
                ("\r\n".join(lines[:5]) + "\n" + "\n".join([lines[5].rsplit(",", 1)[0] + ",x", *lines[6:]])).encode()
            ),
            "bad-value",
        ),
        "folder.csv": (lambda p: p.mkdir(), "unreadable-file"),
        "loop.csv": (lambda p: p.symlink_to(p), "unreadable-file"),
    }
    for name, (make, _) in hostile.items():
        make(tmp_path / name)
    return {name: rule for name, (_, rule) in hostile.items()}


def test_every_bad_input_gives_its_finding(tmp_path, basic):
    runner = CliRunner()
    for name, rule in _corpus(tmp_path, basic).items():
        res = runner.invoke(app, ["check", str(tmp_path / name), "--contract", str(BASIC_CONTRACT), "-f", "json"])
        assert res.exception is None or isinstance(res.exception, SystemExit), (name, res.exception)
        assert res.exit_code == 1, (name, res.stdout, res.stderr)
        report = json.loads(res.stdout)
        assert rule in {f["rule"] for f in report["findings"]}, (name, [f["rule"] for f in report["findings"]])


def test_real_entry_point_never_prints_a_traceback(tmp_path, basic):
    names = list(_corpus(tmp_path, basic))
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "milepost.validate",
            "check",
            *[str(tmp_path / n) for n in names],
            "--contract",
            str(BASIC_CONTRACT),
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 1
    assert "Traceback" not in proc.stdout + proc.stderr
    assert proc.stdout.splitlines()[-1].startswith("FAILED: ")


def test_each_bad_input_through_every_command_that_reads_it_prints_no_traceback(tmp_path, basic, run_milepost):
    names = list(_corpus(tmp_path, basic))
    contract = ["--contract", str(BASIC_CONTRACT)]
    commands = []
    for name in names:
        path = str(tmp_path / name)
        commands += [
            ["check", path, *contract],
            ["check", path, *contract, "-f", "json", "-o", str(tmp_path / f"{name}.json")],
            ["check", path, *contract, "-f", "xlsx", "-o", str(tmp_path / f"{name}.xlsx")],
            ["ingest", path, *contract, "--db", str(tmp_path / "corpus.duckdb")],
        ]
    codes, stderr = run_milepost(commands)
    assert "Traceback" not in stderr
    assert len(codes) == len(commands)
    # ingest refuses a path that is not a file before it checks anything: a usage error (exit 2), named as such
    expected = [2 if c[0] == "ingest" and os.path.basename(c[1]) in NOT_FILES else 1 for c in commands]
    wrong = [
        (c[0], os.path.basename(c[1]), code)
        for c, code, want in zip(commands, codes, expected, strict=True)
        if code != want
    ]
    assert not wrong, wrong
    assert not (tmp_path / "logs").exists()


def test_every_bad_input_in_the_self_checks_child_gives_its_finding_never_check_aborted(tmp_path, basic):
    """The whole corpus in one child within the default budgets: each file's own finding, as in-process; a bad
    file is a finding of that file, never a child that aborts (`check-aborted` is for budgets and crashes)."""
    import duckdb
    from test_limits import limited

    from milepost.validate.isolated import check_in_child

    corpus = _corpus(tmp_path, basic)
    # one run of all files: empty-rows.csv alone makes 14,000 missing-value findings, so the cap on stored
    # findings is raised for every file's finding to be stored
    limited(tmp_path, findings_stored_per_rule=100_000)
    child = check_in_child([tmp_path / n for n in corpus], tmp_path / "limited", tmp_path / "out")
    assert child.failure is None, child.failure
    found = (
        duckdb.connect()
        .execute("SELECT DISTINCT path, rule FROM read_parquet(?)", [str(child.findings_path)])
        .fetchall()
    )
    rules: dict[str, set[str]] = {}
    for path, rule in found:
        rules.setdefault(os.path.basename(path), set()).add(rule)
    missing = {name: sorted(rules.get(name, ())) for name, rule in corpus.items() if rule not in rules.get(name, ())}
    assert not missing, missing
    assert "check-aborted" not in {r for rs in rules.values() for r in rs}


@pytest.mark.parametrize(
    ("encoding", "bom", "delimiter"), [("utf-8", False, ","), ("utf-8", True, ";"), ("latin-1", False, "\t")]
)
def test_encodings_and_delimiters(tmp_path, basic, check, encoding, bom, delimiter):
    rows = consistent_rows(basic)
    rows[0]["model"] = "Modèle-É"
    for r in rows:
        r["model"] = rows[0]["model"]
    buf = io.StringIO()
    write_csv(tmp_path / "x.csv", rows, delimiter=delimiter)
    buf.write((tmp_path / "x.csv").read_text())
    raw = buf.getvalue().encode(encoding)
    path = tmp_path / "enc.csv"
    path.write_bytes((b"\xef\xbb\xbf" if bom else b"") + raw)
    result = check(path, basic)
    assert result.findings == []
    assert result.scenarios["model"].tolist() == ["Modèle-É"]


def test_decimal_comma_is_detected(tmp_path, basic, check):
    rows = consistent_rows(basic)
    path = write_csv(tmp_path / "dc.csv", rows, delimiter=";")
    text = path.read_text().splitlines()
    out = [text[0], *(";".join([*line.split(";")[:-1], line.split(";")[-1].replace(".", ",")]) for line in text[1:])]
    path.write_text("\n".join(out) + "\n")
    result = check(path, basic)
    assert result.findings == []
    assert "decimal commas" in result.inputs[0].notes[0]


def test_broken_contracts_and_damaged_databases_are_one_line_with_their_exit_code(tmp_path, basic, run_milepost):
    """Every broken contract: `contract lint` exits 1 (findings) or 2 (unreadable), `check` and `ingest` exit 2;
    a truncated or corrupt database exits 3. Never a traceback, never 70."""
    data = write_csv(tmp_path / "clean.csv", consistent_rows(basic))
    commands, expected = [], []
    for name in BROKEN_CONTRACTS:
        folder = str(broken_contract(tmp_path, name))
        commands += [
            ["contract", "lint", folder],
            ["check", str(data), "--contract", folder],
            ["ingest", str(data), "--contract", folder, "--db", str(tmp_path / f"{name}.duckdb")],
        ]
        expected += [{1, 2}, {2}, {2}]
    db = tmp_path / "good.duckdb"
    codes, _ = run_milepost([["ingest", str(data), "--contract", str(BASIC_CONTRACT), "--db", str(db)]])
    assert codes == [0]
    whole = db.read_bytes()
    corrupt = bytearray(whole)
    # DuckDB files: three 4 KiB headers, then 256 KiB blocks, each behind its checksum; damage every block
    for at in range(3 * 4096 + 512, len(whole), 256 * 1024):
        corrupt[at : at + 16] = b"\xff" * 16
    damaged = {"truncated": whole[: len(whole) // 2], "corrupt": bytes(corrupt), "stub": whole[:3000]}
    for name, content in damaged.items():
        path = tmp_path / f"{name}.duckdb"
        path.write_bytes(content)
        commands += [
            ["submissions", "--db", str(path)],
            ["export", "--what", "data", "-f", "csv", "-o", str(tmp_path / f"{name}.csv"), "--db", str(path)],
            ["ingest", str(data), "--contract", str(BASIC_CONTRACT), "--db", str(path)],
        ]
        expected += [{3}, {3}, {3}]
    codes, stderr = run_milepost(commands)
    assert "Traceback" not in stderr and "Internal error" not in stderr, stderr[-2000:]
    wrong = [(c[:2], c[-1], code) for c, code, ok in zip(commands, codes, expected, strict=True) if code not in ok]
    assert not wrong, wrong
    # one line each: `Error: ...` (or lint's own report), never a dump of the exception
    errors = [line for line in stderr.splitlines() if line.startswith("Error: ")]
    assert len(errors) >= len(BROKEN_CONTRACTS) * 2 + len(damaged) * 3 - len(BROKEN_CONTRACTS)
