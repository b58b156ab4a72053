"""Step 2: totals rebuilt from their harmonised parts, bottom up; then the parts no harmonised total covers.

Harmonising each series on its own would break the contract's sums: a harmonised total no longer equals its
reported parts. So the most detailed series with a reference value are harmonised, and every total whose parts
(variables) or regions are all harmonised becomes their (weighted) sum. The walk goes level by level (a series'
level is the height of its variable plus that of its region), so the parts of a total are final before it is
summed; each level is a few set-based statements, whatever the number of rows.

A total whose parts are only partly harmonised, and which has no harmonisation of its own, is rebuilt from the
harmonised parts and the reported rest (`rebuilt-partial`); if a part is missing it cannot be summed and is left
out (`not-rebuilt`). Going top down afterwards, a reported series below a harmonised one (a part without a
reference value of its own, say the sectors of a harmonised national total) is left out (`below-harmonised`):
it could not be made to add up to the harmonised total again. Every emitted total thus equals the sum of its
emitted parts wherever all of them are emitted, which is where the contract's sum checks look.
"""

from __future__ import annotations

import duckdb

HARMONISED = "('direct', 'rebuilt')"
AVAILABLE = "('direct', 'rebuilt', 'rebuilt-partial', 'unchanged')"
ADJUSTED = "('direct', 'rebuilt', 'rebuilt-partial')"

# Every (total, part) pair of a series at one level: its variable's parts in the same region, and, for variables
# that add up over regions, the same variable in the region's parts. `n` is the contract's number of parts, so a
# part the data lacks entirely counts as missing.
_EDGES = """
    SELECT t.model, t.scenario, t.region, t.variable, t.status, 'parts' AS dim, p.part AS p_variable,
           t.region AS p_region, p.factor, k.n
    FROM t JOIN e_parts p ON p.total = t.variable JOIN c_part_counts k ON k.total = t.variable::VARCHAR
    UNION ALL
    SELECT t.model, t.scenario, t.region, t.variable, t.status, 'regions', t.variable, rp.part, 1.0, k.n
    FROM t JOIN e_region_parts rp ON rp.parent = t.region
    JOIN e_variables v ON v.variable = t.variable AND v.regions = 'sum'
    JOIN c_region_counts k ON k.parent = t.region::VARCHAR
"""


def max_level(con: duckdb.DuckDBPyConnection) -> int:
    return int(con.execute("SELECT coalesce(max(lvl), 0) FROM h_series").fetchall()[0][0])


def rebuild_totals(con: duckdb.DuckDBPyConnection) -> None:
    """Bottom up: each total whose parts are harmonised becomes their sum (see the module docstring)."""
    for level in range(1, max_level(con) + 1):
        _rebuild_level(con, level)


