"""A corpus of bad inputs: each one gives a finding and exit code 1, never a traceback."""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys

import pandas as pd
import pytest
from typer.testing import CliRunner

from milepost.validate.cli import app

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT


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
    return {name: rule for name, (_, rule) in cases.items()}


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
    assert codes == [1] * len(commands), [(c[0], c[1], code) for c, code in zip(commands, codes, strict=True)]
    assert not (tmp_path / "logs").exists()


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
