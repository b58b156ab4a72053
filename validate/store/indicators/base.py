"""What every indicator kind shares: the kind record, the helper-table names its SQL reads, and SQL snippets.

A kind is a name, the period shapes it accepts in schema/indicators.toml, how its unit is scaled, and a function
that returns one SQL SELECT with the output columns (model, scenario, region, kind, variable, year_from,
year_to, value, unit, and optionally note). That SELECT reads only the shared helper tables named in `Tables`,
so a new kind is one small module plus its tests.

The span helpers (`span_segments`, `annual_sum`, `first_at_or_below_zero`, `span_peak`) work on the annual
values of a series over any whole-year span, in closed form per segment of the piecewise-linear line, so that
kinds (cumulative sums, net-zero and peak years, budgets up to net zero) agree on one annual series without
expanding every series to every year.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from milepost.validate.sql import literal

# How a kind's `unit` in indicators.toml relates to the variable's contract unit:
#   level     the value is in the variable's unit and is converted into the indicator unit (value, peak_value)
#   integral  the value is a sum of annual values, converted from the variable's unit into indicator unit + "/yr"
#   label     the value has its own dimension (%/yr, %, year): the unit is written as given, never converted
#   budget    the kind compares a sum of annual values with the contract's carbon budgets: the factor converts the
#             variable's unit into "Gt CO2/yr" (the budgets' unit per year); the unit is written as given
SCALINGS = ("level", "integral", "label", "budget")
BUDGET_UNIT = "Gt CO2"


@dataclass(frozen=True)
class Tables:
    """Names of the shared helper tables (created by `interpolation.prepare`) and the contract numbers kinds need.

    series     sid INTEGER, model, scenario, region, variable, first_year, last_year (reported range),
               ends DOUBLE[] (the interpolation at each of `years`, null outside the reported range),
               reference (the reference scenario's name from the scenarios table, or null), ref_sid, ref_ends
               (the same as sid and ends for the reference scenario: same model, region, variable; null if none)
    points     sid, year, value, year1, value1: each reported point with the next one (year1/value1 null for the
               last point), i.e. the segments of the piecewise-linear interpolation
    annual     sid, year, value: the interpolation at every integer year from the first to the last reported point
               (a view over `points`)
    selection  kind, variable, unit, factor: which variables get which kind, the unit written and the factor
               from the variable's unit into it
    periods    kind, year_from, year_to, i_from, i_to: the periods of each kind with the 1-based positions of
               their years in `years` (none for kinds over the reported range)
    years      every period endpoint year and the base year, sorted: the positions of `series.ends`
    base_index the 1-based position of the base year in `years` (s.ends[base_index] is the base-year value)
    budget_levels  region, likelihood, label, warming, budget: the contract's carbon-budget table, one row per
               warming level and likelihood (empty without budgets; see `budgets`)
    budget_pieces  region, likelihood, label, lo, hi, anchor, warming, slope: budget_p(W) inverted piece by piece
    budget_sums    sid, year_from, year_to, integral: each series a budget kind selects summed from the base year
               to its net-zero year (see `budgets.prepare_sums`)
    inputs     model, scenario, region and one list per driver input (pop, gdp, energy, co2, ghg, price, cost:
               the values at each of `years` in the input's canonical unit, null where not reported; see `drivers`)
    market     region, market: the trading regions (the direct parts of the allocation's market region)
    convergence_year  the year contraction and convergence reaches equal per-capita shares
    """

    series: str
    points: str
    annual: str
    selection: str
    periods: str
    years: tuple[int, ...]
    base_year: int
    discount_rate: float
    budget_levels: str = ""
    budget_pieces: str = ""
    budget_sums: str = ""
    inputs: str = ""
    market: str = ""
    convergence_year: int = 2050

    @property
    def base_index(self) -> int:
        """The 1-based position of the base year in `years` (DuckDB lists are 1-based)."""
        return self.years.index(self.base_year) + 1


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


def span_segments(t: Tables, spans: str) -> str:
    """SQL: the segments of the annual series clipped to each span, one row per (span, segment).

    `spans` is a relation (a subquery in parentheses, or a table) with columns sid, year_from, year_to: whole-year
    spans of a series, unique per (sid, year_from, year_to). Every `points` row covers the integer years
    [year, year1 - 1] (the last point of a series only its own year), so each integer year lies in exactly one
    row. Output columns: sid, year_from, year_to, year, value, year1, value1 (the segment, for `lerp`), lo, hi
    (the first and last integer year of the segment inside the span) and v_lo, v_hi (the annual values there).
    Years of a span that the series does not report are simply absent (no extrapolation).
    """
    last = "coalesce(q.year1 - 1, q.year)"
    clipped = (
        f"SELECT sp.sid, sp.year_from, sp.year_to, q.year, q.value, q.year1, q.value1,"
        f" greatest(q.year, sp.year_from) AS lo, least({last}, sp.year_to) AS hi"
        f" FROM {spans} sp JOIN {t.points} q ON q.sid = sp.sid AND q.year <= sp.year_to AND {last} >= sp.year_from"
    )
    return f"SELECT *, {lerp('lo')} AS v_lo, {lerp('hi')} AS v_hi FROM ({clipped})"


def annual_sum(t: Tables, spans: str) -> str:
    """SQL: sid, year_from, year_to, total, years for each span of `spans` (see `span_segments`).

    total  the sum of the annual interpolated values over every integer year of the span the series reports,
           both ends included (exact: on one segment the annual values are an arithmetic series)
    years  how many years of the span were summed; the span is fully covered when years = year_to - year_from + 1
    Spans the series does not reach at all give no row.
    """
    return (
        "SELECT sid, year_from, year_to, sum((hi - lo + 1) * (v_lo + v_hi) / 2) AS total,"
        f" sum(hi - lo + 1)::INTEGER AS years FROM ({span_segments(t, spans)}) GROUP BY sid, year_from, year_to"
    )


def first_at_or_below_zero(t: Tables, spans: str) -> str:
    """SQL: sid, year_from, year_to, year, throughout for each span of `spans` (see `span_segments`).

    year        the first integer year of the span whose annual interpolated value is <= 0; null if none
    throughout  true when every reported year of the span is <= 0
    On a segment falling from above zero the line crosses zero at x; the first whole year at or below zero is
    found among ceil(x) - 1 .. ceil(x) + 1 by evaluating the line itself, so rounding in x cannot move it.
    """
    # only on a segment falling from above zero to at or below it: there v_lo - v_hi > 0 and x is finite
    x = "lo + v_lo / (v_lo - v_hi) * (hi - lo)"
    c = f"CASE WHEN v_lo > 0 AND v_hi <= 0 THEN greatest(lo + 1, least(ceil({x})::INTEGER, hi)) END"
    first = (
        "CASE WHEN v_lo <= 0 THEN lo WHEN v_hi > 0 THEN NULL"
        f" WHEN c - 1 > lo AND {lerp('c - 1')} <= 0 THEN c - 1"
        f" WHEN {lerp('c')} <= 0 THEN c ELSE least(c + 1, hi) END"
    )
    per_segment = f"SELECT *, {first} AS first FROM (SELECT *, {c} AS c FROM ({span_segments(t, spans)}))"
    return (
        "SELECT sid, year_from, year_to, min(first)::INTEGER AS year, max(greatest(v_lo, v_hi)) <= 0 AS throughout"
        f" FROM ({per_segment}) GROUP BY sid, year_from, year_to"
    )


def span_peak(t: Tables, spans: str) -> str:
    """SQL: sid, year_from, year_to, year, value: the highest annual value of each span and its year (ties: earliest).

    A line's maximum over whole years lies at one end of a segment, so only the clipped ends are compared.
    """
    ends = (
        "SELECT sid, year_from, year_to, unnest([lo, hi]) AS y, unnest([v_lo, v_hi]) AS v"
        f" FROM ({span_segments(t, spans)})"
    )
    return (
        "SELECT sid, year_from, year_to, arg_max(y, (v, -y)) AS year, max(v) AS value"
        f" FROM ({ends}) GROUP BY sid, year_from, year_to"
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
