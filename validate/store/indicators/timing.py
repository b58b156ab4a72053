"""Timing indicators over the years from the base year on (year_from = the base year, or the first reported year
if later; year_to = the last reported year).

net_zero_year  the first whole year at or after the base year whose annual (interpolated) value is at or below
               zero. Null when the series does not get there by its last reported year (note: "not reached by
               YEAR"). A series already at or below zero in the base year gets the base year and a note saying
               whether it stays there in every year (nothing was reached: it starts at or below zero) or rises
               above zero later. Years before the base year are never looked at. Unit 'year'.
peak_year      the whole year of the highest annual value from the base year on; ties go to the earliest year.
peak_value     that highest value, in the unit of indicators.toml (normally the variable's own).
Notes are stored in the `note` column of the indicator row.
"""

from __future__ import annotations

from milepost.validate.sql import literal
from milepost.validate.store.indicators.base import Kind, Tables, first_at_or_below_zero, head, span_peak


def from_base_spans(t: Tables, kind: str) -> str:
    """The spans (sid, year_from, year_to) of every series selected for `kind`: the base year (or the first
    reported year, if later) to the last reported year. A series that ends before the base year gets an empty
    span (year_from > year_to), which no helper finds anything in."""
    return (
        f"(SELECT s.sid, greatest({t.base_year}, s.first_year) AS year_from, s.last_year AS year_to"
        f" FROM {t.series} s JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = s.variable)"
    )


def net_zero_years(t: Tables, kind: str = "net_zero_year") -> str:
    """SQL: sid, year_from, year_to, year, throughout per series selected for `kind` (see
    `base.first_at_or_below_zero`): the net-zero convention, for kinds that build on it."""
    return first_at_or_below_zero(t, from_base_spans(t, kind))


def _rows(t: Tables, kind: str, helper: str, value: str, note: str = "NULL") -> str:
    spans = from_base_spans(t, kind)
    return (
        # x.factor is 1 for the label kinds (years), the unit conversion for peak_value
        f"SELECT {head(kind)}, sp.year_from, sp.year_to, {value} AS value, x.unit, {note} AS note"
        f" FROM {t.series} s JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = s.variable"
        f" JOIN {spans} sp ON sp.sid = s.sid LEFT JOIN ({helper}) v ON v.sid = s.sid"
    )


def net_zero_sql(t: Tables) -> str:
    """SQL for `net_zero_year` rows."""
    note = (
        "CASE WHEN sp.year_from > sp.year_to THEN 'no year from ' || sp.year_from || ' on is reported'"
        " WHEN v.year IS NULL THEN 'not reached by ' || sp.year_to"
        " WHEN v.year = sp.year_from AND v.throughout THEN 'at or below zero in every year from '"
        " || sp.year_from || ' to ' || sp.year_to || ': already at net zero in ' || sp.year_from"
        " WHEN v.year = sp.year_from THEN 'already at or below zero in ' || sp.year_from || ', above zero later' END"
    )
    return _rows(t, "net_zero_year", net_zero_years(t), "v.year", note)


def peak_year_sql(t: Tables) -> str:
    """SQL for `peak_year` rows."""
    return _rows(t, "peak_year", span_peak(t, from_base_spans(t, "peak_year")), "v.year")


def peak_value_sql(t: Tables) -> str:
    """SQL for `peak_value` rows."""
    return _rows(t, "peak_value", span_peak(t, from_base_spans(t, "peak_value")), "v.value * x.factor")


KINDS = (
    Kind("net_zero_year", ("reported",), "label", net_zero_sql),
    Kind("peak_year", ("reported",), "label", peak_year_sql),
    Kind("peak_value", ("reported",), "level", peak_value_sql),
)
