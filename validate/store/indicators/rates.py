"""Rate indicators between two years y0 < y1 of the interpolated series, in %/yr.

rate_cagr    compound annual growth rate ((v1/v0)**(1/(y1-y0)) - 1) * 100; null when v0 <= 0 or v1 <= 0 (a
             growth factor across a sign change or from zero has no real root) or either value is missing.
rate_linear  average linear change relative to the start, (v1 - v0) / (v0 * (y1 - y0)) * 100; null when v0 = 0
             or either value is missing. With a negative v0 the sign follows the formula, not "growth".
Default periods (indicators.toml `pairs`): base -> first milestone, consecutive milestones, base -> each milestone.
"""

from __future__ import annotations

from milepost.validate.store.indicators.base import Kind, Tables, cagr, frame, head

V0, V1 = "s.ends[p.i_from]", "s.ends[p.i_to]"


def cagr_sql(t: Tables) -> str:
    """SQL for `rate_cagr` rows."""
    value = cagr(V0, V1, "p.year_from", "p.year_to")
    return f"SELECT {head('rate_cagr')}, p.year_from, p.year_to, {value} AS value, x.unit {frame(t, 'rate_cagr')}"


def linear_sql(t: Tables) -> str:
    """SQL for `rate_linear` rows."""
    value = f"(CASE WHEN {V0} <> 0 THEN ({V1} - {V0}) / ({V0} * (p.year_to - p.year_from)) * 100 END)"
    return f"SELECT {head('rate_linear')}, p.year_from, p.year_to, {value} AS value, x.unit {frame(t, 'rate_linear')}"


KINDS = (
    Kind("rate_cagr", ("pairs", "from_base"), "label", cagr_sql),
    Kind("rate_linear", ("pairs", "from_base"), "label", linear_sql),
)
