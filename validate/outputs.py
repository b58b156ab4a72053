"""Writing output files (reports, exports, templates): a failure to write is an OutputError (exit code 4)."""

from __future__ import annotations

import contextlib
import io
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from milepost.validate.errors import OutputError


@contextlib.contextmanager
def writing(path: str | Path) -> Iterator[None]:
    """Inside the block, an OSError (no space, no permission, a full device) is an OutputError naming `path`."""
    try:
        yield
    except OSError as e:
        raise OutputError(f"cannot write {path}: {e.strerror or e}") from None


def save_workbook(workbook: Any, path: str | Path) -> None:
    """Save an openpyxl workbook to `path`, going through memory.

    openpyxl leaves its zip file open when a write fails half-way, and the zip tries to finish itself again when
    it is garbage-collected, printing a second error with a traceback; in memory the save cannot fail that way.
    """
    buffer = io.BytesIO()
    workbook.save(buffer)
    with writing(path):
        Path(path).write_bytes(buffer.getvalue())
