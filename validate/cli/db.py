"""`milepost ingest | submissions | export | snapshot | diff`: the scenario database from the command line."""

from __future__ import annotations

import json
from enum import StrEnum
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from milepost.validate.cli.common import EXIT_OK, ContractOption, TextJson, echo, fail, handle_errors, load_contract
from milepost.validate.findings import plural, tally

if TYPE_CHECKING:
    from milepost.validate.store.pairs import PairRule  # imported lazily at run time, like the other store modules

DbOption = Annotated[
    Path | None,
    typer.Option(
        "--db",
        help="Database file (default: $MILEPOST_DB, else ./milepost.duckdb).",
        dir_okay=False,
        show_default=False,
    ),
]


class What(StrEnum):
    data = "data"
    indicators = "indicators"
    gaps = "gaps"
    findings = "findings"
    pairs = "pairs"


class Basis(StrEnum):
    raw = "raw"
    harmonised = "harmonised"


class ExportFormat(StrEnum):
    csv = "csv"
    parquet = "parquet"
    xlsx = "xlsx"


def _echo_json(payload: Any) -> None:
    echo(json.dumps(payload, indent=2, default=str))


def _scenario_list(names: list[str], limit: int = 6) -> str:
    from milepost.validate.findings import shorten

    return shorten(names, limit)


@handle_errors
def ingest_cmd(
    files: Annotated[
        list[Path],
        typer.Argument(
            help="The files of one submission: data tables (CSV/TSV, XLSX, Parquet) and optionally a scenarios table.",
            show_default=False,
        ),
    ],
    db: DbOption = None,
    contract: Annotated[
        Path | None,
        typer.Option(
            "--contract",
            "-c",
            help="Contract folder (default: the contract the database's accepted submissions were checked with; "
            "the core contract for a new database).",
            file_okay=False,
        ),
    ] = None,
    switch_contract: Annotated[
        bool,
        typer.Option(
            "--switch-contract",
            help="Ingest under a contract other than the database's (recorded with the submission).",
        ),
    ] = False,
    by: Annotated[str | None, typer.Option("--by", help="Who submits (default: the login name).")] = None,
    note: Annotated[str | None, typer.Option("--note", help="A note stored with the submission.")] = None,
    accept_warnings: Annotated[
        bool, typer.Option("--accept-warnings", help="Accept a submission whose findings are warnings only.")
    ] = False,
    harmonise: Annotated[
        bool,
        typer.Option(
            "--harmonise",
            help="Also store values harmonised to the contract's base-year reference values (basis 'harmonised').",
        ),
    ] = False,
    wait: Annotated[
        float | None,
        typer.Option(
            "--wait", min=0, help="Seconds to wait for another ingest (default: $MILEPOST_LOCK_TIMEOUT, else 120)."
        ),
    ] = None,
    fmt: Annotated[TextJson, typer.Option("--format", "-f", help="Report format.")] = TextJson.text,
    limit: Annotated[int, typer.Option(help="Findings listed for a rejected submission (0 = all).", min=0)] = 20,
) -> None:
    """Check one submission and store it. Exit 0: stored (or already stored); 1: rejected; 2: usage error;
    3: the database could not be written (or another ingest held it longer than --wait)."""
    from milepost.validate.reports import folded_lines
    from milepost.validate.store.contracts import database_contract
    from milepost.validate.store.database import default_db_path, warn
    from milepost.validate.store.ingest import ingest

    path = default_db_path(db)
    made_with, folder = database_contract(path)
    if contract is None and made_with is not None:
        if folder is None:
            fail(
                f"the database {path} was made with the contract {made_with}, which is not bundled with milepost: "
                "give its folder with --contract"
            )
        contract = folder
        echo(f"Contract: {made_with}, the database's (from {folder}).", err=True)
    c = load_contract(contract)
    if made_with is not None and c.name != made_with:
        if not switch_contract:
            fail(
                f"the database {path} was made with the contract {made_with}, not {c.name}: give --switch-contract "
                f"to ingest under {c.name} (the contract is recorded with the submission)"
            )
        echo(f"Contract: {c.name}, not the database's {made_with} (--switch-contract; recorded).", err=True)
    result = ingest(
        files,
        path,
        c,
        by=by,
        note=note,
        accept_warnings=accept_warnings,
        progress=True,
        harmonise=harmonise,
        lock_timeout=wait,
        on_wait=warn,
    )
    if fmt is TextJson.json:
        _echo_json(result.to_dict())
        raise typer.Exit(result.exit_code)
    recomputed = (
        f"Recomputed {result.recomputed:,} stored indicator rows under the current conventions "
        "(the database was migrated; see schema/indicators.toml)."
    )
    if result.status == "unchanged":
        if result.recomputed:
            echo(f"Unchanged: {result.reason}; no submission was written to {result.db}.")
            echo(recomputed)
        else:
            echo(f"Unchanged: {result.reason}; nothing was written to {result.db}.")
        raise typer.Exit(result.exit_code)
    if result.recomputed:
        echo(recomputed)
    n = len(result.scenarios)
    scen = f"{n} scenario{'s' if n != 1 else ''}" + (f" ({_scenario_list(result.scenarios)})" if n else "")
    counts = result.counts
    counted = tally(counts)
    if result.status == "accepted":
        echo(
            f"Accepted as submission {result.submission_id}: model {result.model}, {scen}, "
            f"{result.rows:,} rows stored in {result.db}."
        )
        if result.harmonised:
            h = result.harmonise_counts
            echo(
                f"Harmonised: {result.harmonised_rows:,} rows stored beside the raw ones, "
                f"{result.harmonised_series:,} series adjusted ({plural(h.get('warning', 0), 'warning')}, "
                f"{plural(h.get('note', 0), 'note')}; `milepost harmonise` with the same files lists them)."
            )
        if result.replaced:
            older = ", ".join(f"{r['scenario']} (submission {r['submission_id']})" for r in result.replaced)
            echo(f"New version of: {older}; the older versions are kept as history.")
        if result.superseded:
            echo(f"Now wholly superseded: submission {', '.join(map(str, result.superseded))}.")
        if result.refreshed:
            names = ", ".join(r["scenario"] for r in result.refreshed)
            echo(f"Indicators recomputed against the new reference for: {names}.")
        echo(f"Findings: {counted} (stored with the submission).")
        raise typer.Exit(EXIT_OK)
    echo(f"Rejected as submission {result.submission_id}: model {result.model or '-'}, {scen}: {result.reason}.")
    for line in folded_lines(result.findings[: limit or None]):
        echo(line)
    if limit and (len(result.findings) > limit or counts["error"] + counts["warning"] > limit):
        echo(
            f"... all findings are stored: milepost export --what findings --submission "
            f"{result.submission_id} --format csv -o findings.csv"
        )
    echo(f"Findings: {counted}.")
    raise typer.Exit(result.exit_code)


