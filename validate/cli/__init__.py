"""The `milepost` command line: a thin Typer app; each command family lives in its own module of this package."""

from __future__ import annotations

import importlib

import typer

from milepost.validate import __version__

# Each module exposes register(app). Keep the order: it is the order of `milepost --help`.
COMMAND_MODULES = ("check", "contract", "db", "dashboard")

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Check, load and compare climate-mitigation scenario submissions against an intercomparison contract.",
    rich_markup_mode=None,
    pretty_exceptions_enable=False,
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"milepost {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Print the version."),
) -> None:
    """Milepost: screen scenario submissions, load them into a database, compare them."""


for _name in COMMAND_MODULES:
    importlib.import_module(f"milepost.validate.cli.{_name}").register(app)


def main() -> None:
    """Console-script entry point."""
    app()
