"""Cumulative indicators: `cumulative`, the integral of the interpolated series from year_from to year_to.

cumulative  exact integral of the piecewise-linear series over [y0, y1], computed per segment (each segment
            clipped to the period contributes length * mean of its clipped end values). Because reported years
            are integers this equals the trapezoid rule over the annual interpolated values and, when y0 and y1
            are reported years, over the reported points. Null unless the reported range covers all of [y0, y1].
            Emissions are given per year, so the unit is that of the gas without "/yr", scaled as configured:
            'Mt CO2/yr' -> 'Gt CO2' (/1000), 'kt N2O/yr' -> 'Gt N2O' (/1e6). year_from = base, year_to = milestone.
"""

from __future__ import annotations

from milepost.validate.store.indicators.base import Kind, Tables, frame, head, lerp


def cumulative_sql(t: Tables) -> str:
    """SQL for `cumulative` rows."""
    selected = (
        f"SELECT s.sid FROM {t.series} s JOIN {t.selection} x ON x.kind = 'cumulative' AND x.variable = s.variable"
    )
    segments = (
        "SELECT q.sid, q.year, q.value, q.year1, q.value1, p.year_from, p.year_to,"
        " greatest(q.year, p.year_from) AS lo, least(q.year1, p.year_to) AS hi"
        f" FROM {t.points} q JOIN {t.periods} p ON p.kind = 'cumulative'"
        f" AND q.year < p.year_to AND q.year1 > p.year_from WHERE q.sid IN ({selected})"
    )
    area = (
        f"SELECT sid, year_from, year_to, sum((hi - lo) * ({lerp('lo')} + {lerp('hi')}) / 2) AS integral"
        f" FROM ({segments}) GROUP BY sid, year_from, year_to"
    )
    covered = "s.first_year <= p.year_from AND s.last_year >= p.year_to"
    return (
        f"SELECT {head('cumulative')}, p.year_from, p.year_to,"
        f" CASE WHEN {covered} THEN g.integral * x.factor END AS value, x.unit {frame(t, 'cumulative')}"
        f" LEFT JOIN ({area}) g ON g.sid = s.sid AND g.year_from = p.year_from AND g.year_to = p.year_to"
    )


KINDS = (Kind("cumulative", ("from_base", "pairs"), "integral", cumulative_sql),)
