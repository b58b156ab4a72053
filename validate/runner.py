"""The check run: read every file once into DuckDB, run every check family as SQL, collect the findings."""

from __future__ import annotations

import os
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import duckdb

from milepost.schema.contract import Contract
from milepost.schema.units import UnitError
from milepost.validate import __version__
from milepost.validate.checks import ROW_CHECKS, TABLE_CHECKS, Context
from milepost.validate.checks.structure import file_findings
from milepost.validate.findings import FINDING_COLUMNS, RULES, SEVERITIES, Finding
from milepost.validate.readers import InputFile, read_file

FINDINGS_PER_RULE = 1000
PROGRESS_BYTES = 40 << 20  # about a million long-format rows


@dataclass
class CheckResult:
    """What a check run found. The full findings stay in `con` (TEMP table `findings`); `findings` holds the first
    FINDINGS_PER_RULE of each rule, `counts` the true totals by severity, `rule_counts` by (rule, severity)."""

    contract: Contract
    inputs: list[InputFile]
    findings: list[Finding]
    counts: dict[str, int]
    rule_counts: list[tuple[str, str, int]]
    rows: int
    con: duckdb.DuckDBPyConnection
    scenarios: Any = None
    truncated: bool = False
    version: str = __version__
    usable_rows: int = 0
    notes: list[str] = field(default_factory=list)

    def passed(self, fail_on: str = "error") -> bool:
        """True when nothing reaches the fail level ('error', or 'warning' = warnings count too)."""
        levels = SEVERITIES[: SEVERITIES.index(fail_on) + 1]
        return not any(self.counts.get(s, 0) for s in levels)


