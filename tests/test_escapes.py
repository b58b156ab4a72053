"""Control characters from a submission never reach the terminal raw, and reports keep them visible.

`ESC ] 0 ; title BEL` (set the window title) and `ESC [ 2 J` (clear the screen) are the ECMA-48 / xterm control
sequences a hostile cell would carry (from memory of the xterm control-sequence documentation).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import openpyxl
import pytest
from typer.testing import CliRunner

from milepost.validate import cells
from milepost.validate.cli import app

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT

runner = CliRunner()
TITLE = "\x1b]0;owned\x07"
CLEAR = "\x1b[2J"
RAW = ("\x1b", "\x07", "\x9b", "\u202e")


def test_escape_controls_names_each_character() -> None:
    assert cells.escape_controls(f"a{TITLE}b") == "a\\u001b]0;owned\\u0007b"
    assert cells.escape_controls("x\ty\nz") == "x\\ty\nz"
    assert cells.one_line("x\ny\r") == "x\\ny\\r"
    assert cells.escape_controls("\x9b\u202eok") == "\\u009b\\u202eok"
    assert cells.escape_controls("Zürich – ok") == "Zürich – ok"  # printable text is untouched


@pytest.fixture
def hostile(tmp_path: Path, basic) -> Path:
    rows = consistent_rows(basic)
    rows[3]["variable"] = f"emissions{TITLE}"
    rows[5]["region"] = f"{CLEAR}Narnia"
    rows[7]["scenario"] = "S1\u202e"
    return write_csv(tmp_path / "hostile.csv", rows)


def _clean(text: str) -> None:
    for ch in RAW:
        assert ch not in text, repr(ch)


def test_check_and_ingest_print_escapes_not_controls(tmp_path: Path, hostile: Path) -> None:
    res = runner.invoke(app, ["check", str(hostile), "-c", str(BASIC_CONTRACT)])
    assert res.exit_code == 1
    _clean(res.output)
    assert "emissions\\u001b]0;owned\\u0007" in res.stdout and "\\u001b[2JNarnia" in res.stdout
    res = runner.invoke(app, ["ingest", str(hostile), "-c", str(BASIC_CONTRACT), "--db", str(tmp_path / "x.duckdb")])
    assert res.exit_code == 1 and res.stdout.startswith("Rejected")
    _clean(res.output)
    assert "\\u001b" in res.stdout


def test_json_keeps_the_data_and_escapes_the_sentences(hostile: Path) -> None:
    res = runner.invoke(app, ["check", str(hostile), "-c", str(BASIC_CONTRACT), "-f", "json"])
    _clean(res.stdout)
    report = json.loads(res.stdout)
    f = next(f for f in report["findings"] if f["rule"] == "unknown-variable")
    assert f["variable"] == f"emissions{TITLE}"  # the data, exactly
    assert TITLE not in f["message"] and "\\u001b" in f["message"]  # the sentence, safe to print anywhere


def test_the_xlsx_report_shows_controls_as_escapes(tmp_path: Path, hostile: Path) -> None:
    out = tmp_path / "r.xlsx"
    res = runner.invoke(app, ["check", str(hostile), "-c", str(BASIC_CONTRACT), "-f", "xlsx", "-o", str(out)])
    assert res.exit_code == 1, res.output
    wb = openpyxl.load_workbook(out)
    assert wb["copy 1"]["D5"].value == "emissions\\u001b]0;owned\\u0007"
    findings = wb["findings"]
    header = [c.value for c in findings[1]]
    messages = [r[header.index("message")] for r in findings.iter_rows(min_row=2, values_only=True)]
    assert messages and all("\x1b" not in m for m in messages)
    text = tmp_path / "r.txt"
    assert runner.invoke(app, ["check", str(hostile), "-c", str(BASIC_CONTRACT), "-o", str(text)]).exit_code == 1
    _clean(text.read_text(encoding="utf-8"))


BAD_NAME = f"bad{CLEAR}\x07\u202e"


@pytest.fixture
def bad_paths(tmp_path: Path) -> tuple[Path, Path]:
    """A file and a folder whose names hold ESC [ 2 J, BEL and a right-to-left override."""
    (tmp_path / "f").mkdir()
    (tmp_path / "d").mkdir()
    file = tmp_path / "f" / BAD_NAME
    file.write_text("x\n")
    folder = tmp_path / "d" / BAD_NAME
    folder.mkdir()
    return file, folder


@pytest.mark.parametrize(
    "argv",
    [
        lambda f, d: ["contract", "show", str(f)],  # a folder argument given a file
        lambda f, d: ["check", str(f), "-c", str(f)],  # a folder option given a file
        lambda f, d: ["check", str(f), "-o", str(d)],  # a file option given a folder
        lambda f, d: ["ingest", str(f), "--db", str(d)],  # a database option given a folder
        lambda f, d: ["check", str(f), "--format", BAD_NAME],  # a value outside a choice
        lambda f, d: ["check", f"--{BAD_NAME}"],  # an unknown option
        lambda f, d: ["contract", "show", str(d), BAD_NAME],  # an extra argument
        lambda f, d: [BAD_NAME],  # an unknown command
    ],
)
def test_usage_errors_escape_the_paths_and_values_they_name(bad_paths: tuple[Path, Path], argv) -> None:
    res = runner.invoke(app, argv(*bad_paths))
    assert res.exit_code == 2, res.output
    assert "Error:" in res.output
    _clean(res.output)
    assert "2J" in res.output  # the name is shown, escaped, not dropped


def test_the_installed_command_escapes_usage_errors(bad_paths: tuple[Path, Path]) -> None:
    file, _ = bad_paths
    proc = subprocess.run(
        [sys.executable, "-m", "milepost.validate", "contract", "show", str(file)], capture_output=True, text=True
    )
    assert proc.returncode == 2 and "is a file" in proc.stderr
    _clean(proc.stdout + proc.stderr)
    assert "\\u202e" in proc.stderr
