"""Timing indicators over a series' whole reported range (year_from = first, year_to = last reported year).

net_zero_year  the first (fractional) year at which the piecewise-linear series reaches <= 0: if the first
               reported value is already <= 0, that year; otherwise the crossing y + v/(v - v1) * (y1 - y) on the
               first segment going from > 0 to <= 0 (a segment ending exactly at 0 gives its end year). Null if the
               series never reaches 0. Unit 'year'.
peak_year      the reported year of the highest value; ties go to the earliest such year. The maximum of a
               piecewise-linear series lies at a reported point, so only those are looked at.
peak_value     that highest value, in the unit of indicators.toml (normally the variable's own).
"""

from __future__ import annotations

from milepost.validate.store.indicators.base import Kind, Tables, head, literal


def _over_points(t: Tables, kind: str, value: str) -> str:
    per_series = (
        f"SELECT q.sid, {value} AS value FROM {t.points} q WHERE q.sid IN (SELECT s.sid FROM {t.series} s"
        f" JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = s.variable) GROUP BY q.sid"
    )
    return (
        # x.factor is 1 for the label kinds (years), the unit conversion for peak_value
        f"SELECT {head(kind)}, s.first_year AS year_from, s.last_year AS year_to, v.value * x.factor AS value, x.unit"
        f" FROM {t.series} s JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = s.variable"
        f" JOIN ({per_series}) v ON v.sid = s.sid"
    )


def net_zero_sql(t: Tables) -> str:
    """SQL for `net_zero_year` rows."""
    crossing = "q.year + q.value / (q.value - q.value1) * (q.year1 - q.year)"
    value = (
        "CASE WHEN arg_min(q.value, q.year) <= 0 THEN min(q.year)"
        f" ELSE min({crossing}) FILTER (WHERE q.value > 0 AND q.value1 <= 0) END"
    )
    return _over_points(t, "net_zero_year", value)


def peak_year_sql(t: Tables) -> str:
    """SQL for `peak_year` rows."""
    # the key (value, -year) breaks ties between equal maxima towards the earliest year, deterministically
    return _over_points(t, "peak_year", "arg_max(q.year, (q.value, -q.year))")


def peak_value_sql(t: Tables) -> str:
    """SQL for `peak_value` rows."""
    return _over_points(t, "peak_value", "max(q.value)")


KINDS = (
    Kind("net_zero_year", ("reported",), "label", net_zero_sql),
    Kind("peak_year", ("reported",), "label", peak_year_sql),
    Kind("peak_value", ("reported",), "level", peak_value_sql),
)
