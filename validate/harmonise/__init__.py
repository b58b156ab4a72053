"""Base-year harmonisation: align each model's series with the contract's reference values at the base year.

`harmonise(con, contract)` works on the connection of a check run (`milepost.validate.runner.run_check`): it
reads the usable rows in `checked` and the contract lookups the run built, and leaves three TEMP tables:

    harmonised          the harmonised submission in the long format (model, scenario, region, variable, unit,
                        year, value), contract units
    harmonise_methods   one row per series: method used, method asked, factor or offset, convergence year,
                        base-year and reference values, a note saying why
    harmonise_findings  findings (rule ids `harmonise-*`) in the shape of every other report

The formulas are in `methods`; which variables are harmonised and how comes from the contract (`settings`); the
most detailed series with a reference value are harmonised and the totals above them rebuilt as sums (`rebuild`),
so the harmonised data still passes the contract's sum checks. Everything is set-based SQL over the whole table.
Harmonised values are model projections aligned with a historical reference, not forecasts.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any

import duckdb

from milepost.schema.contract import HARMONISE_METHODS, Contract
from milepost.validate.findings import FINDING_COLUMNS, SEVERITIES, Finding, findings_from
from milepost.validate.harmonise import notes, rebuild, series
from milepost.validate.harmonise.settings import Choice, check_overrides, choices
from milepost.validate.harmonise.summary import MethodCount, method_counts, text_table

__all__ = [
    "HARMONISE_METHODS",
    "Choice",
    "HarmoniseResult",
    "MethodCount",
    "check_overrides",
    "choices",
    "harmonise",
    "text_table",
]

FINDINGS_PER_RULE = 1000


@dataclass
class HarmoniseResult:
    """What a harmonisation did; the full tables stay in `con` (see the module docstring)."""

    contract: Contract
    base_year: int
    choices: list[Choice]
    rows: int
    series: int
    counts: list[MethodCount]
    findings: list[Finding]  # the first FINDINGS_PER_RULE of each rule
    severity_counts: dict[str, int]
    rule_counts: list[tuple[str, str, int]]
    con: duckdb.DuckDBPyConnection
    timings: dict[str, float] = field(default_factory=dict)

    @property
    def harmonised_series(self) -> int:
        """Series whose values differ from the reported ones by design (directly harmonised or rebuilt)."""
        return sum(c.series for c in self.counts if c.method not in ("unchanged", "left-out"))

    def to_dict(self) -> dict[str, Any]:
        """Plain data for `--format json`."""
        return {
            "contract": {"name": self.contract.name, "hash": self.contract.hash},
            "base_year": self.base_year,
            "choices": [
                {"variable": c.variable, "method": c.method, "converge_year": c.converge_year} for c in self.choices
            ],
            "rows": self.rows,
            "series": self.series,
            "methods": [c.to_dict() for c in self.counts],
            "counts": self.severity_counts,
            "findings": [f.to_dict() for f in self.findings],
        }


def harmonise(
    con: duckdb.DuckDBPyConnection,
    contract: Contract,
    *,
    method: str | None = None,
    converge_year: int | None = None,
    findings_per_rule: int = FINDINGS_PER_RULE,
) -> HarmoniseResult:
    """Harmonise the checked rows on `con` to the contract's base-year reference values.

    `method` and `converge_year` replace the contract's choice for every harmonised variable. Raises UsageError
    for a method or convergence year the formulas cannot use; data problems become findings, never errors.
    """
    timings: dict[str, float] = {}
    clock = [time.perf_counter()]

    def lap(name: str) -> None:
        now = time.perf_counter()
        timings[name] = round(now - clock[0], 4)
        clock[0] = now

    chosen = choices(contract, method, converge_year)
    series.settings_tables(con, contract, chosen)
    series.series_table(con, contract)
    series.values_table(con, contract)
    lap("direct")
    rebuild.rebuild_totals(con)
    rebuild.leave_out_below(con)
    lap("rebuild")
    kept = ", ".join(f"'{s}'" for s in series.IN_OUTPUT)
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE harmonised AS
        SELECT v.model, v.scenario, v.region, v.variable, s.unit, v.year, v.value
        FROM h_values v JOIN h_series s USING (model, scenario, region, variable)
        WHERE s.status IN ({kept})""")  # noqa: S608 - fragments of this package; numbers from the contract
    notes.findings_table(con, contract)
    notes.methods_table(con, contract)
    lap("report")
    rule_counts = [
        (str(r), str(s), int(n))
        for r, s, n in con.execute(
            "SELECT rule, severity, count(*) FROM harmonise_findings GROUP BY 1, 2 ORDER BY 1, 2"
        ).fetchall()
    ]
    severity_counts = {s: 0 for s in SEVERITIES}
    for _, s, n in rule_counts:
        severity_counts[s] = severity_counts.get(s, 0) + n
    findings = findings_from(
        con.execute(
            f"SELECT {', '.join(FINDING_COLUMNS)} FROM (SELECT *, row_number() OVER (PARTITION BY rule "  # noqa: S608 - fragments of this package
            "ORDER BY path, line, model, scenario, region, variable) AS rn FROM harmonise_findings) WHERE rn <= ? "
            "ORDER BY path NULLS FIRST, line NULLS LAST, rule, model, scenario, region, variable",
            [int(findings_per_rule)],
        )
    )
    n_rows, n_series = con.execute(
        "SELECT (SELECT count(*) FROM harmonised), (SELECT count(*) FROM harmonise_methods)"
    ).fetchall()[0]
    return HarmoniseResult(
        contract=contract,
        base_year=contract.base_year,
        choices=chosen,
        rows=int(n_rows),
        series=int(n_series),
        counts=method_counts(con),
        findings=findings,
        severity_counts=severity_counts,
        rule_counts=rule_counts,
        con=con,
        timings=timings,
    )
