"""`milepost contract lint|show|template`: inspect a contract folder."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path
from typing import Annotated

import typer

from milepost.validate.cli.common import EXIT_FINDINGS, EXIT_OK, TextJson, echo, fail, handle_errors, load_contract
from milepost.validate.findings import plural

contract_app = typer.Typer(
    help="Start a contract, lint it, show it resolved, or write a submission template.", no_args_is_help=True
)
DirArg = Annotated[
    Path | None,
    typer.Argument(help="Contract folder (default: the core contract).", file_okay=False, show_default=False),
]


@contract_app.command("lint")
@handle_errors
def lint_cmd(directory: DirArg = None) -> None:
    """Find cycles in parts, parts whose units do not match their total, unknown units and bad references."""
    from milepost.validate.contract_lint import advice, lint
    from milepost.validate.reports import finding_line

    c = load_contract(directory, strict=False)
    problems = lint(c)
    for p in [*problems, *advice(c)]:  # warnings are printed but do not fail the lint
        echo(finding_line(p))
    if problems:
        echo(f"FAILED: contract {c.name} has {plural(len(problems), 'problem')}")
        raise typer.Exit(EXIT_FINDINGS)
    echo(
        f"PASSED: contract {c.name} ({c.hash[:12]}): {len(c.variables)} variables, {len(c.regions)} regions, "
        f"{len(c.reference)} reference values, {len(c.bounds)} bounds"
    )
    raise typer.Exit(EXIT_OK)


@contract_app.command("show")
@handle_errors
def show_cmd(
    directory: DirArg = None, fmt: Annotated[TextJson, typer.Option("--format", "-f")] = TextJson.text
) -> None:
    """Print the resolved contract (after `extends`), with its hash."""
    c = load_contract(directory, strict=False)
    if fmt is TextJson.json:
        echo(json.dumps(c.to_dict(), indent=2, ensure_ascii=False))
        return
    echo(f"contract {c.name}  hash {c.hash}")
    echo(f"  {c.description}")
    echo(f"  sources: {' <- '.join(c.sources)}")
    echo(
        f"  years {c.first_year}–{c.last_year}, base {c.base_year}, milestones "
        f"{', '.join(map(str, c.milestones))}; required in {', '.join(c.required_regions)}"
    )
    t = c.tolerance
    echo(
        f"  tolerance: sums ±{t.sum_relative * 100:g} % (floor {t.sum_absolute:g}), base year "
        f"±{t.base_year_relative * 100:g} %; GWP set {c.gwp_set}; discount rate {c.discount_rate:g} %/yr"
    )
    lim = dataclasses.asdict(c.limits)
    echo("  limits: " + ", ".join(f"{k} {v:,}" + (" (set)" if k in c.limits_set else "") for k, v in lim.items()))
    if c.reference_required:
        echo("  costs: every scenario that is no scenario's reference must name one ([costs] reference_required)")
    echo("")
    echo(f"{'variable':<34}{'unit':<22}{'req':<5}{'sign':<14}{'regions':<8}parts")
    for v in c.variables.values():
        parts = ", ".join(p.variable + (f" ×{p.factor:g}" if p.factor != 1 else "") for p in v.parts)
        echo(f"{v.name:<34}{v.unit:<22}{'yes' if v.required else '':<5}{v.sign:<14}{v.regions:<8}{parts}")
    echo("")
    for r in c.regions.values():
        echo(f"region {r.name}" + (f" = {' + '.join(r.parts)}" if r.parts else ""))
    if c.countries:
        echo("regions may also be ISO 3166-1 alpha-3 country codes")


@contract_app.command("template")
@handle_errors
def template_cmd(
    directory: DirArg = None,
    output: Annotated[
        Path, typer.Option("--output", "-o", help="FILE.xlsx (with drop-down lists) or FILE.csv.", dir_okay=False)
    ] = Path("submission-template.xlsx"),
    force: Annotated[
        bool, typer.Option("--force", help="Replace an existing --output file that milepost did not write.")
    ] = False,
) -> None:
    """Write an empty long-format submission template for the contract."""
    from milepost.validate.template import write_template

    if output.suffix.lower() not in (".xlsx", ".csv"):
        fail(f"{output}: the template is written as .xlsx or .csv")
    c = load_contract(directory)
    write_template(c, output, force=force)
    echo(f"wrote {output} for contract {c.name}")


@contract_app.command("new")
@handle_errors
def new_cmd(
    directory: Annotated[
        Path, typer.Argument(help="New (or empty) folder for the contract.", file_okay=False, show_default=False)
    ],
    extends: Annotated[
        str, typer.Option("--extends", help="The contract it builds on: core, or a contract folder.")
    ] = "core",
    name: Annotated[str | None, typer.Option("--name", help="Contract name (default: the folder's name).")] = None,
) -> None:
    """Write a commented starter contract that extends another (every setting shown, commented out)."""
    from milepost.validate.starter_contract import write_starter

    written = write_starter(directory, extends, name)
    c = load_contract(directory, strict=False)
    echo(f"wrote {', '.join(p.name for p in written)} in {directory}: contract {c.name}, extends {extends}")
    echo(f"next: edit them, then `milepost contract lint {directory}`")


def register(app: typer.Typer) -> None:
    """Add the `contract` command group."""
    app.add_typer(contract_app, name="contract")
