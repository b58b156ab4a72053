"""Progress on stderr: only on a terminal, and only once a command has run for a couple of seconds."""

from __future__ import annotations

import io
import time

from rich.console import Console

from milepost.validate.progress import Count, Stages
from milepost.validate.store.exports import export
from milepost.validate.store.ingest import ingest

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT


def _terminal() -> tuple[Console, io.StringIO]:
    out = io.StringIO()
    return Console(file=out, force_terminal=True, width=80), out


def test_a_long_command_shows_its_stages_on_a_terminal() -> None:
    console, out = _terminal()
    # begun three seconds ago: past the delay, so the first step shows the bar
    with Stages("Loading 10 rows", 3, started=time.perf_counter() - 3, console=console) as s:
        s.step("computing indicators")
        assert s.progress is not None
        s.step("storing rows")
    assert s.progress is None  # gone when done
    assert "Computing indicators" in out.getvalue() or "Storing rows" in out.getvalue()


def test_a_short_command_or_a_pipe_shows_nothing() -> None:
    console, out = _terminal()
    with Stages("Loading", 3, started=time.perf_counter(), delay=3600, console=console) as s:
        s.step("computing indicators")
        assert s.progress is None
    assert out.getvalue() == ""
    # standard error of pytest is captured, not a terminal: disabled whatever the time
    piped = Stages("Loading", 3, started=time.perf_counter() - 3)
    piped.step("x")
    assert not piped.enabled and piped.progress is None


def test_an_xlsx_export_counts_its_rows_on_the_same_kind_of_bar(tmp_path, basic) -> None:
    db = tmp_path / "p.duckdb"
    assert ingest([write_csv(tmp_path / "d.csv", consistent_rows(basic))], db, BASIC_CONTRACT).status == "accepted"
    console, out = _terminal()
    with Count("Exporting", started=time.perf_counter() - 3, console=console) as count:
        n = export(db, "data", "xlsx", tmp_path / "d.xlsx", progress=count)
        assert count.progress is not None and count.total == n
    assert count.progress is None  # gone when done
    assert "Exporting" in out.getvalue() and f"{n}/{n}" in out.getvalue()
    # within the delay, or not on a terminal, nothing is drawn
    console, out = _terminal()
    with Count("Exporting", console=console, delay=3600) as quiet:
        export(db, "data", "xlsx", tmp_path / "d.xlsx", progress=quiet)
    assert out.getvalue() == "" and quiet.progress is None
    piped = Count("Exporting", started=time.perf_counter() - 3)
    piped(1, 2)
    assert not piped.enabled and piped.progress is None
