"""Carbon-budget indicators: cumulative CO2 to net zero, the budget class it falls in, and an indicative warming.

cumulative_net_zero  the sum of the annual interpolated values from the base year to the series' net-zero year,
                     both included, or to its last reported year when it never reaches zero (year_to says which).
                     The net-zero year is the first whole year at or after the base year whose annual value is
                     <= 0 (the convention of `net_zero_year`). Null unless the series covers the base year.
                     Unit as `cumulative` ("Mt CO2/yr" summed over years -> "Gt CO2"). Every region.
budget_level         in the contract's budget region only (`[budgets] region`, normally World): the lowest warming
                     level whose remaining budget at one likelihood holds cumulative_net_zero (cumulative <= budget,
                     so a value exactly on a budget is within it); one row per likelihood of the table, with the
                     likelihood ("67%") in the variable column; null above every level. Unit "°C". "On" a
                     budget allows a relative 1e-9 for the rounding of the sum.
warming_peak         the warming W at which the budget table gives cumulative_net_zero, at the 50 % likelihood:
warming_peak_low     W_p solves budget_p(W) = cumulative, linear between the table's warming levels and, beyond
warming_peak_high    the table on either side, extended from its nearest level with the central TCRE
                     (W = W_edge + TCRE x (cumulative - budget_edge) / 1000). _low reads the 17 % likelihood (the
                     largest budgets, so the lowest warming), _high the 83 % one; a likelihood missing from the table
                     gives no row. Budget region only; unit "°C".

Why not "base-year warming + TCRE x cumulative": the published budgets already set aside non-CO2 warming and other
terms, so that estimate would disagree with the budget classes. Reading the budget table backwards keeps the two
consistent: a scenario within the 1.7 °C budget at 50 % has warming_peak <= 1.7. Worked example (AR6 WG1 Table
SPM.2 budgets from 2020), 600 Gt CO2 to net zero: W_50 = 1.5 + 0.2 x (600 - 500) / (850 - 500) = 1.557 °C;
W_17 = 1.5 - 0.45 x (900 - 600) / 1000 = 1.365 °C (below the table: 600 < 900); W_83 = 1.7 + 0.3 x (600 - 550) /
(900 - 550) = 1.743 °C; budget_level at 67 % = 1.7 (400 < 600 <= 700).

These are indicative estimates from a published near-linear relation, not a climate-model assessment. Without
net zero by the last reported year, warming_peak is the warming at that year, and it would still be rising.
"""

from __future__ import annotations

from collections.abc import Callable

import duckdb

from milepost.schema.contract import Budgets
from milepost.validate.sql import literal
from milepost.validate.store.indicators.base import Kind, Tables, annual_sum, first_at_or_below_zero, head

PREFIX = "_milepost_budgets_"
LIKELIHOOD = {"warming_peak": 50.0, "warming_peak_low": 17.0, "warming_peak_high": 83.0}


def likelihood_label(p: float) -> str:
    """How a likelihood is written in the variable column of budget_level rows: 67.0 -> '67%'."""
    return f"{p:g}%"


def pieces(b: Budgets) -> list[tuple[float, str, float | None, float | None, float, float, float]]:
    """budget_p(W) inverted, per likelihood: (likelihood, label, lo, hi, anchor, warming, slope) rows such that
    W = warming + slope x (C - anchor) for lo <= C < hi (None = open). Levels are sorted; budgets rise with them."""
    per_gt = b.tcre / 1000.0
    out: list[tuple[float, str, float | None, float | None, float, float, float]] = []
    for j, p in enumerate(b.likelihoods):
        col = [row[j] for row in b.remaining]
        label = likelihood_label(p)
        out.append((p, label, None, col[0], col[0], b.levels[0], per_gt))
        for i in range(len(col) - 1):
            slope = (b.levels[i + 1] - b.levels[i]) / (col[i + 1] - col[i])
            out.append((p, label, col[i], col[i + 1], col[i], b.levels[i], slope))
        out.append((p, label, col[-1], None, col[-1], b.levels[-1], per_gt))
    return out


def prepare_budgets(con: duckdb.DuckDBPyConnection, budgets: Budgets | None) -> tuple[str, str]:
    """Create the two budget helper tables (empty without budgets) and return their names (levels, pieces)."""
    drop_budgets(con)
    levels, piece_table = PREFIX + "levels", PREFIX + "pieces"
    rows = []
    if budgets is not None:
        rows = [
            (budgets.region, p, likelihood_label(p), w, budgets.remaining[i][j])
            for i, w in enumerate(budgets.levels)
            for j, p in enumerate(budgets.likelihoods)
        ]
    con.execute(
        f"CREATE TEMP TABLE {levels} AS SELECT unnest(?::VARCHAR[]) AS region, unnest(?::DOUBLE[]) AS likelihood,"
        " unnest(?::VARCHAR[]) AS label, unnest(?::DOUBLE[]) AS warming, unnest(?::DOUBLE[]) AS budget",
        [[r[i] for r in rows] for i in range(5)],
    )
    cut = pieces(budgets) if budgets is not None else []
    region = budgets.region if budgets is not None else ""
    con.execute(
        f"CREATE TEMP TABLE {piece_table} AS SELECT ?::VARCHAR AS region, unnest(?::DOUBLE[]) AS likelihood,"
        " unnest(?::VARCHAR[]) AS label, unnest(?::DOUBLE[]) AS lo, unnest(?::DOUBLE[]) AS hi,"
        " unnest(?::DOUBLE[]) AS anchor, unnest(?::DOUBLE[]) AS warming, unnest(?::DOUBLE[]) AS slope",
        [region, *[[r[i] for r in cut] for i in range(7)]],
    )
    return levels, piece_table


