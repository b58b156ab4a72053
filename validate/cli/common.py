"""What every command shares: option types, error translation at the CLI boundary, and exit codes.

No command prints a traceback: Milepost's own errors become one `Error: ...` line and their exit code (see
`milepost.validate.errors` for the table), and anything else is a bug, reported by `internal_error` as one line
that names the log file holding the traceback (exit 70).
"""

from __future__ import annotations

import contextlib
import datetime
import functools
import os
import sys
import tempfile
import traceback
from collections.abc import Callable, Iterator
from enum import StrEnum
from pathlib import Path
from typing import Annotated, Any, NoReturn, TypeVar

import click
import typer

from milepost.schema.contract import Contract, load
from milepost.validate.errors import (
    EXIT_FINDINGS,
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_OK,
    EXIT_OUTPUT,
    EXIT_USAGE,
    MilepostError,
    OutputError,
)

__all__ = [
    "EXIT_FINDINGS",
    "EXIT_OK",
    "EXIT_USAGE",
    "ContractOption",
    "TextJson",
    "echo",
    "fail",
    "handle_errors",
    "standard_output",
]
ENV_LOG_DIR = "MILEPOST_LOG_DIR"


class TextJson(StrEnum):
    """Output format of the commands that print either a table for people or JSON for programs."""

    text = "text"
    json = "json"


ContractOption = Annotated[
    Path | None,
    typer.Option(
        "--contract", "-c", help="Contract folder (default: the core contract shipped with milepost).", file_okay=False
    ),
]

F = TypeVar("F", bound=Callable[..., Any])


def fail(message: str, code: int = EXIT_USAGE) -> NoReturn:
    """Print `Error: message` on stderr and exit with `code` (2 = usage or contract error)."""
    typer.echo(f"Error: {shown(message)}", err=True)
    raise typer.Exit(code)


def log_dir() -> Path:
    """Where tracebacks of unexpected errors are written: $MILEPOST_LOG_DIR, else the system's temporary folder."""
    return Path(os.environ.get(ENV_LOG_DIR) or tempfile.gettempdir())


def internal_error(exc: BaseException) -> NoReturn:
    """Report a bug without a traceback on the terminal: one line, the traceback in a log file, exit 70."""
    stamp = datetime.datetime.now(datetime.UTC).strftime("%Y%m%dT%H%M%SZ")
    where = log_dir() / f"milepost-error-{stamp}-{os.getpid()}.log"
    text = "".join(traceback.format_exception(exc))
    try:
        where.parent.mkdir(parents=True, exist_ok=True)
        where.write_text(f"milepost {' '.join(sys.argv[1:])}\n{text}", encoding="utf-8")
        told = f"the traceback is in {where}"
    except OSError as e:
        told = f"the traceback could not be written to {where} ({e.strerror or e})"
    summary = " ".join(f"{type(exc).__name__}: {exc}".split())[:300]
    typer.echo(f"Internal error (a bug in milepost, please report it): {summary}; {told}", err=True)
    raise typer.Exit(EXIT_INTERNAL)


@contextlib.contextmanager
def standard_output() -> Iterator[None]:
    """Inside the block, a failure to write standard output (a full disk, /dev/full) is an OutputError."""
    try:
        yield
        sys.stdout.flush()
    except BrokenPipeError:
        raise  # the reader went away (`| head`): handle_errors ends quietly
    except OSError as e:
        _discard_stdout()
        raise OutputError(f"cannot write to standard output: {e.strerror or e}") from None


def shown(message: str) -> str:
    """Text for the terminal: control characters from the data (ESC, BEL, ...) escaped, newlines kept."""
    from milepost.validate.cells import escape_controls

    return escape_controls(message)


def echo(message: str = "", *, err: bool = False, nl: bool = True) -> None:
    """typer.echo of `shown(message)`, with standard output that cannot be written reported as an OutputError
    (exit 4)."""
    message = shown(message)
    if err:
        typer.echo(message, err=True, nl=nl)
        return
    with standard_output():
        typer.echo(message, nl=nl)


def _discard_stdout() -> None:
    # What is still buffered goes to /dev/null, so the interpreter's own flush at exit does not fail again.
    with contextlib.suppress(OSError, ValueError), open(os.devnull, "w") as null:
        os.dup2(null.fileno(), sys.stdout.fileno())


def _stdout_broken() -> OSError | None:
    """The error standard output gives on flushing (a full disk, /dev/full), or None when it takes the output
    (or when its reader has gone away, as `| head` does: that is no error)."""
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        _discard_stdout()
    except OSError as e:
        _discard_stdout()
        return e
    return None


def handle_errors(fn: F) -> F:
    """Translate what a command raises at the CLI boundary: MilepostError -> `Error: ...` and its exit code;
    Ctrl+C -> 130; a closed pipe -> 0; standard output that cannot be written -> 4; anything else -> exit 70 via
    `internal_error`. Typer's own exits and usage errors pass through."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            result = fn(*args, **kwargs)
        # typer.TyperException: the usage errors of the click that Typer bundles (not the click package's classes)
        except (typer.Exit, typer.TyperException, click.exceptions.Exit, click.ClickException, click.Abort):
            if (broken := _stdout_broken()) is not None:
                fail(f"cannot write to standard output: {broken.strerror or broken}", EXIT_OUTPUT)
            raise
        except MilepostError as e:
            fail(str(e), e.exit_code)
        except KeyboardInterrupt:
            typer.echo("Interrupted.", err=True)
            raise typer.Exit(EXIT_INTERRUPTED) from None
        except BrokenPipeError:
            _discard_stdout()
            raise typer.Exit(EXIT_OK) from None
        except Exception as e:
            internal_error(e)
        if (broken := _stdout_broken()) is not None:
            fail(f"cannot write to standard output: {broken.strerror or broken}", EXIT_OUTPUT)
        return result

    return wrapper  # type: ignore[return-value]


def load_contract(path: Path | None, *, strict: bool = True) -> Contract:
    """Load a contract; with strict, a contract that fails lint stops the command with exit code 2."""
    if path is not None and not path.is_dir():
        fail(f"contract folder {path} does not exist")
    contract = load(path)
    if strict:
        from milepost.validate.contract_lint import lint_once

        problems = lint_once(contract)
        if problems:
            first = problems[0].message
            more = ""
            if len(problems) > 1:
                more = f" (and {len(problems) - 1} more; run `milepost contract lint {path or ''}`)"
            fail(f"the contract {contract.name} is invalid: {first}{more}")
    return contract
