"""What every command shares: option types, error translation at the CLI boundary, and exit codes."""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from enum import StrEnum
from pathlib import Path
from typing import Annotated, Any, TypeVar

import typer

from milepost.schema.contract import Contract, ContractError, load
from milepost.validate.errors import MilepostError

EXIT_OK, EXIT_FINDINGS, EXIT_USAGE = 0, 1, 2


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


def fail(message: str, code: int = EXIT_USAGE) -> None:
    """Print `Error: message` on stderr and exit with `code` (2 = usage or contract error)."""
    typer.echo(f"Error: {message}", err=True)
    raise typer.Exit(code)


def handle_errors(fn: F) -> F:
    """Turn Milepost's own exceptions into a one-line `Error: ...` and exit code 2, never a traceback."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except (MilepostError, ContractError) as e:
            fail(str(e))
        except KeyboardInterrupt:
            typer.echo("Interrupted.", err=True)
            raise typer.Exit(130) from None
        except BrokenPipeError:
            sys.stderr.close()
            raise typer.Exit(0) from None

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