@handle_errors
def submissions_cmd(
    db: DbOption = None,
    fmt: Annotated[TextJson, typer.Option("--format", "-f", help="Output format.")] = TextJson.text,
    show_all: Annotated[
        bool,
        typer.Option(
            "--all", help="Also list rejected attempts that were followed by another submission of the model."
        ),
    ] = False,
) -> None:
    """List the submissions: status, version per model, rows, findings, who and when. A rejected attempt that was
    followed by another submission of the same model (or files) is kept in the database but folded away here
    unless --all."""
    from milepost.validate.store.database import default_db_path
    from milepost.validate.store.exports import listed, submissions, version_label

    every = submissions(default_db_path(db))
    rows = listed(every, show_all)
    if fmt is TextJson.json:
        # `version` stays a number (null when rejected) for scripts; `version_label` is what the text and the
        # dashboard show
        _echo_json([r | {"version_label": version_label(r["version"])} for r in rows])
        return
    if not every:
        echo("No submissions yet.")
        return
    vw = max([3, *(len(version_label(r["version"])) for r in rows)])  # "rejected, no version" is wider than v12
    header = (
        f"{'id':>4}  {'status':<16}  {'model':<16}  {'ver':>{vw}}  {'scen':>4}  {'rows':>10}  "
        f"{'err':>5}  {'warn':>5}  {'submitted (UTC)':<19}  {'by':<12}  files"
    )
    echo(header)
    for r in rows:
        status = r["status"] + (f" by {r['superseded_by']}" if r["superseded_by"] else "")
        ver = version_label(r["version"])
        files = ", ".join(f["name"] for f in r["files"])
        echo(
            f"{r['id']:>4}  {status:<16}  {(r['model'] or '-'):<16}  {ver:>{vw}}  {len(r['scenarios']):>4}  "
            f"{r['rows']:>10,}  {r['errors']:>5}  {r['warnings']:>5}  {r['submitted_at'] or '-':<19}  "
            f"{(r['submitted_by'] or '-'):<12}  {files}"
        )
    hidden = len(every) - len(rows)
    if hidden:
        ids = ", ".join(str(r["id"]) for r in every if r["retried"])
        echo(
            f"({plural(hidden, 'rejected attempt')} followed by a later submission not listed: {ids}; --all lists them)"
        )