def _contract_tables(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    units = contract.units
    con.execute("CREATE OR REPLACE TEMP TABLE c_variables (variable VARCHAR, unit VARCHAR, sign VARCHAR, "
                "regions VARCHAR, required BOOLEAN)")
    con.executemany("INSERT INTO c_variables VALUES (?, ?, ?, ?, ?)",
                    [(v.name, v.unit, v.sign, v.regions, v.required) for v in contract.variables.values()])
    con.execute("CREATE OR REPLACE TEMP TABLE c_parts (total VARCHAR, part VARCHAR, factor DOUBLE)")
    parts = [(v.name, p.variable, p.factor) for v in contract.variables.values() for p in v.parts]
    if parts:
        con.executemany("INSERT INTO c_parts VALUES (?, ?, ?)", parts)
    con.execute("CREATE OR REPLACE TEMP TABLE c_part_counts AS SELECT total, count(*) AS n FROM c_parts GROUP BY 1")
    regions = set(contract.regions)
    if contract.countries:
        from milepost.schema.contract import iso3_codes

        regions |= iso3_codes()
    con.execute("CREATE OR REPLACE TEMP TABLE c_regions (region VARCHAR)")
    con.executemany("INSERT INTO c_regions VALUES (?)", [(r,) for r in sorted(regions)])
    con.execute("CREATE OR REPLACE TEMP TABLE c_region_parts (parent VARCHAR, part VARCHAR)")
    rparts = [(r.name, p) for r in contract.regions.values() for p in r.parts]
    if rparts:
        con.executemany("INSERT INTO c_region_parts VALUES (?, ?)", rparts)
    con.execute("CREATE OR REPLACE TEMP TABLE c_region_counts AS "
                "SELECT parent, count(*) AS n FROM c_region_parts GROUP BY 1")
    con.execute("CREATE OR REPLACE TEMP TABLE c_reference (region VARCHAR, variable VARCHAR, year INTEGER, "
                "value DOUBLE)")
    ref = []
    for r in contract.reference:
        v = contract.variables.get(r.variable)
        if v is None:
            continue  # contract lint reports it
        try:
            ref.append((r.region, r.variable, r.year, r.value * units.factor(r.unit, v.unit)))
        except UnitError:
            continue  # contract lint reports it
    if ref:
        con.executemany("INSERT INTO c_reference VALUES (?, ?, ?, ?)", ref)
    con.execute("CREATE OR REPLACE TEMP TABLE c_bounds (variable VARCHAR, region VARCHAR, year_from INTEGER, "
                "year_to INTEGER, low DOUBLE, high DOUBLE)")
    if contract.bounds:
        con.executemany("INSERT INTO c_bounds VALUES (?, ?, ?, ?, ?, ?)",
                        [(b.variable, b.region, b.year_from, b.year_to, b.low, b.high) for b in contract.bounds])


def _obs_view(con: duckdb.DuckDBPyConnection, inputs: list[InputFile]) -> None:
    parts = []
    for i, inp in enumerate(inputs):
        if inp.kind == "data" and inp.table:
            path = inp.path.replace("'", "''")
            sheet = f"'{inp.sheet}'" if inp.sheet else "NULL::VARCHAR"
            parts.append(f"SELECT {i} AS src, '{path}' AS path, {sheet} AS sheet, * FROM {inp.table}")
    if not parts:
        parts = ["SELECT NULL::INTEGER AS src, NULL::VARCHAR AS path, NULL::VARCHAR AS sheet, NULL::BIGINT AS line, "
                 + ", ".join(f"NULL::VARCHAR AS {c}" for c in ("model", "scenario", "region", "variable", "unit"))
                 + ", NULL::INTEGER AS year, NULL::VARCHAR AS year_raw, NULL::DOUBLE AS value, "
                 "NULL::VARCHAR AS value_raw WHERE false"]
    con.execute("CREATE OR REPLACE TEMP VIEW obs AS " + " UNION ALL ".join(parts))


def _build_checked(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """`checked`: the usable rows, converted into contract units, one row per key (the first occurrence wins)."""
    order = "(o.src * 10000000000 + o.line)"
    value = "(o.value * m.factor)"
    con.execute(
        "CREATE OR REPLACE TEMP TABLE checked AS "
        "SELECT o.model, o.scenario, o.region, o.variable, any_value(m.target) AS unit, o.year, "
        f"arg_min({value}, {order}) AS value, count(*) AS n, min({value}) AS vmin, max({value}) AS vmax, "
        f"arg_min(o.path, {order}) AS path, arg_min(o.sheet, {order}) AS sheet, arg_min(o.line, {order}) AS line, "
        f"arg_max(o.path, {order}) AS path_last, arg_max(o.line, {order}) AS line_last "
        "FROM obs o JOIN unit_map m ON o.variable = m.variable AND o.unit = m.unit AND m.status <> 'wrong' "
        "JOIN c_regions r ON o.region = r.region "
        f"WHERE o.value IS NOT NULL AND o.year BETWEEN {contract.first_year} AND {contract.last_year} "
        "AND trim(o.model) <> '' AND trim(o.scenario) <> '' "
        "GROUP BY o.model, o.scenario, o.region, o.variable, o.year"
    )


def _insert(con: duckdb.DuckDBPyConnection, sql: str) -> None:
    con.execute(f"INSERT INTO findings BY NAME {sql}")


def _scenarios(result_inputs: list[InputFile], con: duckdb.DuckDBPyConnection) -> tuple[Any, list[Finding]]:
    """One row per (model, scenario) of the data, with the attributes of any scenarios table given."""
    import pandas as pd

    pairs = con.execute("SELECT DISTINCT model, scenario FROM checked ORDER BY 1, 2").df()
    tables = [(i, i.scenarios) for i in result_inputs if i.kind == "scenarios" and i.scenarios is not None]
    findings: list[Finding] = []
    if not tables:
        pairs["reference"] = pd.Series([None] * len(pairs), dtype="str")
        return pairs, findings
    from milepost.validate.scenario_table import validate_scenarios

    frames = []
    for inp, frame in tables:
        clean, found = validate_scenarios(frame, inp.path, inp.sheet)
        findings += found
        frames.append(clean)
    attrs = pd.concat(frames, ignore_index=True).drop_duplicates(["model", "scenario"], keep="first")
    if "reference" not in attrs.columns:
        attrs["reference"] = None
    merged = pairs.merge(attrs, on=["model", "scenario"], how="left")
    return merged, findings


@contextmanager
def _steps(show: bool) -> Iterator[Any]:
    if not show:
        yield lambda name: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    total = 4
    with Progress(TextColumn("{task.description}"), BarColumn(), TimeElapsedColumn(),
                  console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("reading", total=total)

        def step(name: str) -> None:
            bar.update(task, advance=1, description=name)

        yield step


def run_check(paths: Sequence[str | Path], contract: Contract, *, con: duckdb.DuckDBPyConnection | None = None,
              progress: bool = False, findings_per_rule: int = FINDINGS_PER_RULE) -> CheckResult:
    """Check submission files against a contract. Bad data becomes findings; this raises only for broken programs."""
    con = con if con is not None else duckdb.connect(config={"autoinstall_known_extensions": False})
    paths = [Path(p) for p in paths]
    big = progress and sum(p.stat().st_size for p in paths if p.is_file()) > PROGRESS_BYTES
    con.execute("CREATE OR REPLACE TEMP TABLE findings (" + ", ".join(
        f"{c} {'BIGINT' if c == 'line' else 'INTEGER' if c == 'year' else 'VARCHAR'}" for c in FINDING_COLUMNS) + ")")
    with _steps(big) as step:
        _contract_tables(con, contract)
        inputs: list[InputFile] = []
        for n, path in enumerate(paths):
            inputs += read_file(con, path, f"obs_{os.getpid()}_{n}")
        step("checking rows")
        _obs_view(con, inputs)
        ctx = Context(con, contract, inputs)
        pre = file_findings(ctx)
        for check in ROW_CHECKS:
            for sql in check(ctx):
                _insert(con, sql)
        step("checking sums and coverage")
        _build_checked(con, contract)
        for check in TABLE_CHECKS:
            for sql in check(ctx):
                _insert(con, sql)
        step("collecting findings")
        scenarios, scen_findings = _scenarios(inputs, con)
        extra = pre + scen_findings
        if extra:
            con.executemany(f"INSERT INTO findings VALUES ({', '.join('?' * len(FINDING_COLUMNS))})",
                            [tuple(f.to_dict()[c] for c in FINDING_COLUMNS) for f in extra])
        _apply_severity(con, contract)
    rule_counts = [(r, s, int(n)) for r, s, n in con.execute(
        "SELECT rule, severity, count(*) FROM findings GROUP BY 1, 2 ORDER BY 1, 2").fetchall()]
    counts = {s: 0 for s in SEVERITIES}
    for _, s, n in rule_counts:
        counts[s] = counts.get(s, 0) + n
    rows = con.execute(
        f"SELECT * EXCLUDE (rn) FROM (SELECT *, row_number() OVER (PARTITION BY rule ORDER BY path, line, year) AS rn "
        f"FROM findings) WHERE rn <= {int(findings_per_rule)} "
        "ORDER BY path NULLS FIRST, line NULLS LAST, rule, model, scenario, region, variable, year").fetchall()
    findings = [Finding.from_row(r) for r in rows]
    usable = con.execute("SELECT count(*) FROM checked").fetchall()[0][0]
    return CheckResult(
        contract=contract,
        inputs=inputs,
        findings=findings,
        counts=counts,
        rule_counts=rule_counts,
        rows=sum(i.rows for i in inputs if i.kind == "data"),
        con=con,
        scenarios=scenarios,
        truncated=any(n > findings_per_rule for _, _, n in rule_counts),
        usable_rows=int(usable),
    )


def effective_severity(contract: Contract) -> dict[str, str]:
    """Each rule's severity under this contract: the default from RULES unless the contract overrides it."""
    return {r.id: (contract.severity[r.id] if contract.severity.get(r.id) in SEVERITIES else r.severity)
            for r in RULES.values()}


def _apply_severity(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """Checks may set a finer severity (a spelling-only unit note); a contract override always wins."""
    eff = effective_severity(contract)
    cases = " ".join(f"WHEN '{rule}' THEN '{sev}'" for rule, sev in eff.items())
    forced = ", ".join(f"'{k}'" for k in contract.severity if k in eff) or "NULL"
    con.execute(f"UPDATE findings SET severity = CASE rule {cases} ELSE 'error' END "
                f"WHERE severity IS NULL OR rule IN ({forced})")
