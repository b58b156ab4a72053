"""The `milepost` command line: a thin Typer app; each command family lives in its own module of this package."""

from __future__ import annotations

import importlib
import sys
from typing import Any

import typer
from typer.core import TyperGroup

from milepost.validate import __version__
from milepost.validate.cli.common import echo, internal_error, shown
from milepost.validate.errors import EXIT_INTERRUPTED

# Each module exposes register(app). Keep the order: it is the order of `milepost --help`.
COMMAND_MODULES = ("check", "contract", "harmonise", "db", "dashboard")


class _EscapedGroup(TyperGroup):
    """The root group: usage errors (a bad path, option or value, found while parsing any command below it) are
    shown through `shown`, like every other message. Typer escapes C0/C1 controls in some of its messages but
    not bidirectional overrides, and not in every message; a path comes straight from the user."""

    def make_context(self, info_name: str | None, args: list[str], parent: Any = None, **extra: Any) -> Any:
        try:
            return super().make_context(info_name, args, parent, **extra)
        except typer.TyperException as e:
            _escape(e)
            raise

    def invoke(self, ctx: Any) -> Any:
        try:
            return super().invoke(ctx)
        except typer.TyperException as e:
            _escape(e)
            raise


def _escape(e: typer.TyperException) -> None:
    # Click's exceptions keep their text in `message` (BadParameter adds the parameter's name, which is ours).
    message = getattr(e, "message", None)
    if isinstance(message, str):
        e.message = shown(message)


app = typer.Typer(
    cls=_EscapedGroup,
    add_completion=False,
    no_args_is_help=True,
    help="Check, load and compare climate-mitigation scenario submissions against an intercomparison contract.",
    rich_markup_mode=None,
    pretty_exceptions_enable=False,
)


def _version(value: bool) -> None:
    if value:
        echo(f"milepost {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Print the version."),
) -> None:
    """Milepost: screen scenario submissions, load them into a database, compare them."""


for _name in COMMAND_MODULES:
    importlib.import_module(f"milepost.validate.cli.{_name}").register(app)


def main() -> None:
    """Console-script entry point. Commands translate their own errors (`common.handle_errors`); this is the last
    resort for anything that escapes Typer itself, so that no command ever ends in a traceback."""
    try:
        app()
    except KeyboardInterrupt:
        sys.stderr.write("Interrupted.\n")
        sys.exit(EXIT_INTERRUPTED)
    except Exception as e:
        try:
            internal_error(e)
        except typer.Exit as done:
            sys.exit(done.exit_code)
