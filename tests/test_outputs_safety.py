"""Outputs never replace an input, the database or a stranger's file, and are written whole or not at all."""

from __future__ import annotations

import io
import os
import resource
import shutil
import subprocess
import sys
from pathlib import Path

import openpyxl
import pytest
from typer.testing import CliRunner

from milepost.validate.cli import app
from milepost.validate.harmonise.notes import METHOD_COLUMNS
from milepost.validate.outputs import ours
from milepost.validate.store.ingest import ingest

from builders import consistent_rows, table_of, write_csv, write_xlsx
from conftest import BASIC_CONTRACT

runner = CliRunner()


def _run(*args: object):
    return runner.invoke(app, [str(a) for a in args])


@pytest.fixture(scope="module")
def stored(tmp_path_factory: pytest.TempPathFactory, basic) -> tuple[Path, Path]:
    """(a database with one accepted submission, its data file); tests copy what they change."""
    folder = tmp_path_factory.mktemp("outputs")
    data = write_csv(folder / "ok.csv", consistent_rows(basic))
    db = folder / "m.duckdb"
    assert ingest([data], db, BASIC_CONTRACT).status == "accepted"
    return db, data


@pytest.fixture
def work(tmp_path: Path, stored: tuple[Path, Path]) -> tuple[Path, Path]:
    db, data = stored
    shutil.copy(db, tmp_path / db.name)
    shutil.copy(data, tmp_path / data.name)
    return tmp_path / db.name, tmp_path / data.name


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


def test_a_report_never_replaces_its_input(work: tuple[Path, Path]) -> None:
    _, data = work
    before = data.read_bytes()
    for fmt in ("text", "json", "xlsx"):
        for force in ((), ("--force",)):
            res = _run("check", data, "-c", BASIC_CONTRACT, "-f", fmt, "-o", data, *force)
            assert res.exit_code == 2, res.output
            assert res.stderr.strip() == (
                f"Error: refusing to write {data}: it is one of the input files; choose another output file"
            )
    assert data.read_bytes() == before


def test_an_xlsx_submission_is_not_replaced_by_its_own_report(tmp_path: Path, basic) -> None:
    sub = write_xlsx(tmp_path / "sub.xlsx", {"Sheet": table_of(consistent_rows(basic))})
    before = sub.read_bytes()
    res = _run("check", sub, "-c", BASIC_CONTRACT, "--format", "xlsx", "-o", sub)
    assert res.exit_code == 2 and "it is one of the input files" in res.stderr
    assert sub.read_bytes() == before


def test_the_database_and_its_companions_are_never_outputs(work: tuple[Path, Path]) -> None:
    db, data = work
    lock = db.with_name(db.name + ".lock")
    lock.touch()
    wal = db.with_name(db.name + ".wal")
    wal.write_bytes(b"")
    before = _snapshot(db.parent)
    attempts = [
        ["check", data, "-c", BASIC_CONTRACT, "-o", db],
        ["check", data, "-c", BASIC_CONTRACT, "-f", "xlsx", "-o", db, "--force"],
        ["export", "--db", db, "--what", "findings", "--format", "xlsx", "-o", db],
        ["export", "--db", db, "--what", "data", "--format", "csv", "-o", db, "--force"],
        ["export", "--db", db, "--what", "data", "--format", "parquet", "-o", lock],
        ["export", "--db", db, "--what", "data", "--format", "csv", "-o", wal, "--force"],
        ["contract", "template", BASIC_CONTRACT, "-o", db.with_name("m.xlsx")],  # a new file: allowed
    ]
    codes = [_run(*a).exit_code for a in attempts]
    assert codes == [2, 2, 2, 2, 2, 2, 0]
    after = _snapshot(db.parent)
    assert after.pop("m.xlsx")
    assert after == before  # the database, its lock and its log are byte for byte what they were
    res = _run("export", "--db", db, "--what", "data", "--format", "csv", "-o", db)
    assert res.stderr.strip() == f"Error: refusing to write {db}: it is a DuckDB database; choose another output file"
    res = _run("export", "--db", db, "--what", "data", "--format", "csv", "-o", lock)
    assert res.stderr.strip() == (
        f"Error: refusing to write {lock}: it belongs to the database {db}; choose another output file"
    )


def test_a_file_we_did_not_write_needs_force(work: tuple[Path, Path]) -> None:
    db, data = work
    notes = db.parent / "notes.csv"
    notes.write_text("my,own\n1,2\n", encoding="utf-8")
    res = _run("export", "--db", db, "--what", "data", "--format", "csv", "-o", notes)
    assert res.exit_code == 2
    assert res.stderr.strip() == (
        f"Error: refusing to overwrite {notes}: it is not a file milepost wrote; choose another name, "
        "or add --force to replace it"
    )
    assert notes.read_text() == "my,own\n1,2\n"
    # a submission-shaped CSV (not given as input) is a stranger's file too
    other = shutil.copy(data, db.parent / "other.csv")
    assert _run("check", data, "-c", BASIC_CONTRACT, "-o", other).exit_code == 2
    res = _run("export", "--db", db, "--what", "data", "--format", "csv", "-o", notes, "--force")
    assert res.exit_code == 0, res.output
    assert notes.read_text().startswith("submission_id,model,scenario")


