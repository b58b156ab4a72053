"""Writing output files (reports, exports, snapshots, templates, harmonised files) without losing anything.

Every writer goes through here:
- `check_target` refuses a path that is one of the inputs, a DuckDB database (or its `.wal` or `.lock`), or,
  without `force`, an existing file Milepost did not write. Our own outputs carry a mark so that re-running
  a command over its earlier output needs no `--force`: a custom document property in XLSX, a key-value entry
  in Parquet, the header line of our CSV tables, the first line of our text and JSON reports.
- `replacing` writes into a hidden temporary file in the target's folder and renames it over the target only
  when the write is complete, so a failure (a full disk, a file size limit, Ctrl+C) leaves the old file or
  nothing, never half a file. Devices and pipes (`/dev/stdout`, `/dev/full`) are written straight through.
  Its name carries the writer's process id, so the next write to the same target removes what a killed writer
  (`kill -9`, a power cut) left behind, and only that (`remove_leftovers`).
- A failure to write is an OutputError (exit code 4) naming the file.
"""

from __future__ import annotations

import contextlib
import io
import os
import re
import tempfile
import zipfile
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Any

from milepost.validate.errors import OutputError, UsageError

MARK = "milepost-output"  # XLSX custom property and Parquet key naming what kind of output a file is
# The header lines of the CSV tables Milepost writes (registered by their writers); a submission's own header
# (the long format) is deliberately not among them, so a harmonised CSV never passes for a submission.
_CSV_HEADERS: set[str] = set()
_TEXT_REPORT = re.compile(r"milepost \S+ · contract ")
_JSON_REPORT = re.compile(rb'\A\s*\{\s*"milepost"\s*:')
_PEEK = 4096


def register_csv_header(columns: Iterable[str]) -> None:
    """Declare the header of a CSV table we write, so that an earlier copy of it is recognised as ours."""
    _CSV_HEADERS.add(",".join(columns))


@contextlib.contextmanager
def writing(path: str | Path) -> Iterator[None]:
    """Inside the block, an OSError (no space, no permission, a full device) is an OutputError naming `path`."""
    try:
        yield
    except OSError as e:
        raise OutputError(f"cannot write {path}: {e.strerror or e}") from None


def _head(path: Path, n: int = _PEEK) -> bytes:
    with path.open("rb") as f:
        return f.read(n)


def is_database(path: Path) -> bool:
    """Whether `path` is a DuckDB database file (its header carries `DUCK` after the 8-byte checksum)."""
    try:
        return path.is_file() and _head(path, 12)[8:12] == b"DUCK"
    except OSError:
        return False


def _database_companion(path: Path) -> Path | None:
    """The database a `.wal` or `.lock` file belongs to, if that is what `path` is."""
    for suffix in (".wal", ".lock"):
        if path.name.endswith(suffix):
            owner = path.with_name(path.name[: -len(suffix)])
            if is_database(owner):
                return owner
    return None


def _xlsx_mark(path: Path) -> str | None:
    with zipfile.ZipFile(path) as z:
        try:
            info = z.getinfo("docProps/custom.xml")
        except KeyError:
            return None
        if info.file_size > 1 << 16:  # our property file is a few hundred bytes; do not inflate anything big
            return None
        text = z.read(info).decode("utf-8", "replace")
    m = re.search(rf'name="{MARK}"[^>]*>\s*<vt:lpwstr>([^<]*)<', text)
    return m.group(1) if m else None


def _parquet_mark(path: Path) -> str | None:
    import duckdb

    with duckdb.connect() as con:
        rows = con.execute(
            "SELECT value::VARCHAR FROM parquet_kv_metadata(?) WHERE key::VARCHAR = ?", [str(path), MARK]
        ).fetchall()
    return str(rows[0][0]) if rows else None


def ours(path: Path) -> bool:
    """Whether an existing file is one Milepost wrote (or is empty, so replacing it loses nothing)."""
    try:
        if path.stat().st_size == 0:
            return True
        head = _head(path)
        if head.startswith(b"PK\x03\x04"):
            return _xlsx_mark(path) is not None
        if head.startswith(b"PAR1"):
            return _parquet_mark(path) is not None
    except (OSError, zipfile.BadZipFile, ValueError):
        return False
    except Exception:  # a damaged Parquet file: duckdb's own error classes; it is not ours either way
        return False
    if _JSON_REPORT.match(head):
        return True
    first = head.split(b"\n", 1)[0].rstrip(b"\r").decode("utf-8", "replace").lstrip("\ufeff")
    if _TEXT_REPORT.match(first):
        return True
    # The CSV writers register their headers when imported; a report over an old export may come first.
    import milepost.validate.harmonise.output
    import milepost.validate.store.exports  # noqa: F401

    return first in _CSV_HEADERS