@handle_errors
def export_cmd(
    what: Annotated[
        What,
        typer.Option(
            "--what",
            help="Which rows: current data, current indicators, indicator gaps (kinds left out for a missing "
            "input), the findings of every submission, or pairs "
            "(each delayed scenario's indicators beside its earliest sibling's).",
            show_default=False,
        ),
    ],
    fmt: Annotated[ExportFormat, typer.Option("--format", "-f", help="File format.", show_default=False)],
    output: Annotated[Path, typer.Option("--output", "-o", help="File to write.", dir_okay=False, show_default=False)],
    db: DbOption = None,
    model: Annotated[list[str] | None, typer.Option("--model", help="Only this model (repeatable).")] = None,
    scenario: Annotated[list[str] | None, typer.Option("--scenario", help="Only this scenario (repeatable).")] = None,
    region: Annotated[list[str] | None, typer.Option("--region", help="Only this region (repeatable).")] = None,
    variable: Annotated[list[str] | None, typer.Option("--variable", help="Only this variable (repeatable).")] = None,
    submission: Annotated[
        list[int] | None, typer.Option("--submission", help="Rows of this submission, current or not (repeatable).")
    ] = None,
    basis: Annotated[
        Basis, typer.Option("--basis", help="Data, indicators and gaps as submitted (raw) or harmonised.")
    ] = Basis.raw,
    contract: Annotated[
        Path | None,
        typer.Option(
            "--contract",
            "-c",
            help="Pairs: the contract whose [pairs] says how scenarios pair (default: the bundled contract the "
            "database names; without [pairs], scenarios of one model in one outcome class pair).",
            file_okay=False,
        ),
    ] = None,
    likelihood: Annotated[
        str, typer.Option("--likelihood", help="Pairs without [pairs]: the budget likelihood of the outcome classes.")
    ] = "67%",
    force: Annotated[
        bool, typer.Option("--force", help="Replace an existing --output file that milepost did not write.")
    ] = False,
    raw_text: Annotated[
        bool,
        typer.Option(
            "--raw-text",
            help="CSV: write text cells that start with = + - @ as they are (by default they get a leading ' "
            "so that spreadsheet programs do not run them as formulas).",
        ),
    ] = False,
) -> None:
    """Export data, indicators, findings or delay pairs as CSV, Parquet or XLSX."""
    from milepost.validate.progress import Count
    from milepost.validate.store.database import default_db_path, warn
    from milepost.validate.store.exports import Filters, export

    filters = Filters(model or (), scenario or (), region or (), variable or (), submission or (), basis.value)
    path = default_db_path(db)
    rule = _pair_rule(path, contract, likelihood) if what is What.pairs else None
    with Count("Exporting") as progress:
        n = export(
            path,
            what.value,
            fmt.value,
            output,
            filters,
            on_warning=warn,
            pairing=rule,
            force=force,
            raw_text=raw_text,
            progress=progress,
        )
    if rule is not None:
        echo(rule.describe(), err=True)
    echo(f"Wrote {n:,} rows to {output}.", err=True)


def _pair_rule(db: Path, contract: Path | None, likelihood: str) -> PairRule:
    """The pairing rule of the given contract, else of the bundled contract the database names, else the default."""
    from milepost.validate.store.contracts import find_bundled, stored_contract_name
    from milepost.validate.store.database import reading
    from milepost.validate.store.pairs import rule_for

    if not likelihood.endswith("%"):
        fail(f"--likelihood is a percentage such as 67%, not {likelihood!r}")
    if contract is not None:
        return rule_for(load_contract(contract, strict=False), likelihood)
    with reading(db) as con:
        name = stored_contract_name(con)
    return rule_for(find_bundled(name) if name else None, likelihood)


