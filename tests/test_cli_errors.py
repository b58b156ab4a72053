"""No command ends in a traceback: errors print one line and exit with the code `validate/errors.py` gives them."""

from __future__ import annotations

import os
import stat
import subprocess
import sys
import textwrap
from pathlib import Path

import duckdb
import pytest
from typer.testing import CliRunner

from milepost.schema.contract import ContractError
from milepost.schema.units import UnitError
from milepost.validate import errors
from milepost.validate.cli import app
from milepost.validate.store.indicators import IndicatorDataError, IndicatorSpecError
from milepost.validate.store.ingest import ingest

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT


def test_every_error_raised_on_purpose_is_a_milepost_error_with_its_exit_code():
    assert {cls: cls.exit_code for cls in (ContractError, UnitError, IndicatorSpecError, IndicatorDataError)} == {
        ContractError: 2,
        UnitError: 2,
        IndicatorSpecError: 2,
        IndicatorDataError: 2,
    }
    assert all(issubclass(c, errors.MilepostError) for c in (ContractError, UnitError, IndicatorDataError))
    assert issubclass(UnitError, ValueError) and issubclass(IndicatorSpecError, ValueError)
    assert (errors.UsageError.exit_code, errors.LoadError.exit_code, errors.LockTimeout.exit_code) == (2, 3, 3)
    assert errors.OutputError.exit_code == 4


def test_an_unexpected_error_is_one_line_naming_the_log_with_the_traceback(tmp_path: Path):
    # Two commands that fail with a real bug (a division by zero): one wrapped like every milepost command, one
    # not, which only the entry point's last resort catches.
    code = textwrap.dedent("""
        import sys
        from milepost.validate.cli import app, main
        from milepost.validate.cli.common import handle_errors

        @app.command("crash")
        @handle_errors
        def crash() -> None:
            "Divide by zero."
            print(1 / 0)

        @app.command("crash-bare")
        def crash_bare() -> None:
            "Divide by zero, outside handle_errors."
            print(1 / 0)

        sys.argv = ["milepost", sys.argv[1]]
        main()
    """)
    env = {**os.environ, "MILEPOST_LOG_DIR": str(tmp_path / "logs")}
    for command in ("crash", "crash-bare"):
        proc = subprocess.run([sys.executable, "-c", code, command], capture_output=True, text=True, env=env)
        assert proc.returncode == 70, proc.stderr
        assert "Traceback" not in proc.stderr and proc.stdout == ""
        (line,) = proc.stderr.splitlines()
        assert line.startswith("Internal error (a bug in milepost, please report it): ZeroDivisionError: division")
        log = Path(line.rsplit("the traceback is in ", 1)[1])
        assert log.parent == tmp_path / "logs"
        text = log.read_text()
        assert "Traceback (most recent call last)" in text and "ZeroDivisionError" in text
        assert f"in {command.replace('-', '_')}" in text  # the frame of the failing function


@pytest.fixture(scope="module")
def stored(tmp_path_factory: pytest.TempPathFactory, basic) -> tuple[Path, Path]:
    """(a database with one accepted submission, its data file)."""
    folder = tmp_path_factory.mktemp("stored")
    data = write_csv(folder / "ok.csv", consistent_rows(basic))
    db = folder / "m.duckdb"
    assert ingest([data], db, BASIC_CONTRACT).status == "accepted"
    return db, data


