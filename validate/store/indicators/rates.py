"""Rate indicators between two years y0 < y1 of the interpolated series; every one is negative when the series falls.

rate_cagr         compound annual growth rate ((v1/v0)**(1/(y1-y0)) - 1) * 100 in %/yr; null when v0 <= 0 or
                  v1 <= 0 (a growth factor across a sign change or from zero has no real root) or a value is missing.
rate_linear       average linear change as a share of the value at y0: (v1 - v0) / (|v0| * (y1 - y0)) * 100 in %/yr;
                  null when v0 = 0 or a value is missing.
rate_linear_base  the same change as a share of the base-year value vb: (v1 - v0) / (|vb| * (y1 - y0)) * 100 in
                  %/yr; null when vb = 0 or a value is missing. Rates of different periods share one denominator, so
                  they compare like absolute cuts: a delayed scenario's faster cut after 2030 is not hidden by its
                  higher 2030 level, as it is with rate_linear.
rate_absolute     average change per year, (v1 - v0) / (y1 - y0), in the variable's unit per year (e.g. 'Mt CO2/yr
                  per year'); null when a value is missing.
Dividing by the magnitude (|v0|, |vb|) keeps the sign of the change: a series that falls below zero, or rises
from a negative value towards zero, gets a negative and a positive rate respectively.
Default periods (indicators.toml `pairs`): base -> first milestone, consecutive milestones, base -> each milestone.
"""

from __future__ import annotations

from milepost.validate.store.indicators.base import Kind, Tables, cagr, frame, head

V0, V1 = "s.ends[p.i_from]", "s.ends[p.i_to]"
SPAN = "(p.year_to - p.year_from)"


def _rate(t: Tables, kind: str, value: str) -> str:
    return f"SELECT {head(kind)}, p.year_from, p.year_to, {value} AS value, x.unit {frame(t, kind)}"


def cagr_sql(t: Tables) -> str:
    """SQL for `rate_cagr` rows."""
    return _rate(t, "rate_cagr", cagr(V0, V1, "p.year_from", "p.year_to"))


def linear_sql(t: Tables) -> str:
    """SQL for `rate_linear` rows."""
    return _rate(t, "rate_linear", f"(CASE WHEN {V0} <> 0 THEN ({V1} - {V0}) / (abs({V0}) * {SPAN}) * 100 END)")


def linear_base_sql(t: Tables) -> str:
    """SQL for `rate_linear_base` rows."""
    vb = f"s.ends[{t.base_index}]"
    return _rate(t, "rate_linear_base", f"(CASE WHEN {vb} <> 0 THEN ({V1} - {V0}) / (abs({vb}) * {SPAN}) * 100 END)")


def absolute_sql(t: Tables) -> str:
    """SQL for `rate_absolute` rows (x.factor is 1: the unit is a label built from the variable's unit)."""
    return _rate(t, "rate_absolute", f"({V1} - {V0}) / {SPAN}")


KINDS = (
    Kind("rate_cagr", ("pairs", "from_base"), "label", cagr_sql),
    Kind("rate_linear", ("pairs", "from_base"), "label", linear_sql),
    Kind("rate_linear_base", ("pairs", "from_base"), "label", linear_base_sql),
    Kind("rate_absolute", ("pairs", "from_base"), "label", absolute_sql),
)
