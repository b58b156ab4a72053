"""The shared annual piecewise-linear interpolation, built once per computation as DuckDB helper tables.

Every kind reads the same interpolation: straight lines between consecutive reported points of one series
(model, scenario, region, variable), evaluated at integer years, null outside the first..last reported year
(never extrapolated). Reported years are integers, so every kink of the line lies on the annual grid: sums and
trapezoids over the annual values equal the exact integral of the line. Points with a null or non-finite value
are left out, so the line bridges them.

Helpers (names in `Tables`): `points` holds the segments (each reported point with the next one); `annual` is a
view over it with every integer year (about 50 M rows at intercomparison scale, so it is never materialised);
`series` carries, per series, the interpolation at every period endpoint of indicators.toml and at the base year
(`ends`, a list in the order of `Tables.years`), the name of its reference scenario and the same list for it
(`ref_ends`), so the kinds that need only endpoint values read one row per series and join nothing. Kinds that
need the annual values over a span (sums, first year at or below zero, peaks) use the closed-form span helpers
of `base` on `points` instead of expanding `annual`.
"""

from __future__ import annotations

from collections.abc import Iterable

import duckdb

from milepost.validate.errors import IndicatorDataError as IndicatorDataError  # re-exported
from milepost.validate.sql import qualified
from milepost.validate.store.indicators.base import Tables, lerp

PREFIX = "_milepost_indicators_"
HELPERS = ("grouped", "endpoints", "series", "points", "annual", "selection", "periods")


def helper_names() -> dict[str, str]:
    """The temp-table name of each helper."""
    return {h: PREFIX + h for h in HELPERS}


def drop_helpers(con: duckdb.DuckDBPyConnection) -> None:
    """Remove every helper table and view (leaves the caller's connection as it was)."""
    names = helper_names()
    con.execute(f"DROP VIEW IF EXISTS {names['annual']}")
    for h in HELPERS:
        if h != "annual":
            con.execute(f"DROP TABLE IF EXISTS {names[h]}")