def _rebuild_level(con: duckdb.DuckDBPyConnection, level: int) -> None:
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE h_try AS
        WITH t AS (SELECT model, scenario, region, variable, status FROM h_series
                   WHERE lvl = {int(level)} AND status IN ('direct', 'unchanged', 'no-base-year')),
        e AS ({_EDGES})
        SELECT e.model, e.scenario, e.region, e.variable, any_value(e.status) AS status, e.dim, any_value(e.n) AS n,
               count(*) FILTER (WHERE s.status IN {HARMONISED}) AS n_harmonised,
               count(*) FILTER (WHERE s.status IN {AVAILABLE}) AS n_available,
               count(*) FILTER (WHERE s.status IN {ADJUSTED}) AS n_adjusted,
               string_agg(CASE e.dim WHEN 'parts' THEN e.p_variable::VARCHAR ELSE e.p_region::VARCHAR END, ', '
                          ORDER BY e.p_variable, e.p_region) FILTER (WHERE s.status IS NULL
                          OR s.status NOT IN {HARMONISED}) AS not_harmonised
        FROM e LEFT JOIN h_series s ON s.model = e.model AND s.scenario = e.scenario AND s.region = e.p_region
             AND s.variable = e.p_variable
        GROUP BY e.model, e.scenario, e.region, e.variable, e.dim""")  # noqa: S608 - fragments of this package; levels are integers
    # Fully harmonised parts win over partly harmonised ones, and parts (variables) over regions: either way
    # gives the same sums when the data add up, and one must be chosen.
    con.execute("""
        CREATE OR REPLACE TEMP TABLE h_pick AS
        SELECT * FROM (
            SELECT *, CASE WHEN n_harmonised = n THEN 'rebuilt'
                           WHEN status = 'unchanged' AND n_available = n AND n_adjusted > 0 THEN 'rebuilt-partial'
                      END AS outcome
            FROM h_try)
        WHERE outcome IS NOT NULL
        QUALIFY row_number() OVER (PARTITION BY model, scenario, region, variable
                                   ORDER BY outcome = 'rebuilt' DESC, dim = 'parts' DESC) = 1""")
    if not con.execute("SELECT count(*) FROM h_pick").fetchall()[0][0]:
        _mark_not_rebuilt(con)
        return
    con.execute("""
        DELETE FROM h_values v USING h_pick k
        WHERE v.model = k.model AND v.scenario = k.scenario AND v.region = k.region AND v.variable = k.variable""")
    con.execute("""
        INSERT INTO h_values
        WITH pp AS (
            SELECT k.model, k.scenario, k.region, k.variable, k.n, p.part AS p_variable, k.region AS p_region,
                   p.factor
            FROM h_pick k JOIN e_parts p ON k.dim = 'parts' AND p.total = k.variable
            UNION ALL
            SELECT k.model, k.scenario, k.region, k.variable, k.n, k.variable, rp.part, 1.0
            FROM h_pick k JOIN e_region_parts rp ON k.dim = 'regions' AND rp.parent = k.region)
        SELECT pp.model, pp.scenario, pp.region, pp.variable, v.year, sum(pp.factor * v.value) AS value
        FROM pp JOIN h_values v ON v.model = pp.model AND v.scenario = pp.scenario AND v.region = pp.p_region
             AND v.variable = pp.p_variable
        GROUP BY pp.model, pp.scenario, pp.region, pp.variable, v.year, pp.n
        HAVING count(*) = pp.n""")
    con.execute("""
        UPDATE h_series s SET status = k.outcome, dim = k.dim,
               not_harmonised = CASE WHEN k.outcome = 'rebuilt-partial' THEN k.not_harmonised END
        FROM h_pick k
        WHERE s.model = k.model AND s.scenario = k.scenario AND s.region = k.region AND s.variable = k.variable""")
    _mark_not_rebuilt(con)


def _mark_not_rebuilt(con: duckdb.DuckDBPyConnection) -> None:
    """Reported totals with adjusted parts that could not be summed again are left out (their rows dropped)."""
    con.execute("""
        UPDATE h_series s SET status = 'not-rebuilt', not_harmonised = x.missing
        FROM (SELECT t.model, t.scenario, t.region, t.variable,
                     string_agg(t.dim || ': ' || coalesce(t.not_harmonised, ''), '; ' ORDER BY t.dim) AS missing
              FROM h_try t WHERE t.status = 'unchanged' AND t.n_adjusted > 0
              GROUP BY ALL) x
        WHERE s.model = x.model AND s.scenario = x.scenario AND s.region = x.region AND s.variable = x.variable
          AND s.status = 'unchanged'""")
    con.execute("""
        DELETE FROM h_values v USING h_series s
        WHERE v.model = s.model AND v.scenario = s.scenario AND v.region = s.region AND v.variable = s.variable
          AND s.status = 'not-rebuilt'""")


def leave_out_below(con: duckdb.DuckDBPyConnection) -> None:
    """Top down: reported series (and partly rebuilt ones) below a harmonised or left-out series are left out.

    `h_left` keeps, for each series left out, the series directly above it and (`root`) the harmonised one that
    made it go: the direct parent, or the root of a parent that was left out itself.
    """
    con.execute(
        "CREATE OR REPLACE TEMP TABLE h_left AS SELECT model, scenario, region, variable, "
        "region AS above_region, variable AS above_variable, above AS root FROM h_series WHERE false"
    )
    for level in range(max_level(con) - 1, -1, -1):
        con.execute(f"""
            INSERT INTO h_left
            WITH c AS (SELECT model, scenario, region, variable FROM h_series
                       WHERE lvl = {int(level)} AND status IN ('unchanged', 'rebuilt-partial')),
            up AS (
                SELECT c.*, ep.total AS p_variable, c.region AS p_region
                FROM c JOIN e_parts ep ON ep.part = c.variable
                UNION ALL
                SELECT c.*, c.variable, er.parent
                FROM c JOIN e_region_parts er ON er.part = c.region
                JOIN e_variables v ON v.variable = c.variable AND v.regions = 'sum')
            SELECT up.model, up.scenario, up.region, up.variable, up.p_region, up.p_variable,
                   CASE WHEN p.status = 'below-harmonised' THEN p.above
                        ELSE p.variable::VARCHAR || ' in ' || p.region::VARCHAR END
            FROM up JOIN h_series p ON p.model = up.model AND p.scenario = up.scenario AND p.region = up.p_region
                 AND p.variable = up.p_variable
            WHERE p.status IN ('direct', 'rebuilt', 'below-harmonised')""")  # noqa: S608 - fragments of this package; levels are integers
        con.execute(f"""
            UPDATE h_series s SET status = 'below-harmonised', above = x.above
            FROM (SELECT model, scenario, region, variable,
                         min(root) AS above
                  FROM h_left GROUP BY ALL) x
            WHERE s.lvl = {int(level)} AND s.status IN ('unchanged', 'rebuilt-partial')
              AND s.model = x.model AND s.scenario = x.scenario AND s.region = x.region
              AND s.variable = x.variable""")  # noqa: S608 - fragments of this package; levels are integers
