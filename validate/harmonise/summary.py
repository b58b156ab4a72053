"""The report of a harmonisation: per variable and model, how many series used each method and the median
adjustment, so an author sees at a glance which models needed large adjustments."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

import duckdb

METHOD_ORDER = (
    "ratio",
    "converging-ratio",
    "offset",
    "converging-offset",
    "from-parts",
    "from-regions",
    "unchanged",
    "left-out",
)


@dataclass(frozen=True)
class MethodCount:
    """One (variable, model, method) line of the report; medians over the series harmonised by that method."""

    variable: str
    model: str
    method: str
    series: int
    median_factor: float | None
    median_offset: float | None
    unit: str

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def method_counts(con: duckdb.DuckDBPyConnection) -> list[MethodCount]:
    """Counts and medians from `harmonise_methods`, by variable, model and method (in METHOD_ORDER)."""
    order = " ".join(f"WHEN '{m}' THEN {i}" for i, m in enumerate(METHOD_ORDER))
    rows = con.execute(f"""
        SELECT variable, model, method, count(*) AS n, median(factor), median(offset_value), any_value(unit)
        FROM harmonise_methods GROUP BY variable, model, method
        ORDER BY variable, model, CASE method {order} ELSE {len(METHOD_ORDER)} END""").fetchall()  # noqa: S608 - fragments of this package
    return [
        MethodCount(
            str(v), str(mo), str(m), int(n), None if f is None else float(f), None if o is None else float(o), str(u)
        )
        for v, mo, m, n, f, o, u in rows
    ]


def _number(x: float | None) -> str:
    if x is None:
        return ""
    return f"{x:,.4g}" if abs(x) < 1e5 else f"{x:,.0f}"


def text_table(counts: list[MethodCount], *, all_variables: bool = False) -> list[str]:
    """The report table as lines. Variables left entirely as reported are skipped unless `all_variables`; the
    model column is shown only when there is more than one model."""
    touched = {c.variable for c in counts if c.method != "unchanged"}
    shown = [c for c in counts if all_variables or c.variable in touched]
    if not shown:
        return ["No series was harmonised: no harmonised variable has a reference value for the base year."]
    models = len({c.model for c in shown}) > 1
    vw = max(len("variable"), *(len(c.variable) for c in shown))
    mw = max(len("model"), *(len(c.model) for c in shown)) if models else 0
    model_head = f"{'model':<{mw}}  " if models else ""
    lines = [f"{'variable':<{vw}}  {model_head}{'method':<18}{'series':>7}  {'median factor':>13}  median offset"]
    for c in shown:
        model = f"{c.model:<{mw}}  " if models else ""
        offset = f"{_number(c.median_offset)} {c.unit}" if c.median_offset is not None else ""
        lines.append(
            f"{c.variable:<{vw}}  {model}{c.method:<18}{c.series:>7}  {_number(c.median_factor):>13}  {offset}".rstrip()
        )
    return lines
