"""Progress of a long command on stderr: shown on a terminal only, and only once the command has run a while.

A bar that flashes up for a run of half a second is noise, and in CI logs or pipes a live display is garbage, so
`Stages` (named steps) and `Count` (items done of a total, such as rows exported) stay silent unless standard
error is a terminal and `delay` seconds have passed since the command began; the bar appears at the first update
after that (rich then keeps its clock running) and is gone when done.
"""

from __future__ import annotations

import sys
import time
from types import TracebackType
from typing import Any

DELAY = 2.0  # seconds: "more than a couple of seconds"


class _Bar:
    """The bar both kinds of progress draw: shown from the first update after the delay, on a terminal only."""

    def __init__(
        self, title: str, total: int, enabled: bool, started: float | None, delay: float, console: Any
    ) -> None:
        self.title, self.total, self.delay = title, total, delay
        self.started = time.perf_counter() if started is None else started
        self.console = console
        self.enabled = enabled and (console is not None or sys.stderr.isatty())
        self.progress: Any = None
        self.task: Any = None

    def _show(self, *columns: Any) -> bool:
        """Start the bar if it is due; whether it is on screen."""
        if not self.enabled:
            return False
        if self.progress is None and time.perf_counter() - self.started >= self.delay:
            from rich.console import Console
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            self.progress = Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                *columns,
                TimeElapsedColumn(),
                console=self.console or Console(stderr=True),
                transient=True,
            )
            self.progress.start()
            self.task = self.progress.add_task(self.title, total=self.total)
        return self.progress is not None

    def close(self) -> None:
        """Remove the bar (if it was shown)."""
        if self.progress is not None:
            self.progress.update(self.task, completed=self.total)
            self.progress.stop()
            self.progress = None

    def __enter__(self) -> Any:
        return self

    def __exit__(
        self, _type: type[BaseException] | None, _value: BaseException | None, _tb: TracebackType | None
    ) -> None:
        self.close()


class Stages(_Bar):
    """A transient progress bar over `total` named stages; `step(text)` starts the next one."""

    def __init__(
        self,
        title: str,
        total: int,
        *,
        enabled: bool = True,
        started: float | None = None,
        delay: float = DELAY,
        console: Any = None,
    ) -> None:
        """`started`: time.perf_counter() when the command began (default: now); `console`: a rich Console (default:
        standard error, shown only when it is a terminal)."""
        super().__init__(title, total, enabled, started, delay, console)
        self.done = 0
        self.text = title

    def step(self, text: str) -> None:
        """Begin the stage called `text`; the bar appears here once the delay has passed."""
        if not self.enabled:
            return
        self.text = text[:1].upper() + text[1:]
        if self._show():
            self.progress.update(self.task, completed=self.done, description=self.text)
        self.done = min(self.done + 1, self.total)

    def __enter__(self) -> Stages:
        return self


class Count(_Bar):
    """A transient progress bar of items done (`count(done, total)`, a callback for library code), shown as `5,000/
    20,000` beside the bar; same delay and terminal rule as `Stages`."""

    def __init__(
        self,
        title: str,
        *,
        enabled: bool = True,
        started: float | None = None,
        delay: float = DELAY,
        console: Any = None,
    ) -> None:
        super().__init__(title, 0, enabled, started, delay, console)

    def __call__(self, done: int, total: int) -> None:
        """`done` of `total` items are finished; the bar appears here once the delay has passed."""
        self.total = total
        if self.progress is None:
            from rich.progress import MofNCompleteColumn

            if not self._show(MofNCompleteColumn()):
                return
        self.progress.update(self.task, completed=done, total=total)

    def __enter__(self) -> Count:
        return self


__all__ = ["DELAY", "Count", "Stages"]
