"""`milepost harmonise`: align submission files with the contract's base-year reference values."""

from __future__ import annotations

import json
from enum import StrEnum
from pathlib import Path
from typing import Annotated, Any

import typer

from milepost.validate.cli.common import (
    EXIT_FINDINGS,
    EXIT_OK,
    ContractOption,
    TextJson,
    echo,
    handle_errors,
    load_contract,
)
from milepost.validate.findings import tally

VERIFIED_RULES = ("sum-of-parts", "sum-of-regions", "base-year-deviation")


class Method(StrEnum):
    ratio = "ratio"
    offset = "offset"
    converging_ratio = "converging-ratio"
    converging_offset = "converging-offset"


@handle_errors
def harmonise_cmd(
    files: Annotated[
        list[Path],
        typer.Argument(
            help="Submission files: CSV/TSV, XLSX or Parquet data tables, and optionally a scenarios table.",
            show_default=False,
        ),
    ],
    output: Annotated[
        Path,
        typer.Option(
            "--output",
            "-o",
            help="The harmonised submission, long format; .csv, .parquet or .xlsx picks the format.",
            dir_okay=False,
            show_default=False,
        ),
    ],
    contract: ContractOption = None,
    method: Annotated[
        Method | None,
        typer.Option("--method", help="Use this method for every harmonised series instead of the contract's."),
    ] = None,
    convergence_year: Annotated[
        int | None,
        typer.Option(
            "--convergence-year",
            help="Year the converging methods reach the model's own values, for every series "
            "(default: the contract's).",
        ),
    ] = None,
    methods_out: Annotated[
        Path | None,
        typer.Option(
            "--methods",
            help="Where the method of each series goes (default: OUTPUT's name with -methods).",
            dir_okay=False,
        ),
    ] = None,
    verify: Annotated[
        bool, typer.Option("--verify/--no-verify", help="Check the harmonised file against the contract.")
    ] = True,
    fmt: Annotated[TextJson, typer.Option("--format", "-f", help="Report format.")] = TextJson.text,
    limit: Annotated[int, typer.Option(help="Findings listed per rule in the text report (0 = all).", min=0)] = 3,
    force: Annotated[
        bool, typer.Option("--force", help="Replace existing output files that milepost did not write.")
    ] = False,
) -> None:
    """Harmonise a submission to the base year. Exit 0: written; 1: the input or the result has errors; 2: usage
    error; 4: an output could not be written."""
    from milepost.validate.harmonise import check_overrides, harmonise, text_table
    from milepost.validate.harmonise.output import (
        CAUTION,
        default_methods_path,
        earlier_output,
        file_format,
        write_table,
    )
    from milepost.validate.outputs import check_target
    from milepost.validate.reports import folded_lines
    from milepost.validate.runner import run_check

    c = load_contract(contract)
    chosen = method.value if method is not None else None
    check_overrides(c, chosen, convergence_year)
    methods_path = methods_out or default_methods_path(output)
    file_format(output)
    file_format(methods_path)
    if methods_path.resolve() == output.resolve():
        raise typer.BadParameter("the output must be a new file, not the methods table")
    rerun = earlier_output(output, methods_path)  # re-running over its own earlier output needs no --force
    for target in (output, methods_path):  # before the check: a wrong -o is known at once
        check_target(target, inputs=files, force=force or rerun)
    checked = run_check(files, c, progress=True)
    result = harmonise(checked.con, c, method=chosen, converge_year=convergence_year)
    rows = write_table(checked.con, "harmonised", output, inputs=files, force=force or rerun)
    write_table(checked.con, "harmonise_methods", methods_path, inputs=files, force=force)
    input_errors = checked.counts.get("error", 0)
    recheck: dict[str, Any] | None = None
    if verify:
        again = run_check([output], c, progress=True)
        recheck = {
            "counts": again.counts,
            "rules": {r: n for r, _, n in again.rule_counts},
            "passed": again.passed("error"),
        }
        again.con.close()
    code = EXIT_OK if input_errors == 0 and (recheck is None or recheck["passed"]) else EXIT_FINDINGS
    if fmt is TextJson.json:
        payload = result.to_dict()
        payload.update(
            output=str(output),
            methods_file=str(methods_path),
            rows_written=rows,
            input_counts=checked.counts,
            verification=recheck,
            caution=CAUTION,
        )
        echo(json.dumps(payload, indent=2, default=str))
        raise typer.Exit(code)
    ask = f"{chosen} for every series" if chosen else "the contract's methods"
    if convergence_year is not None:
        ask += f", converging by {convergence_year}"
    echo(
        f"Harmonised to the reference values of {c.base_year} ({ask}; contract {c.name}): "
        f"{result.harmonised_series:,} of {result.series:,} series adjusted."
    )
    for line in text_table(result.counts):
        echo("  " + line)
    s = result.severity_counts
    echo(f"Findings: {tally(s)}.")
    for rule, severity, n in result.rule_counts:
        echo(f"{severity} {rule}: {n:,} series")
        listed = [f for f in result.findings if f.rule == rule][: limit or None]
        for line in folded_lines(listed):
            echo("  " + line)
        if n > len(listed):
            echo(f"  ... {n - len(listed):,} more (every series is in {methods_path})")
    echo(f"Wrote {rows:,} rows to {output} and the method of each of {result.series:,} series to {methods_path}.")
    if input_errors:
        echo(
            f"The input has {input_errors:,} errors: those rows were left out before harmonising "
            f"(see `milepost check`)."
        )
    if recheck is not None:
        counts = recheck["counts"]
        verdict = "passed" if recheck["passed"] else "failed"
        broken = ", ".join(f"{r} {recheck['rules'][r]}" for r in VERIFIED_RULES if r in recheck["rules"])
        echo(
            f"Check of {output} against the contract: {verdict} ({tally(counts)})"
            + (f"; {broken}" if broken else "")
            + "."
        )
    echo(CAUTION)
    raise typer.Exit(code)


def register(app: typer.Typer) -> None:
    """Add `harmonise` to the app."""
    app.command("harmonise")(harmonise_cmd)
