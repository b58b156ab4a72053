"""A streaming XLSX reader with limits: the sheet XML is parsed as it is unzipped and reading stops at a limit.

Nothing a workbook declares is trusted: not its dimension (rows come as they appear in the XML, gaps are never
filled in), not the sizes of its parts (the unzipped bytes are counted), not its cells (a cell longer than the
limit stops the reading before it is held whole). A DTD is refused: a workbook never needs one, and entity
declarations are how XML bombs expand. Every fault is a `ReadError` naming what is wrong.
"""

from __future__ import annotations

import posixpath
import re
import zipfile
import zlib
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import IO, Any
from xml.parsers import expat

from milepost.schema.limits import Limits
from milepost.validate.errors import LimitExceeded, ReadError

CHUNK = 1 << 20
_REF = re.compile(r"([A-Z]{1,3})([0-9]{1,7})")
MAX_EXCEL_ROW = 1_048_576  # Excel's own sheet size (from memory of the Excel specifications table)
MAX_EXCEL_COLUMN = 16_384


@dataclass(frozen=True)
class Sheet:
    name: str
    part: str  # path inside the zip
    kind: str  # 'worksheet', 'chartsheet', or another sheet type


def _local(name: str) -> str:
    return name.rsplit(" ", 1)[-1]


def _parse(
    stream: IO[bytes],
    limit: int,
    what: str,
    start: Callable[..., None],
    end: Callable[[str], None],
    text: Callable[[str], None] | None = None,
) -> None:
    """Feed a whole part to expat in chunks, counting the unzipped bytes against `limit`."""
    parser = _Pusher(what, limit, start, end, text or (lambda data: None))
    while chunk := stream.read(CHUNK):
        parser.feed(chunk)
    parser.feed(b"")


class Workbook:
    """An opened XLSX: its sheets (worksheets, chartsheets) in workbook order, and rows of a worksheet on demand."""

    def __init__(self, path: str, limits: Limits) -> None:
        self.limits = limits
        try:
            self.zip = zipfile.ZipFile(path)
        except (zipfile.BadZipFile, OSError, ValueError) as e:
            raise ReadError(f"not a readable XLSX workbook ({type(e).__name__}: {e})") from None
        try:
            total = sum(i.file_size for i in self.zip.infolist())
            if total > limits.max_xlsx_bytes:
                raise LimitExceeded(
                    f"the workbook unzips to {total:,} bytes, more than the limit of {limits.max_xlsx_bytes:,} "
                    "(max_xlsx_bytes)"
                )
            self.sheets = self._sheets()
            self._shared: list[str] | None = None
        except BaseException:
            self.zip.close()
            raise

    def close(self) -> None:
        self.zip.close()

    def _open(self, part: str) -> IO[bytes]:
        try:
            return self.zip.open(part)
        except KeyError:
            raise ReadError(f"the workbook has no part {part}: is it damaged?") from None

    def _small(self, part: str, start: Callable[..., None]) -> None:
        with self._open(part) as f:
            _parse(f, 64 << 20, part, start, lambda name: None)

    def _sheets(self) -> list[Sheet]:
        entries: list[tuple[str, str]] = []
        rels: dict[str, tuple[str, str]] = {}

        def sheet(name: str, attrs: dict[str, str]) -> None:
            if name == "sheet":
                rid = next((v for k, v in attrs.items() if _local(k) == "id" and k != "id"), "")
                entries.append((attrs.get("name", ""), rid))

        def rel(name: str, attrs: dict[str, str]) -> None:
            if name == "Relationship":
                rels[attrs.get("Id", "")] = (attrs.get("Type", ""), attrs.get("Target", ""))

        self._small("xl/workbook.xml", sheet)
        if "xl/_rels/workbook.xml.rels" in self.zip.namelist():
            self._small("xl/_rels/workbook.xml.rels", rel)
        out = []
        for name, rid in entries:
            kind, target = rels.get(rid, ("", ""))
            part = target.lstrip("/") if target.startswith("/") else posixpath.normpath(posixpath.join("xl", target))
            out.append(Sheet(name, part, kind.rsplit("/", 1)[-1] or "worksheet"))
        return out

    def worksheets(self) -> list[str]:
        return [s.name for s in self.sheets if s.kind == "worksheet"]

    def shared_strings(self) -> list[str]:
        if self._shared is not None:
            return self._shared
        part = "xl/sharedStrings.xml"
        strings: list[str] = []
        if part in self.zip.namelist():
            size = self.zip.getinfo(part).file_size
            if size > self.limits.max_shared_strings_bytes:
                raise LimitExceeded(
                    f"its shared texts unzip to {size:,} bytes, more than the limit of "
                    f"{self.limits.max_shared_strings_bytes:,} (max_shared_strings_bytes)"
                )
            state = {"si": False, "t": False, "ph": False}
            buf: list[str] = []
            held = [0]
            cap = self.limits.max_cell_chars

            def start(name: str, attrs: dict[str, str]) -> None:
                if name == "si":
                    state["si"], held[0] = True, 0
                    buf.clear()
                elif name == "rPh":  # phonetic guides are not part of the text
                    state["ph"] = True
                elif name == "t":
                    state["t"] = True

            def end(name: str) -> None:
                if name == "si":
                    strings.append("".join(buf))
                    state["si"] = False
                elif name == "rPh":
                    state["ph"] = False
                elif name == "t":
                    state["t"] = False

            def text(data: str) -> None:
                if state["si"] and state["t"] and not state["ph"]:
                    held[0] += len(data)
                    if held[0] > cap:
                        raise LimitExceeded(
                            f"shared text {len(strings) + 1:,} holds more than {cap:,} characters (max_cell_chars)"
                        )
                    buf.append(data)

            with self._open(part) as f:
                _parse(f, self.limits.max_shared_strings_bytes, part, start, end, text)
        self._shared = strings
        return strings

    def rows(self, name: str) -> Iterator[tuple[int, list[str | None]]]:
        """(row number, cells as text) of each row that has a cell, in file order; numbers keep their XML text."""
        sheet = next(s for s in self.sheets if s.name == name)
        shared = self.shared_strings()
        limits = self.limits
        ready: list[tuple[int, list[str | None]]] = []
        row: dict[int, str | None] = {}
        cell: dict[str, Any] = {}
        buf: list[str] = []
        state = {"row": 0, "col": -1, "in": False, "held": 0}

        def start(tag: str, attrs: dict[str, str]) -> None:
            if tag == "row":
                r = attrs.get("r")
                n = int(r) if r is not None and r.isdigit() else state["row"] + 1
                if not 0 < n <= MAX_EXCEL_ROW:
                    raise ReadError(f"sheet {name!r}: row number {r!r} is not a row of a sheet")
                state["row"], state["col"] = n, -1
                row.clear()
            elif tag == "c":
                ref = attrs.get("r")
                col = state["col"] + 1
                if ref is not None:
                    m = _REF.fullmatch(ref)
                    if m is None:
                        raise ReadError(f"sheet {name!r}: {ref!r} is not a cell reference (such as B7)")
                    col = 0
                    for ch in m.group(1):
                        col = col * 26 + ord(ch) - 64
                    col -= 1
                    if col >= MAX_EXCEL_COLUMN or int(m.group(2)) != state["row"]:
                        raise ReadError(f"sheet {name!r}: cell {ref} lies outside its row {state['row']}")
                if col >= limits.max_columns:
                    raise LimitExceeded(
                        f"sheet {name!r} has a cell in column {col + 1:,}, beyond the limit of "
                        f"{limits.max_columns:,} columns (max_columns)"
                    )
                state["col"] = col
                cell.clear()
                cell["t"] = attrs.get("t", "n")
                buf.clear()
                state["held"] = 0
            elif tag in ("v", "t"):
                state["in"] = True

        def end(tag: str) -> None:
            if tag in ("v", "t"):
                state["in"] = False
            elif tag == "c":
                raw = "".join(buf)
                kind = cell.get("t", "n")
                value: str | None
                if kind == "s":
                    try:
                        value = shared[int(raw)]
                    except (ValueError, IndexError):
                        raise ReadError(
                            f"sheet {name!r}: cell in row {state['row']} names shared text {raw!r}, "
                            "which the workbook does not have"
                        ) from None
                elif kind == "b":
                    value = {"1": "TRUE", "0": "FALSE"}.get(raw, raw)
                else:
                    value = raw
                if value != "" or kind in ("s", "str", "inlineStr"):
                    row[state["col"]] = value
            elif tag == "row" and row:
                width = max(row) + 1
                ready.append((state["row"], [row.get(i) for i in range(width)]))

        def text(data: str) -> None:
            if state["in"]:
                state["held"] += len(data)
                if state["held"] > limits.max_cell_chars:
                    raise LimitExceeded(
                        f"sheet {name!r}: a cell of row {state['row']:,} holds more than {limits.max_cell_chars:,} "
                        "characters (max_cell_chars)"
                    )
                buf.append(data)

        # expat pushes; a generator pulls: parse a chunk, hand over the rows it completed, go on.
        with self._open(sheet.part) as f:
            parser_done = False
            chunks = iter(lambda: f.read(CHUNK), b"")
            parser = _Pusher(f"sheet {name!r}", limits.max_xlsx_bytes, start, end, text)
            while not parser_done:
                chunk = next(chunks, b"")
                parser.feed(chunk)
                parser_done = chunk == b""
                yield from ready
                ready.clear()


