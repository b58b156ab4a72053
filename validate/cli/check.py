"""`milepost check` and `milepost rules`: check submission files against a contract and report the findings."""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer

from milepost.validate.cli.common import (
    EXIT_FINDINGS,
    EXIT_OK,
    ContractOption,
    echo,
    fail,
    handle_errors,
    load_contract,
    standard_output,
)
from milepost.validate.findings import plural, tally
from milepost.validate.outputs import check_target, write_text


class Format(StrEnum):
    text = "text"
    json = "json"
    xlsx = "xlsx"


class FailOn(StrEnum):
    error = "error"
    warning = "warning"


@handle_errors
def check(
    files: Annotated[
        list[Path],
        typer.Argument(
            help="Submission files: CSV/TSV, XLSX or Parquet data tables, and optionally a scenarios table.",
            show_default=False,
        ),
    ],
    contract: ContractOption = None,
    fmt: Annotated[Format, typer.Option("--format", "-f", help="Report format.")] = Format.text,
    output: Annotated[
        Path | None,
        typer.Option(
            "--output",
            "-o",
            help="Write the report here (xlsx needs it; text and json default to standard output).",
            dir_okay=False,
        ),
    ] = None,
    fail_on: Annotated[
        FailOn, typer.Option("--fail-on", help="Exit 1 when findings of this severity (or worse) exist.")
    ] = FailOn.error,
    limit: Annotated[int, typer.Option(help="Findings shown in the text report (0 = all).", min=0)] = 200,
    force: Annotated[
        bool, typer.Option("--force", help="Replace an existing --output file that milepost did not write.")
    ] = False,
) -> None:
    """Check submission files against the contract. Exit 0: passed; 1: findings at the fail level; 2: usage error;
    4: the report could not be written."""
    from milepost.validate.reports import print_text, to_json, to_text, to_xlsx
    from milepost.validate.runner import run_check

    c = load_contract(contract)
    if fmt is Format.xlsx and output is None:
        fail("--format xlsx needs --output FILE.xlsx")
    if output is not None:  # before the check, which may take a while: a wrong -o is known at once
        check_target(output, inputs=files, force=force)
    result = run_check(files, c, progress=True)
    if fmt is Format.json:
        text = to_json(result, fail_on.value)
        if output:
            write_text(output, text + "\n", inputs=files, force=force)
        else:
            echo(text)
    elif fmt is Format.xlsx and output is not None:  # without --output it stopped above
        to_xlsx(result, output, fail_on.value, force=force)
        echo(f"wrote {output}", err=True)
    if fmt is Format.text:
        if output:
            report = "\n".join(to_text(result, fail_on.value, limit)) + "\n"
            write_text(output, report, inputs=files, force=force)
        else:
            with standard_output():
                print_text(result, fail_on.value, limit)
    elif output is not None or fmt is Format.json:
        verdict = "passed" if result.passed(fail_on.value) else "failed"
        echo(
            f"{verdict}: {tally(result.counts)} in {plural(result.rows, 'row')}",
            err=True,
        )
    raise typer.Exit(EXIT_OK if result.passed(fail_on.value) else EXIT_FINDINGS)


@handle_errors
def rules() -> None:
    """List every rule id with its default severity and meaning."""
    from milepost.validate.findings import RULES

    width = max(len(r) for r in RULES) + 2
    for r in RULES.values():
        echo(f"{r.id:<{width}}{r.severity:<9}{r.category:<10}{r.summary}")


def register(app: typer.Typer) -> None:
    """Add `check` and `rules` to the app."""
    app.command("check")(check)
    app.command("rules")(rules)