@pytest.mark.parametrize(
    "command",
    [
        ["check", "{data}", "-c", BASIC_CONTRACT, "-o", "{out}.txt"],
        ["check", "{data}", "-c", BASIC_CONTRACT, "-f", "json", "-o", "{out}.json"],
        ["check", "{data}", "-c", BASIC_CONTRACT, "-f", "xlsx", "-o", "{out}.xlsx"],
        ["export", "--db", "{db}", "--what", "data", "-f", "csv", "-o", "{out}.csv"],
        ["export", "--db", "{db}", "--what", "indicators", "-f", "parquet", "-o", "{out}.parquet"],
        ["export", "--db", "{db}", "--what", "findings", "-f", "xlsx", "-o", "{out}.xlsx"],
        ["contract", "template", BASIC_CONTRACT, "-o", "{out}.xlsx"],
        ["contract", "template", BASIC_CONTRACT, "-o", "{out}.csv"],
        ["harmonise", "{data}", "-c", BASIC_CONTRACT, "--no-verify", "-o", "{out}.csv"],
        ["harmonise", "{data}", "-c", BASIC_CONTRACT, "--no-verify", "-o", "{out}.xlsx"],
    ],
    ids=lambda c: " ".join(str(a) for a in c[:1] + c[-1:]),
)
def test_running_again_replaces_our_own_output_without_force(work: tuple[Path, Path], command: list) -> None:
    db, data = work
    out = db.parent / "out"
    argv = [str(a).format(data=data, db=db, out=out) for a in command]
    first = _run(*argv)
    assert first.exit_code == 0, first.output
    target = Path(argv[-1])
    # a template or harmonised CSV has a submission's header: known by its content or by its methods file
    assert ours(target) or target.suffix == ".csv"
    os.utime(target, (0, 0))
    again = _run(*argv)
    assert again.exit_code == 0, again.output
    assert target.stat().st_mtime > 0  # replaced, not skipped
    leftovers = [p.name for p in db.parent.iterdir() if p.name.startswith(".") or ".tmp" in p.name]
    assert leftovers == []


def test_a_new_output_gets_the_usual_permissions(work: tuple[Path, Path]) -> None:
    db, _ = work
    out = db.parent / "d.csv"
    assert _run("export", "--db", db, "--what", "data", "-f", "csv", "-o", out).exit_code == 0
    umask = os.umask(0)
    os.umask(umask)
    assert out.stat().st_mode & 0o777 == 0o666 & ~umask  # not the 0600 of a temporary file


def test_a_symlinked_output_replaces_its_target_and_keeps_the_link(work: tuple[Path, Path]) -> None:
    db, _ = work
    real = db.parent / "real.csv"
    link = db.parent / "link.csv"
    assert _run("export", "--db", db, "--what", "data", "-f", "csv", "-o", real).exit_code == 0
    link.symlink_to(real)
    assert _run("export", "--db", db, "--what", "findings", "-f", "csv", "-o", link).exit_code == 0
    assert link.is_symlink() and real.read_text().startswith("submission_id,rule,")


def _limited(limit: int):
    def apply() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    return apply


@pytest.mark.parametrize(
    "command",
    [
        ["export", "--db", "{db}", "--what", "data", "-f", "csv", "-o", "{out}/d.csv"],
        ["export", "--db", "{db}", "--what", "data", "-f", "parquet", "-o", "{out}/d.parquet"],
        ["export", "--db", "{db}", "--what", "data", "-f", "xlsx", "-o", "{out}/d.xlsx"],
        ["snapshot", "{out}/snap", "--db", "{db}"],
        ["check", "{data}", "-c", BASIC_CONTRACT, "-f", "xlsx", "-o", "{out}/r.xlsx"],
        ["check", "{data}", "-c", BASIC_CONTRACT, "-f", "json", "-o", "{out}/r.json"],
        ["harmonise", "{data}", "-c", BASIC_CONTRACT, "--no-verify", "-o", "{out}/h.xlsx"],
        ["contract", "template", BASIC_CONTRACT, "-o", "{out}/t.xlsx"],
    ],
    ids=lambda c: f"{c[0]} {c[-1].rsplit('/', 1)[-1]}",
)
def test_a_full_disk_is_one_line_exit_4_and_leaves_nothing(tmp_path: Path, stored, command: list) -> None:
    db, data = stored
    out = tmp_path / "out"
    out.mkdir()
    previous = out / "r.json"  # an earlier report of ours that a failed write must leave as it was
    previous.write_text('{\n  "milepost": "0.1.0"\n}\n', encoding="utf-8")
    argv = [str(a).format(db=db, data=data, out=out) for a in command]
    # A file size limit makes every write past 256 bytes fail with EFBIG, as a full disk fails with ENOSPC.
    proc = subprocess.run(
        [sys.executable, "-m", "milepost.validate", *argv],
        capture_output=True,
        text=True,
        timeout=120,
        preexec_fn=_limited(256),
        env={**os.environ, "MILEPOST_LOG_DIR": str(tmp_path / "logs")},
    )
    assert proc.returncode == 4, proc.stderr
    errors = [line for line in proc.stderr.splitlines() if line.startswith("Error:")]
    assert len(errors) == 1 and errors[0].startswith("Error: cannot write "), proc.stderr
    assert "Traceback" not in proc.stderr
    assert sorted(p.name for p in out.iterdir()) == ["r.json"]  # no temporary file, no half a file
    assert previous.read_text(encoding="utf-8") == '{\n  "milepost": "0.1.0"\n}\n'


