"""Cumulative indicators: `cumulative`, the sum of the annual values of a series from year_from to year_to.

cumulative  the sum of the annual values (the piecewise-linear interpolation at every whole year) for every year
            from year_from to year_to, both included: 2020-2100 sums 81 annual values. This is how carbon budgets
            are counted (IPCC AR6 WG1 gives remaining budgets from 1 January 2020, i.e. emissions of 2020 onwards)
            and how annual inventories are added up (common practice). It is not the trapezoid over the reported
            points, which counts one year fewer (half of each end year). Sums over consecutive periods overlap in
            their shared year: 2020-2030 plus 2030-2050 counts 2030 twice. Null unless the series reports every
            year of the period (never extrapolated). Emissions are given per year, so the unit is that of the
            gas without "/yr", scaled as configured: 'Mt CO2/yr' -> 'Gt CO2' (/1000), 'kt N2O/yr' -> 'Gt N2O'
            (/1e6). Default periods: base year -> each milestone.
"""

from __future__ import annotations

from milepost.validate.store.indicators.base import Kind, Tables, annual_sum, frame, head


def cumulative_sql(t: Tables) -> str:
    """SQL for `cumulative` rows."""
    spans = (
        f"(SELECT s.sid, p.year_from, p.year_to FROM {t.series} s"
        f" JOIN {t.selection} x ON x.kind = 'cumulative' AND x.variable = s.variable"
        f" JOIN {t.periods} p ON p.kind = 'cumulative')"
    )
    return (
        f"SELECT {head('cumulative')}, p.year_from, p.year_to,"
        " CASE WHEN g.years = p.year_to - p.year_from + 1 THEN g.total * x.factor END AS value, x.unit"
        f" {frame(t, 'cumulative')}"
        f" LEFT JOIN ({annual_sum(t, spans)}) g"
        " ON g.sid = s.sid AND g.year_from = p.year_from AND g.year_to = p.year_to"
    )


KINDS = (Kind("cumulative", ("from_base", "pairs"), "integral", cumulative_sql),)
