"""Level indicators: `value`, the interpolated variable at the base year and each milestone.

value  the piecewise-linear interpolation of the reported points at the year (year_from = year_to = that year),
       converted into the unit of indicators.toml (normally the variable's own); null when the year lies outside
       the series' reported range (never extrapolated).
"""

from __future__ import annotations

from milepost.validate.store.indicators.base import Kind, Tables, frame, head


def value_sql(t: Tables) -> str:
    """SQL for `value` rows."""
    return (
        f"SELECT {head('value')}, p.year_from, p.year_to, s.ends[p.i_from] * x.factor AS value, x.unit"
        f" {frame(t, 'value')}"
    )


KINDS = (Kind("value", ("points", "milestones"), "level", value_sql),)
