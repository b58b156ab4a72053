"""Progress on stderr: only on a terminal, and only once a command has run for a couple of seconds."""

from __future__ import annotations

import io
import time

from rich.console import Console

from milepost.validate.progress import Stages


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
