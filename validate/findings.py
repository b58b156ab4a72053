"""Findings as plain data: the rule table (stable ids, severities) and the Finding record every check produces."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

SEVERITIES = ("error", "warning", "note")


@dataclass(frozen=True)
class Rule:
    """A check rule: stable id, default severity, whether it concerns the contract or the data, and its meaning."""

    id: str
    severity: str
    category: str
    summary: str


RULES: dict[str, Rule] = {
    r.id: r
    for r in (
        Rule("unreadable-file", "error", "data", "The file cannot be read as a table (format, encoding, damage)."),
        Rule(
            "missing-column",
            "error",
            "data",
            "A required column (model, scenario, region, variable, unit, year, value) is absent.",
        ),
        Rule("empty-table", "error", "data", "The file has a header but no data rows."),
        Rule(
            "limit-exceeded",
            "error",
            "data",
            "The file goes beyond a limit of the check (rows, columns, cell or line length, unzipped size); "
            "it was read only up to the limit.",
        ),
        Rule(
            "check-aborted",
            "error",
            "data",
            "The check in a child process (the dashboard's Self-check) did not finish: it went beyond its memory "
            "or time budget, or crashed; the message says which. Nothing was checked.",
        ),
        Rule(
            "control-character",
            "error",
            "data",
            "A name holds a control character, NUL, byte-order mark or line break, which makes look-alike names.",
        ),
        Rule(
            "ambiguous-decimal-comma",
            "warning",
            "data",
            "In a file read with decimal commas, a value such as 51,169 may use the comma as a thousands separator.",
        ),
        Rule(
            "wide-table",
            "note",
            "data",
            "The table has one column per year; it was read as the long table (one row per non-empty year cell).",
        ),
        Rule(
            "unexpected-column",
            "warning",
            "data",
            "A column the long format does not have, or a scenarios-table column named line or repeating a name; "
            "it is ignored.",
        ),
        Rule("bad-year", "error", "data", "The year is not a whole number inside the contract's year range."),
        Rule("bad-value", "error", "data", "The value is not a finite number."),
        Rule(
            "missing-value",
            "error",
            "data",
            "The value or a key cell (model, scenario, region, variable, unit) is empty.",
        ),
        Rule("unknown-region", "error", "data", "The region is not in the contract."),
        Rule("unknown-variable", "error", "data", "The variable is not in the contract."),
        Rule("wrong-unit", "error", "data", "The unit does not convert into the variable's contract unit."),
        Rule(
            "converted-unit",
            "warning",
            "data",
            "The unit differs from the contract's but converts; the value was converted (factor given).",
        ),
        Rule("duplicate-row", "warning", "data", "The same key appears more than once with the same value."),
        Rule("conflicting-row", "error", "data", "The same key appears more than once with different values."),
        Rule("sign", "error", "data", "A non-negative variable has a negative value."),
        Rule(
            "sum-of-parts",
            "error",
            "data",
            "A variable differs from the weighted sum of its parts beyond the tolerance.",
        ),
        Rule(
            "sum-of-regions",
            "error",
            "data",
            "A region differs from the sum of its parts beyond the tolerance (or regions do not net to zero).",
        ),
        Rule(
            "missing-required",
            "error",
            "data",
            "A required variable is missing for a scenario at the base year or a milestone.",
        ),
        Rule(
            "base-year-deviation",
            "error",
            "data",
            "The base-year value is further from the contract's reference value than the tolerance.",
        ),
        Rule("out-of-bounds", "warning", "data", "The value is outside the contract's plausibility bounds."),
        Rule("no-data-rows", "error", "data", "The submission holds no data rows (only scenarios tables)."),
        Rule(
            "unknown-reference",
            "note",
            "data",
            "A scenario's reference names no scenario of the submission (nor, at ingest, a stored one): no costs yet.",
        ),
        Rule("scenario-without-data", "warning", "data", "The scenarios table lists a scenario that has no data rows."),
        Rule(
            "scenario-not-listed",
            "warning",
            "data",
            "Data for a scenario the scenarios table does not list (checked where a scenarios table is given).",
        ),
        Rule(
            "missing-reference",
            "error",
            "data",
            "The contract requires a reference for cost indicators ([costs] reference_required) and none is named.",
        ),
        Rule(
            "reference-cycle",
            "error",
            "data",
            "A scenario names itself as its reference, or its references lead back to it: no costs are computed.",
        ),
        Rule(
            "harmonise-no-base-year",
            "warning",
            "data",
            "A series with a reference value has no base-year value: it cannot be harmonised and is left out.",
        ),
        Rule(
            "harmonise-zero-base",
            "note",
            "data",
            "The base-year value is zero, so a ratio method is undefined: the offset method was used instead.",
        ),
        Rule(
            "harmonise-sign-differs",
            "note",
            "data",
            "The base-year value and the reference differ in sign: the offset method was used instead of a ratio.",
        ),
        Rule(
            "harmonise-partial-total",
            "warning",
            "data",
            "A total whose parts were not all harmonised: rebuilt partly from reported values, or left out.",
        ),
        Rule(
            "harmonise-parts-left-out",
            "note",
            "data",
            "A series harmonised from its own reference value has parts without one: the parts are left out.",
        ),
        Rule("contract-name", "error", "contract", "A variable name, sign or aggregation rule is malformed."),
        Rule("contract-part", "error", "contract", "A part names a variable or region the contract does not have."),
        Rule("contract-cycle", "error", "contract", "Parts refer back to their own total (a cycle)."),
        Rule(
            "contract-unit",
            "error",
            "contract",
            "A unit is unknown, or a part's unit does not convert into its total's.",
        ),
        Rule(
            "contract-reference",
            "error",
            "contract",
            "A reference value, bound, year or required region names "
            "something the contract does not have, or has a unit that does not convert.",
        ),
        Rule("contract-severity", "error", "contract", "A severity override names an unknown rule or severity."),
        Rule(
            "contract-number",
            "error",
            "contract",
            "A tolerance, discount rate, reference value or bound is negative where it cannot be, NaN or infinite.",
        ),
        Rule(
            "contract-harmonise",
            "error",
            "contract",
            "A harmonisation method, convergence year or variable pattern is unknown or out of range.",
        ),
        Rule(
            "contract-budget",
            "error",
            "contract",
            "The carbon-budget table is inconsistent: its year, region, likelihoods, budgets or TCRE.",
        ),
        Rule(
            "contract-allocation",
            "error",
            "contract",
            "The burden-sharing settings are unusable: a convergence year not after the base year, or a market "
            "region that is not a region of the contract.",
        ),
        Rule(
            "allocation-no-parts",
            "warning",
            "contract",
            "The allocation market region has no parts among the contract's regions: no burden-sharing or "
            "cost-share indicators are computed (`contract lint` warns and passes).",
        ),
    )
}


@dataclass(frozen=True)
class Finding:
    """One thing a check found: where it is (file, line, key), what was there, what was expected, and a fix hint.

    The fields are the columns of the `findings` tables (the check run's TEMP table and the database's), in this
    order; `FINDING_COLUMNS` below is derived from them, so a new field is a new column everywhere (with a
    migration for the database). `column_name` is the long-format column of the cell the finding points at
    (region, variable, unit, year, value or a key column), None for findings about a whole file or table.
    """

    rule: str
    severity: str
    path: str | None = None
    line: int | None = None
    sheet: str | None = None
    model: str | None = None
    scenario: str | None = None
    region: str | None = None
    variable: str | None = None
    unit: str | None = None
    year: int | None = None
    value: str | None = None
    expected: str | None = None
    message: str = ""
    hint: str | None = None
    column_name: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """Plain dict with every field (None where it does not apply)."""
        # Every field is a scalar, so a flat copy equals `dataclasses.asdict`, which copies deeply and costs
        # ten times as much (measured: 0.6 s for the 5,000 findings of a JSON report).
        return {name: getattr(self, name) for name in FINDING_COLUMNS}

    @classmethod
    def from_row(cls, row: Mapping[str, Any]) -> Finding:
        """Build from a row of a `findings` table given as {column: value}; unknown columns are an error.

        Columns that are not finding fields (the database's `submission_id`) must be left out by the caller.
        """
        unknown = set(row) - set(FINDING_COLUMNS)
        if unknown:
            raise TypeError(f"not finding columns: {', '.join(sorted(unknown))}")
        return cls(**{k: _clean(v) for k, v in row.items()})


# The findings columns, in table order: the one list every reader, writer and DDL test uses.
FINDING_COLUMNS: tuple[str, ...] = tuple(f.name for f in fields(Finding))
# SQL types of the columns that are not VARCHAR (the database DDL and the check run's TEMP table agree on them).
FINDING_TYPES: dict[str, str] = {"line": "BIGINT", "year": "INTEGER"}


def finding_columns_ddl() -> str:
    """The column definitions of a findings table: `rule VARCHAR, severity VARCHAR, ..., line BIGINT, ...`."""
    return ", ".join(f"{c} {FINDING_TYPES.get(c, 'VARCHAR')}" for c in FINDING_COLUMNS)


def findings_from(cursor: Any) -> list[Finding]:
    """The Findings of an executed DuckDB query whose columns are named like Finding's fields."""
    names = [d[0] for d in cursor.description]
    return [Finding.from_row(dict(zip(names, r, strict=True))) for r in cursor.fetchall()]


def _clean(v: Any) -> Any:
    # NaN from pandas/duckdb round trips means "does not apply".
    return None if isinstance(v, float) and v != v else v


def plural(n: int, word: str) -> str:
    """'1 error', '2 errors', '1,234 rows': a count with its noun in the right number."""
    return f"{n:,} {word}{'' if n == 1 else 's'}"


def tally(counts: Mapping[str, int]) -> str:
    """'1 error, 2 warnings, 0 notes' from counts by severity."""
    return ", ".join(plural(int(counts.get(s, 0)), s) for s in SEVERITIES)


def shorten(values: list[str], limit: int = 5) -> str:
    """'a, b, c … +N more' for long lists in messages."""
    head = ", ".join(values[:limit])
    return head + (f" … +{len(values) - limit} more" if len(values) > limit else "")