def prepare(
    con: duckdb.DuckDBPyConnection,
    data: str,
    scenarios: str,
    selection: Iterable[tuple[str, str, str, float]],
    periods: Iterable[tuple[str, int, int]],
    base_year: int,
    discount_rate: float,
) -> Tables:
    """Create the helper tables for `data` (long rows in contract units) and return their names.

    `selection` rows are (kind, variable, unit, factor); `periods` rows are (kind, year_from, year_to).
    Only variables named in `selection` are read, in one pass over `data`. Raises IndicatorDataError if one
    series reports one year twice with different values (identical repeats count once).
    """
    n = helper_names()
    drop_helpers(con)
    sel = list(selection)
    per = list(periods)
    # the base year is always an endpoint: base-normalised rates read it from `ends` like any other year
    years = tuple(sorted({int(base_year), *(y for _, y0, y1 in per for y in (y0, y1))}))
    index = {y: i + 1 for i, y in enumerate(years)}  # DuckDB lists are 1-based
    con.execute(
        f"CREATE TEMP TABLE {n['selection']} AS SELECT unnest(?::VARCHAR[]) AS kind, unnest(?::VARCHAR[]) AS variable,"
        " unnest(?::VARCHAR[]) AS unit, unnest(?::DOUBLE[]) AS factor",
        [[r[0] for r in sel], [r[1] for r in sel], [r[2] for r in sel], [float(r[3]) for r in sel]],
    )
    con.execute(
        f"CREATE TEMP TABLE {n['periods']} AS SELECT unnest(?::VARCHAR[]) AS kind, unnest(?::INTEGER[]) AS year_from,"
        " unnest(?::INTEGER[]) AS year_to, unnest(?::INTEGER[]) AS i_from, unnest(?::INTEGER[]) AS i_to",
        [
            [r[0] for r in per],
            [r[1] for r in per],
            [r[2] for r in per],
            [index[r[1]] for r in per],
            [index[r[2]] for r in per],
        ],
    )
    # One grouped pass over `data` gives series ids and each series' points sorted by year; shifting the sorted
    # list by one pairs every point with the next. This is cheaper than a join plus a window over the rows.
    con.execute(
        f"CREATE TEMP TABLE {n['grouped']} AS SELECT (row_number() OVER ())::INTEGER AS sid,"
        " model, scenario, region, variable, min(year)::INTEGER AS first_year, max(year)::INTEGER AS last_year,"
        " list_sort(list({'year': year::INTEGER, 'value': value::DOUBLE})) AS pts"
        f" FROM {qualified(data)} WHERE year IS NOT NULL AND value IS NOT NULL AND isfinite(value)"
        " AND list_contains(?::VARCHAR[], variable) GROUP BY model, scenario, region, variable",
        [sorted({r[1] for r in sel})],
    )
    con.execute(
        f"CREATE TEMP TABLE {n['points']} AS SELECT sid, p.year AS year, p.value AS value,"
        " q.year AS year1, q.value AS value1"
        f" FROM (SELECT sid, unnest(pts) AS p, unnest(list_concat(pts[2:], [NULL])) AS q FROM {n['grouped']})"
    )
    _drop_repeats(con, n)
    # The segment holding each endpoint year (a range join with a handful of years), pivoted to one list per series.
    pivot = ", ".join(f"max(value) FILTER (WHERE year = {y})" for y in years)
    con.execute(
        f"CREATE TEMP TABLE {n['endpoints']} AS SELECT sid, [{pivot}]::DOUBLE[] AS ends FROM"
        f" (SELECT q.sid, e.year, {lerp('e.year', 'q')} AS value FROM {n['points']} q"
        " JOIN (SELECT unnest(?::INTEGER[]) AS year) e ON e.year >= q.year AND e.year < coalesce(q.year1, q.year + 1))"
        " GROUP BY sid",
        [list(years)],
    )
    con.execute(
        f"CREATE TEMP TABLE {n['series']} AS SELECT g.sid, g.model, g.scenario, g.region, g.variable,"
        " g.first_year, g.last_year, e.ends, c.reference, r.sid AS ref_sid, re.ends AS ref_ends"
        f" FROM {n['grouped']} g LEFT JOIN {n['endpoints']} e ON e.sid = g.sid"
        f" LEFT JOIN (SELECT DISTINCT model, scenario, reference FROM {qualified(scenarios)}"
        " WHERE reference IS NOT NULL) c ON c.model = g.model AND c.scenario = g.scenario"
        f" LEFT JOIN {n['grouped']} r ON r.model = g.model AND r.scenario = c.reference AND r.region = g.region"
        f" AND r.variable = g.variable LEFT JOIN {n['endpoints']} re ON re.sid = r.sid"
    )
    con.execute(f"DROP TABLE {n['grouped']}")
    con.execute(f"DROP TABLE {n['endpoints']}")
    ambiguous = con.execute(f"SELECT count(*) - count(DISTINCT sid) FROM {n['series']}").fetchall()[0][0]
    if ambiguous:
        raise IndicatorDataError(f"{scenarios}: some scenarios name more than one reference scenario")
    con.execute(
        f"CREATE TEMP VIEW {n['annual']} AS SELECT sid, t::INTEGER AS year, {lerp('t')} AS value FROM"
        f" (SELECT sid, year, value, year1, value1, unnest(range(year, coalesce(year1, year + 1))) AS t"
        f" FROM {n['points']})"
    )
    return Tables(
        series=n["series"],
        points=n["points"],
        annual=n["annual"],
        selection=n["selection"],
        periods=n["periods"],
        years=years,
        base_year=int(base_year),
        discount_rate=float(discount_rate),
    )


def _drop_repeats(con: duckdb.DuckDBPyConnection, n: dict[str, str]) -> None:
    # After sorting, a repeated year sits next to itself: a zero-length segment. Identical repeats are dropped
    # (the earlier copy's predecessor still points at an equal point); different values are an error.
    repeats = con.execute(
        f"SELECT count(*), count(*) FILTER (WHERE value1 <> value) FROM {n['points']} WHERE year1 = year"
    ).fetchall()[0]
    if repeats[1]:
        shown = con.execute(
            f"SELECT g.model, g.scenario, g.region, g.variable, q.year, q.value, q.value1 FROM {n['points']} q"
            f" JOIN {n['grouped']} g USING (sid) WHERE q.year1 = q.year AND q.value1 <> q.value ORDER BY ALL LIMIT 3"
        ).fetchall()
        text = "; ".join(f"{m}/{s}/{r}/{v} {y}: {a} vs {b}" for m, s, r, v, y, a, b in shown)
        raise IndicatorDataError(f"the same series and year is reported with different values ({text})")
    if repeats[0]:
        con.execute(f"DELETE FROM {n['points']} WHERE year1 = year")