def _faulty_databases(folder: Path, good: Path) -> dict[str, Path]:
    raw = good.read_bytes()
    out = {
        "garbage": os.urandom(4096),
        "empty": b"",
        "truncated": raw[: len(raw) // 3],
        # a damaged block: the header opens, a query then meets a bad checksum
        "damaged": raw[: len(raw) // 2] + os.urandom(len(raw) - len(raw) // 2),
    }
    paths = {}
    for name, content in out.items():
        paths[name] = folder / f"{name}.duckdb"
        paths[name].write_bytes(content)
    paths["foreign"] = folder / "foreign.duckdb"
    with duckdb.connect(str(paths["foreign"])) as con:
        con.execute("CREATE TABLE submissions (id INTEGER)")
    paths["newer"] = folder / "newer.duckdb"
    paths["newer"].write_bytes(raw)
    with duckdb.connect(str(paths["newer"])) as con:
        con.execute("UPDATE meta SET value = '99' WHERE key = 'schema_version'")
    paths["missing"] = folder / "missing.duckdb"
    paths["with-wal"] = folder / "wal.duckdb"
    paths["with-wal"].write_bytes(raw)
    (folder / "wal.duckdb.wal").write_bytes(b"left by another program")
    paths["no-folder"] = folder / "nope" / "m.duckdb"
    return paths


def test_database_faults_exit_3_with_one_line_and_no_traceback(tmp_path: Path, stored, basic, run_milepost):
    good, _ = stored
    faults = _faulty_databases(tmp_path, good)
    commands = []
    for name, db in faults.items():
        commands += [
            ["submissions", "--db", str(db)],
            ["export", "--db", str(db), "--what", "data", "--format", "csv", "-o", str(tmp_path / f"{name}.csv")],
            ["snapshot", "--db", str(db), str(tmp_path / f"snap-{name}")],
            ["diff", "--db", str(db), "1", "2"],
        ]
        if name != "missing":  # ingest creates a missing database
            other = write_csv(tmp_path / f"in-{name}.csv", consistent_rows(basic, scenario=name))
            commands.append(["ingest", str(other), "--db", str(db), "-c", str(BASIC_CONTRACT), "--wait", "0"])
    codes, stderr = run_milepost(commands)
    assert "Traceback" not in stderr
    by_command = {(c[0], Path(c[c.index("--db") + 1]).name): code for c, code in zip(commands, codes, strict=True)}
    # A write-ahead log left by another program stops writers only; readers open the file as DuckDB leaves it.
    expected = {key: 0 if key[1] == "wal.duckdb" and key[0] != "ingest" else 3 for key in by_command}
    expected["diff", "wal.duckdb"] = 2  # it holds one submission: "there is no submission 2" is a usage error
    assert by_command == expected
    lines = [line for line in stderr.splitlines() if not line.startswith(("EXIT ", "Waiting up to", "Wrote "))]
    assert [line for line in lines if not line.startswith("Error: ")] == []
    assert not (tmp_path / "logs").exists()
    assert good.read_bytes() and faults["foreign"].exists() and not faults["missing"].exists()
    # the dashboard command refuses them too, before starting a server
    for name in ("garbage", "damaged", "foreign", "newer", "missing"):
        res = CliRunner().invoke(app, ["dashboard", "--db", str(faults[name])])
        assert res.exit_code == 3 and res.stderr.startswith("Error: "), (name, res.output)


full = pytest.mark.skipif(
    not (os.path.exists("/dev/full") and stat.S_ISCHR(os.stat("/dev/full").st_mode)), reason="needs /dev/full"
)


@full
def test_output_that_cannot_be_written_exits_4(tmp_path: Path, stored, run_milepost):
    db, data = stored
    # A link to /dev/full in our own folder: written through, the device reports "no space left".
    link = tmp_path / "full"
    link.symlink_to("/dev/full")
    commands = [
        ["check", str(data), "-c", str(BASIC_CONTRACT), "-o", "/dev/full"],
        ["check", str(data), "-c", str(BASIC_CONTRACT), "-f", "json", "-o", "/dev/full"],
        ["check", str(data), "-c", str(BASIC_CONTRACT), "-f", "xlsx", "-o", "/dev/full"],
        ["export", "--db", str(db), "--what", "data", "--format", "csv", "-o", str(link)],
        ["export", "--db", str(db), "--what", "data", "--format", "parquet", "-o", str(link)],
        ["export", "--db", str(db), "--what", "data", "--format", "xlsx", "-o", str(link)],
    ]
    codes, stderr = run_milepost(commands)
    assert codes == [4] * len(commands), stderr
    assert "Traceback" not in stderr
    assert stat.S_ISCHR(os.stat("/dev/full").st_mode) and link.is_symlink()
    lines = [line for line in stderr.splitlines() if not line.startswith("EXIT ")]
    assert lines == [line for line in lines if line.startswith("Error: cannot write ")]
    assert len(lines) == len(commands) and all("No space left on device" in line for line in lines)


@full
def test_standard_output_that_cannot_be_written_exits_4(stored, run_milepost):
    _, data = stored
    for command in (["check", str(data), "-c", str(BASIC_CONTRACT), "-f", "json"], ["rules"]):
        with open("/dev/full", "w") as out:
            codes, stderr = run_milepost([command], stdout=out)
        assert codes == [4], stderr
        assert "Traceback" not in stderr and "Exception ignored" not in stderr
        assert [line for line in stderr.splitlines() if line.startswith("Error: ")] == [
            "Error: cannot write to standard output: No space left on device"
        ]
