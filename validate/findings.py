"""Findings as plain data: the rule table (stable ids, severities) and the Finding record every check produces."""

from __future__ import annotations

from dataclasses import asdict, dataclass, fields
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
        Rule("unexpected-column", "warning", "data", "A column the long format does not have; it is ignored."),
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
    )
}

FINDING_COLUMNS = (
    "rule",
    "severity",
    "path",
    "line",
    "sheet",
    "model",
    "scenario",
    "region",
    "variable",
    "unit",
    "year",
    "value",
    "expected",
    "message",
    "hint",
)


@dataclass(frozen=True)
class Finding:
    """One thing a check found: where it is (file, line, key), what was there, what was expected, and a fix hint."""

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

    def to_dict(self) -> dict[str, Any]:
        """Plain dict with every field (None where it does not apply)."""
        return asdict(self)

    @classmethod
    def from_row(cls, row: tuple[Any, ...]) -> Finding:
        """Build from a row of the `findings` table (columns in FINDING_COLUMNS order)."""
        return cls(**{f.name: _clean(v) for f, v in zip(fields(cls), row, strict=True)})


def _clean(v: Any) -> Any:
    # NaN from pandas/duckdb round trips means "does not apply".
    return None if isinstance(v, float) and v != v else v


def shorten(values: list[str], limit: int = 5) -> str:
    """'a, b, c … +N more' for long lists in messages."""
    head = ", ".join(values[:limit])
    return head + (f" … +{len(values) - limit} more" if len(values) > limit else "")
