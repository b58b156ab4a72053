"""The four harmonisation methods as SQL expressions over one row of a series.

For a model series m(t), the reference value h at the base year t0 and the convergence year tc (the published
methods, with their usual names; stated in issue 12 of this project):

    ratio              m(t) * h / m(t0)
    offset             m(t) + (h - m(t0))
    converging ratio   m(t) * [w(t) * (h / m(t0) - 1) + 1]     the factor moves linearly from h / m(t0) to 1
    converging offset  m(t) + w(t) * (h - m(t0))               the offset moves linearly from h - m(t0) to 0

with the weight w(t) = 1 - (t - t0) / (tc - t0) between t0 and tc, 0 from tc on, and 1 throughout for the
constant methods. Years before the base year keep the full adjustment (w = 1): the weight is never
extrapolated above 1. A ratio method needs m(t0) != 0 and m(t0), h of the same sign: then the multiplier is
positive in every year, so the harmonised series keeps the model's signs and the years where it crosses zero.
"""

from __future__ import annotations


def weight(year: str, base_year: int, method: str, converge_year: str) -> str:
    """SQL for w(t): 1 up to the base year, falling linearly to 0 at the convergence year, 0 after it;
    1 in every year for the constant methods."""
    t0 = int(base_year)
    return (
        f"(CASE WHEN {method} IN ('ratio', 'offset') OR {year} <= {t0} THEN 1.0 "
        f"WHEN {year} >= {converge_year} THEN 0.0 "
        f"ELSE 1.0 - ({year} - {t0})::DOUBLE / ({converge_year} - {t0}) END)"
    )


def harmonised(value: str, year: str, base_year: int, method: str, factor: str, offset: str, converge_year: str) -> str:
    """SQL for the harmonised value of one row; `factor` is h / m(t0), `offset` is h - m(t0)."""
    w = weight(year, base_year, method, converge_year)
    return (
        f"(CASE WHEN {method} IN ('ratio', 'converging-ratio') THEN {value} * ({w} * ({factor} - 1.0) + 1.0) "
        f"ELSE {value} + {w} * {offset} END)"
    )