@handle_errors
def snapshot_cmd(
    directory: Annotated[
        Path, typer.Argument(help="New (or empty) folder for the snapshot.", file_okay=False, show_default=False)
    ],
    db: DbOption = None,
) -> None:
    """Write the current data, indicators and scenarios as Parquet partitioned by model, with a manifest."""
    from milepost.validate.store.database import default_db_path
    from milepost.validate.store.exports import snapshot

    manifest = snapshot(default_db_path(db), directory)
    t = manifest["tables"]
    echo(
        f"Wrote {len(manifest['files'])} files to {directory}: {t['data']['rows']:,} data rows, "
        f"{t['indicators']['rows']:,} indicator rows, {t['scenarios']['rows']:,} scenarios; "
        f"manifest.json lists their sha256."
    )


@handle_errors
def diff_cmd(
    a: Annotated[int, typer.Argument(help="The older submission id.", show_default=False)],
    b: Annotated[int, typer.Argument(help="The newer submission id.", show_default=False)],
    db: DbOption = None,
    contract: ContractOption = None,
    relative: Annotated[
        float | None, typer.Option(help="Relative tolerance (default: the contract's sum_relative).", min=0)
    ] = None,
    absolute: Annotated[
        float | None, typer.Option(help="Absolute tolerance (default: the contract's sum_absolute).", min=0)
    ] = None,
    common: Annotated[
        bool,
        typer.Option("--common", help="Compare only the scenarios both submissions have (for a partial revision)."),
    ] = False,
    any_model: Annotated[
        bool, typer.Option("--any-model", help="Allow comparing submissions of two different models.")
    ] = False,
    fmt: Annotated[TextJson, typer.Option("--format", "-f", help="Output format.")] = TextJson.text,
    limit: Annotated[int, typer.Option(help="Rows listed per kind of change (0 = all).", min=0)] = 20,
) -> None:
    """Rows added, removed and changed beyond tolerance between two versions of one model's submissions; rows
    of scenarios the newer one does not hold are untouched (still current), not removed. Exit 0 either way."""
    from milepost.validate.store.database import default_db_path
    from milepost.validate.store.exports import diff

    if a == b:
        fail("give two different submission ids")
    c = load_contract(contract, strict=False)
    rel = c.tolerance.sum_relative if relative is None else relative
    ab = c.tolerance.sum_absolute if absolute is None else absolute
    d = diff(default_db_path(db), a, b, rel, ab, limit, common_only=common, any_model=any_model)
    if fmt is TextJson.json:
        _echo_json(d.to_dict())
        return
    n = d.counts

    def named(sid: int, model: str | None, version: int | None) -> str:
        return f"submission {sid} ({model or '-'}{f' v{version}' if version else ''})"

    echo(f"Compared {named(a, d.models[0], d.versions[0])} with {named(b, d.models[1], d.versions[1])}.")
    untouched = f", {n['untouched']:,} untouched" if n["untouched"] else ""
    echo(
        f"Submission {a} -> {b}: {n['added']:,} added, {n['removed']:,} removed, {n['changed']:,} changed "
        f"beyond tolerance (relative {rel:g}, absolute {ab:g}), {n['same']:,} unchanged{untouched}."
    )
    for side, names in ((a, d.only_a), (b, d.only_b)):
        if names:
            if common:
                note = " (not compared: --common)"
            elif side == a:
                note = f" (untouched by {b}: still current, not removed)"
            else:
                note = " (new)"
            echo(f"Scenarios only in {side}{note}: {_scenario_list(names)}")
    for kind, sign in (("added", "+"), ("removed", "-")):
        for r in getattr(d, kind):
            echo(
                f"{sign} {r['model']} | {r['scenario']} | {r['region']} | {r['variable']} | {r['year']}: "
                f"{r['value']:g} {r['unit']}"
            )
    for r in d.changed:
        units = r["unit_a"] if r["unit_a"] == r["unit_b"] else f"{r['unit_a']} -> {r['unit_b']}"
        echo(
            f"~ {r['model']} | {r['scenario']} | {r['region']} | {r['variable']} | {r['year']}: "
            f"{r['value_a']:g} -> {r['value_b']:g} {units}"
        )
    shown = len(d.added) + len(d.removed) + len(d.changed)
    if shown < n["added"] + n["removed"] + n["changed"]:
        echo(f"({shown} of {n['added'] + n['removed'] + n['changed']:,} differences listed; --limit 0 for all)")


def register(app: typer.Typer) -> None:
    """Add the database commands to the app."""
    app.command("ingest")(ingest_cmd)
    app.command("submissions")(submissions_cmd)
    app.command("export")(export_cmd)
    app.command("snapshot")(snapshot_cmd)
    app.command("diff")(diff_cmd)