class _Pusher:
    """expat fed one chunk at a time (for a generator), with the same refusals as `_parse`."""

    def __init__(
        self, what: str, limit: int, start: Callable[..., None], end: Callable[[str], None], text: Callable[[str], None]
    ) -> None:
        self.what, self.limit, self.seen = what, limit, 0
        p = expat.ParserCreate(namespace_separator=" ")
        p.SetParamEntityParsing(expat.XML_PARAM_ENTITY_PARSING_NEVER)

        def no_dtd(*_: Any) -> None:
            raise ReadError(
                f"{what} holds a DTD (a document type declaration); workbooks never need one, so it is refused"
            )

        p.StartDoctypeDeclHandler = no_dtd
        p.EntityDeclHandler = no_dtd
        p.StartElementHandler = lambda name, attrs: start(_local(name), attrs)
        p.EndElementHandler = lambda name: end(_local(name))
        p.CharacterDataHandler = text
        p.buffer_text = True
        self.parser = p

    def feed(self, chunk: bytes) -> None:
        self.seen += len(chunk)
        if self.seen > self.limit:
            raise LimitExceeded(f"{self.what} unzips to more than {self.limit:,} bytes")
        try:
            self.parser.Parse(chunk, chunk == b"")
        except expat.ExpatError as e:
            raise ReadError(
                f"{self.what} is not well-formed XML ({expat.errors.messages[e.code]}, line {e.lineno})"
            ) from None


def open_workbook(path: str, limits: Limits) -> Workbook:
    """Open a workbook for streaming; zip damage inside later reads surfaces as ReadError too (see `read_errors`)."""
    return Workbook(path, limits)


ZIP_ERRORS = (zipfile.BadZipFile, zlib.error, EOFError, OSError, KeyError, UnicodeDecodeError)

__all__ = ["ZIP_ERRORS", "LimitExceeded", "Sheet", "Workbook", "open_workbook"]