def test_ours_tells_our_files_from_others(tmp_path: Path) -> None:
    cases = {
        "empty.csv": b"",
        "text.txt": "milepost 0.1.0 · contract core (abc)\n".encode(),
        "report.json": b'{\n  "milepost": "0.1.0", "findings": []}\n',
        "export.csv": b"submission_id,model,scenario,region,variable,unit,year,value\n",
        "methods.csv": (",".join(METHOD_COLUMNS) + "\n").encode(),
        "sub.csv": b"model,scenario,region,variable,unit,year,value\nM,S,World,pop,million,2020,1\n",
        "notes.txt": b"milepost is nice\n",
        "other.json": b'{"name": "milepost"}\n',
        "plain.xlsx": None,
    }
    for name, content in cases.items():
        if content is not None:
            (tmp_path / name).write_bytes(content)
    openpyxl.Workbook().save(tmp_path / "plain.xlsx")
    (tmp_path / "broken.parquet").write_bytes(b"PAR1 not really")
    (tmp_path / "fake.xlsx").write_bytes(b"PK\x03\x04 not a zip")
    found = {p.name: ours(p) for p in sorted(tmp_path.iterdir())}
    assert found == {
        "broken.parquet": False,
        "empty.csv": True,
        "export.csv": True,
        "fake.xlsx": False,
        "methods.csv": True,
        "notes.txt": False,
        "other.json": False,
        "plain.xlsx": False,
        "report.json": True,
        "sub.csv": False,
        "text.txt": True,
    }


def test_the_self_checks_report_is_never_written_over_an_upload(tmp_path: Path, basic) -> None:
    from milepost.dashboard.checking import CheckedUpload

    rows = consistent_rows(basic)
    sub = write_xlsx(tmp_path / "report.xlsx", {"Sheet": table_of(rows)})  # an upload carrying the report's name
    upload = CheckedUpload([("report.xlsx", sub.read_bytes())], basic)
    try:
        report = openpyxl.load_workbook(io.BytesIO(upload.xlsx()))
        assert report.sheetnames[:2] == ["summary", "findings"] and "copy 1" in report.sheetnames
        assert upload.xlsx() and upload.rows == len(rows)  # the upload itself is intact
    finally:
        upload.close()


def _dead_pid() -> int:
    """The id of a process that has ended (and been reaped): what a writer killed with SIGKILL leaves."""
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_the_next_write_removes_what_a_killed_writer_left(work: tuple[Path, Path]) -> None:
    db, data = work
    out = db.parent / "r.txt"
    dead = db.parent / f".r.txt.{_dead_pid()}.abcd_123.part"  # the name replacing() gives, of a dead writer
    live = db.parent / f".r.txt.{os.getpid()}.zzzzzzzz.part"  # a write of this process still under way
    other = db.parent / f".r.txt.7.{_dead_pid()}.abcdefgh.part"  # a leftover of the target r.txt.7, not r.txt
    for p in (dead, live, other):
        p.write_text("half a report")
    res = _run("check", data, "-c", BASIC_CONTRACT, "-o", out)
    assert res.exit_code == 0, res.output
    assert out.read_text(encoding="utf-8").startswith("milepost ")
    assert not dead.exists() and live.exists() and other.exists()
    assert sorted(p.name for p in db.parent.glob(".r.txt.*.part")) == sorted([live.name, other.name])


def test_the_next_snapshot_removes_the_folder_a_killed_one_left(work: tuple[Path, Path]) -> None:
    db, _ = work
    dead = db.parent / f"snap.tmp-{_dead_pid()}"
    live = db.parent / f"snap.tmp-{os.getppid()}"  # the parent of this test process is alive
    for d in (dead, live):
        (d / "data").mkdir(parents=True)
        (d / "data" / "part.parquet").write_bytes(b"half")
    res = _run("snapshot", db.parent / "snap", "--db", db)
    assert res.exit_code == 0, res.output
    assert (db.parent / "snap" / "manifest.json").is_file()
    assert not dead.exists() and live.is_dir()