def drop_budgets(con: duckdb.DuckDBPyConnection) -> None:
    """Remove the budget helper tables."""
    for name in ("levels", "pieces", "sums"):
        con.execute(f"DROP TABLE IF EXISTS {PREFIX}{name}")


def to_net_zero(t: Tables, spans: str) -> str:
    """SELECT sid, year_from, year_to, integral: each series of `spans` (sid, year_from, year_to: the base year,
    or its first reported year if later, to its last) summed from the base year to its net-zero year (or last
    reported year), in the variable's unit x years; integral null unless it covers the base year.

    The net-zero year and the sum are the shared helpers of `net_zero_year` and `cumulative`, so the conventions
    cannot drift apart.
    """
    base = int(t.base_year)
    zero = first_at_or_below_zero(t, spans)
    ends = f"(SELECT n.sid, {base} AS year_from, coalesce(n.year, n.year_to) AS year_to FROM ({zero}) n)"
    return (
        "SELECT e.sid, e.year_from, e.year_to,"
        " CASE WHEN g.years = e.year_to - e.year_from + 1 THEN g.total END AS integral"
        f" FROM {ends} e LEFT JOIN ({annual_sum(t, ends)}) g ON g.sid = e.sid"
    )


def prepare_sums(con: duckdb.DuckDBPyConnection, t: Tables) -> str:
    """TEMP table of `to_net_zero` for every series that any budget kind selects, computed once for all of them
    (each kind summed them again: five times the same work, measured 0.3 s of 1.3 s of indicators at 2M rows)."""
    table = PREFIX + "sums"
    kinds = ", ".join(literal(k.name) for k in KINDS)
    spans = (
        f"(SELECT s.sid, greatest({int(t.base_year)}, s.first_year) AS year_from, s.last_year AS year_to"
        f" FROM {t.series} s WHERE s.variable IN (SELECT variable FROM {t.selection} WHERE kind IN ({kinds})))"
    )
    con.execute(f"DROP TABLE IF EXISTS {table}")
    con.execute(f"CREATE TEMP TABLE {table} AS {to_net_zero(t, spans)}")
    return table


def _frame(t: Tables, kind: str, budget_region_only: bool) -> str:
    """FROM clause: the kind's series with their sum to net zero (alias c) and selection row (alias x)."""
    region = f" AND s.region IN (SELECT region FROM {t.budget_levels})" if budget_region_only else ""
    return (
        f"FROM {t.budget_sums} c JOIN {t.series} s ON s.sid = c.sid{region}"
        f" JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = s.variable"
    )


def cumulative_net_zero_sql(t: Tables) -> str:
    """SQL for `cumulative_net_zero` rows."""
    return (
        f"SELECT {head('cumulative_net_zero')}, c.year_from, c.year_to, c.integral * x.factor AS value, x.unit"
        f" {_frame(t, 'cumulative_net_zero', False)}"
    )


def budget_level_sql(t: Tables) -> str:
    """SQL for `budget_level` rows: one per likelihood of the budget table."""
    # x.factor converts the sum into Gt CO2 (scaling "budget"); b holds every level of one likelihood
    return (
        "SELECT s.model, s.scenario, s.region, 'budget_level' AS kind, l.label AS variable, c.year_from, c.year_to,"
        " min(b.warming) AS value, any_value(x.unit) AS unit"
        f" {_frame(t, 'budget_level', True)}"
        f" JOIN (SELECT DISTINCT region, likelihood, label FROM {t.budget_levels}) l ON l.region = s.region"
        f" LEFT JOIN {t.budget_levels} b ON b.region = l.region AND b.likelihood = l.likelihood"
        # a sum that lands on a budget up to floating-point rounding counts as on it (within it)
        " AND c.integral * x.factor <= b.budget + 1e-9 * abs(b.budget)"
        " GROUP BY s.model, s.scenario, s.region, l.label, c.year_from, c.year_to"
    )


def warming_sql(kind: str) -> Callable[[Tables], str]:
    """The SQL function of one warming kind (its likelihood from LIKELIHOOD)."""
    likelihood = float(LIKELIHOOD[kind])

    def sql(t: Tables) -> str:
        gt = "(c.integral * x.factor)"
        # a LEFT JOIN keeps series whose sum is null (no base year); EXISTS drops likelihoods the table lacks
        return (
            f"SELECT {head(kind)}, c.year_from, c.year_to, p.warming + p.slope * ({gt} - p.anchor) AS value, x.unit"
            f" {_frame(t, kind, True)}"
            f" LEFT JOIN {t.budget_pieces} p ON p.region = s.region AND p.likelihood = {likelihood!r}"
            f" AND (p.lo IS NULL OR {gt} >= p.lo) AND (p.hi IS NULL OR {gt} < p.hi)"
            f" WHERE EXISTS (SELECT 1 FROM {t.budget_pieces} q WHERE q.region = s.region"
            f" AND q.likelihood = {likelihood!r})"
        )

    return sql


KINDS = (
    Kind("cumulative_net_zero", ("net_zero",), "integral", cumulative_net_zero_sql),
    Kind("budget_level", ("net_zero",), "budget", budget_level_sql),
    *(Kind(k, ("net_zero",), "budget", warming_sql(k)) for k in LIKELIHOOD),
)
