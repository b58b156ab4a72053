"""What every indicator kind shares: the kind record, the helper-table names its SQL reads, and SQL snippets.

A kind is a name, the period shapes it accepts in schema/indicators.toml, how its unit is scaled, and a function
that returns one SQL SELECT with the output columns (model, scenario, region, kind, variable, year_from,
year_to, value, unit). That SELECT reads only the shared helper tables named in `Tables`, so a new kind is one
small module plus its tests.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

# How a kind's `unit` in indicators.toml relates to the variable's contract unit:
#   level     the value is in the variable's unit and is converted into the indicator unit (value, peak_value)
#   integral  the value is a sum of annual values, converted from the variable's unit into indicator unit + "/yr"
#   label     the value has its own dimension (%/yr, %, year): the unit is written as given, never converted
SCALINGS = ("level", "integral", "label")


@dataclass(frozen=True)
class Tables:
    """Names of the shared helper tables (created by `interpolation.prepare`) and the contract numbers kinds need.

    series     sid INTEGER, model, scenario, region, variable, first_year, last_year (reported range),
               ends DOUBLE[] (the interpolation at each of `years`, null outside the reported range),
               ref_sid, ref_ends (the same for the reference scenario: same model, region, variable; null if none)
    points     sid, year, value, year1, value1: each reported point with the next one (year1/value1 null for the
               last point), i.e. the segments of the piecewise-linear interpolation
    annual     sid, year, value: the interpolation at every integer year from the first to the last reported point
               (a view over `points`)
    selection  kind, variable, unit, factor: which variables get which kind, the unit written and the factor
               from the variable's unit into it
    periods    kind, year_from, year_to, i_from, i_to: the periods of each kind with the 1-based positions of
               their years in `years` (none for kinds over the reported range)
    years      every period endpoint year, sorted: the positions of `series.ends`
    """

    series: str
    points: str
    annual: str
    selection: str
    periods: str
    years: tuple[int, ...]
    base_year: int
    discount_rate: float


@dataclass(frozen=True)
class Kind:
    """One indicator kind: its name, accepted period shapes, unit scaling and the SQL that computes it."""

    name: str
    periods: tuple[str, ...]
    scaling: str
    sql: Callable[[Tables], str]


def lerp(t: str, p: str = "") -> str:
    """SQL for the linear interpolation at year `t` on the segment of a `points` row aliased `p`.

    Exact at the segment start; null past the last reported point (its year1 is null), never extrapolated.
    """
    q = f"{p}." if p else ""
    return (
        f"(CASE WHEN {t} = {q}year THEN {q}value "
        f"ELSE {q}value + ({q}value1 - {q}value) * ({t} - {q}year) / ({q}year1 - {q}year) END)"
    )


def cagr(v0: str, v1: str, y0: str, y1: str) -> str:
    """SQL for the compound annual growth rate in %/yr; null unless both values are positive."""
    return f"(CASE WHEN {v0} > 0 AND {v1} > 0 THEN (power({v1} / {v0}, 1.0 / ({y1} - {y0})) - 1) * 100 END)"


def frame(t: Tables, kind: str) -> str:
    """The FROM clause of a periodic kind: every series of a selected variable times every period of the kind.

    Aliases: s = series, x = selection, p = periods. Every such row yields one indicator row, null where undefined;
    the values at the period's ends are s.ends[p.i_from] and s.ends[p.i_to].
    """
    return (
        f"FROM {t.series} s "
        f"JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = s.variable "
        f"JOIN {t.periods} p ON p.kind = {literal(kind)}"
    )


def head(kind: str) -> str:
    """The leading output columns of a kind's SELECT (aliases as in `frame`)."""
    return f"s.model, s.scenario, s.region, {literal(kind)} AS kind, s.variable"


def literal(text: str) -> str:
    """A SQL string literal."""
    return "'" + text.replace("'", "''") + "'"


def identifier(name: str) -> str:
    """A quoted SQL identifier; a dotted name (schema.table) is quoted part by part."""
    if not name or any(not part for part in name.split(".")):
        raise ValueError(f"not a table name: {name!r}")
    return ".".join('"' + part.replace('"', '""') + '"' for part in name.split("."))