def _same(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def check_target(path: str | Path, *, inputs: Iterable[str | Path] = (), force: bool = False) -> None:
    """Refuse (UsageError, exit 2) to write `path` when that would destroy something.

    An input or a database (with its `.wal` and `.lock`) is never overwritten, `force` or not: a report or an
    export in their place is never what was meant. Another existing file that Milepost did not write needs
    `force`. A device or a pipe is fine: writing there replaces nothing.
    """
    path = Path(path)
    target = path.resolve() if path.is_symlink() else path
    if is_database(target):
        raise UsageError(f"refusing to write {path}: it is a DuckDB database; choose another output file")
    owner = _database_companion(target)
    if owner is not None:
        raise UsageError(f"refusing to write {path}: it belongs to the database {owner}; choose another output file")
    for given in inputs:
        if _same(target, Path(given)):
            raise UsageError(f"refusing to write {path}: it is one of the input files; choose another output file")
    if not target.exists():
        return
    if target.is_dir():
        raise UsageError(f"{path} is a folder; give a file name")
    if not target.is_file():
        return
    if not force and not ours(target):
        raise UsageError(
            f"refusing to overwrite {path}: it is not a file milepost wrote; choose another name, "
            "or add --force to replace it"
        )


def _umask() -> int:
    # Read, not set: setting the umask to read it would race with other threads (the dashboard has some).
    with contextlib.suppress(OSError, ValueError), open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    return 0o022


# `.NAME.PID.XXXXXXXX.part`: mkstemp's eight random characters (from memory of CPython's tempfile, whose names
# use lower-case letters, digits and `_`), so the file of a target `NAME.7` is never taken for one of `NAME`.
_PART = re.compile(r"(\d+)\.[a-z0-9_]{8}")


def owner_gone(pid: int) -> bool:
    """True if no process `pid` exists. A process of another user counts as alive (its files are kept)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except (PermissionError, OverflowError, ValueError):
        return False
    return False


def remove_leftovers(target: Path) -> list[Path]:
    """Remove the temporary files of earlier writes to `target` whose writer process no longer exists (a writer
    killed with SIGKILL cannot clean up); the files of live writers, this one included, stay. Returns what went."""
    head = f".{target.name}."
    try:
        found = [p for p in target.parent.iterdir() if p.name.startswith(head) and p.name.endswith(".part")]
    except OSError:  # a folder we cannot list: the write itself will say what is wrong
        return []
    removed = []
    for p in found:
        m = _PART.fullmatch(p.name[len(head) : -len(".part")])
        if m and owner_gone(int(m.group(1))):
            with contextlib.suppress(OSError):
                p.unlink()
                removed.append(p)
    return removed


@contextlib.contextmanager
def replacing(path: str | Path) -> Iterator[Path]:
    """Yield where to write `path`'s new content: a temporary file beside it, renamed over it on success and
    removed on failure. A symlink's target is replaced (the link stays); a device or pipe is written directly."""
    path = Path(path)
    target = path.resolve() if path.is_symlink() else path
    if target.exists() and not target.is_file():
        with writing(path):
            yield target
        return
    with writing(path):
        remove_leftovers(target)
        fd, name = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.{os.getpid()}.", suffix=".part")
        os.close(fd)
    tmp = Path(name)
    try:
        with writing(path):
            yield tmp
            mode = target.stat().st_mode & 0o7777 if target.exists() else 0o666 & ~_umask()
            os.chmod(tmp, mode)
            os.replace(tmp, target)
    finally:
        tmp.unlink(missing_ok=True)


def write_text(path: str | Path, text: str, *, inputs: Iterable[str | Path] = (), force: bool = False) -> Path:
    """Write a text report (UTF-8) after `check_target`, whole or not at all."""
    path = Path(path)
    check_target(path, inputs=inputs, force=force)
    with replacing(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return path


def mark_workbook(workbook: Any, kind: str) -> None:
    """Sign an openpyxl workbook as a Milepost output of `kind` (report, export, template, harmonised)."""
    from openpyxl.packaging.custom import StringProperty

    workbook.custom_doc_props.append(StringProperty(name=MARK, value=kind))
    workbook.properties.creator = "milepost"


@contextlib.contextmanager
def building(workbook: Any, path: str | Path) -> Iterator[None]:
    """Around filling a write-only workbook (openpyxl streams its sheets into temporary files): an OSError is an
    OutputError naming `path`, and a failed workbook's streams are closed here, so the interpreter does not
    finish them again at exit and print a second error with a traceback."""
    try:
        with writing(path):
            yield
    except BaseException:
        for ws in getattr(workbook, "_sheets", ()):
            writer = getattr(ws, "_writer", None)
            with contextlib.suppress(Exception):
                if writer is not None:
                    writer.xf.close()
            with contextlib.suppress(OSError):
                if writer is not None and isinstance(writer.out, str):
                    os.remove(writer.out)
        raise


def save_workbook(workbook: Any, path: str | Path, kind: str = "report") -> None:
    """Mark and save an openpyxl workbook to `path` (whole or not at all), going through memory.

    openpyxl leaves its zip file open when a write fails half-way, and the zip tries to finish itself again when
    it is garbage-collected, printing a second error with a traceback; in memory the save cannot fail that way.
    """
    mark_workbook(workbook, kind)
    buffer = io.BytesIO()
    with building(workbook, path):  # openpyxl stages each sheet in a temporary file, even when saving to memory
        workbook.save(buffer)
    with replacing(path) as tmp:
        tmp.write_bytes(buffer.getvalue())
