"""Step 1: every series of the checked rows, what the contract asks for it, and the directly harmonised values.

Tables written (TEMP): `h_settings` (variable, method, converge_year), `h_levels` (variable or region heights),
`h_series` (one row per model, scenario, region, variable: base-year value, reference, method, status) and
`h_values` (the rows of every series still in play, harmonised where the series is harmonised directly).
"""

from __future__ import annotations

import duckdb

from milepost.schema.contract import Contract
from milepost.validate.harmonise import methods
from milepost.validate.harmonise.settings import Choice, region_heights, variable_heights
from milepost.validate.sql import insert_rows

# Status of a series while the harmonisation runs (kept in h_series.status):
#   direct            harmonised from its own reference value by one of the four methods
#   rebuilt           the sum of its parts (or regions), all of them harmonised
#   rebuilt-partial   the sum of its parts (or regions), some harmonised and some as reported
#   unchanged         as reported: no reference value, or a variable the contract does not harmonise
#   no-base-year      has a reference value but no base-year value: left out
#   below-harmonised  a part of a harmonised series with no reference of its own: left out so sums still hold
#   not-rebuilt       a total with harmonised parts that cannot be summed again (a part is missing): left out
IN_OUTPUT = ("direct", "rebuilt", "rebuilt-partial", "unchanged")


def settings_tables(con: duckdb.DuckDBPyConnection, contract: Contract, chosen: list[Choice]) -> None:
    """The per-variable choices and the hierarchy heights as small TEMP tables."""
    con.execute("CREATE OR REPLACE TEMP TABLE h_settings (variable VARCHAR, method VARCHAR, converge_year INTEGER)")
    settings = [(c.variable, c.method, c.converge_year) for c in chosen]
    columns = [("variable", "VARCHAR"), ("method", "VARCHAR"), ("converge_year", "INTEGER")]
    insert_rows(con, "h_settings", columns, settings)
    con.execute("CREATE OR REPLACE TEMP TABLE h_levels (kind VARCHAR, name VARCHAR, height INTEGER)")
    rows = [("variable", k, v) for k, v in variable_heights(contract).items()]
    rows += [("region", k, v) for k, v in region_heights(contract).items()]
    insert_rows(con, "h_levels", [("kind", "VARCHAR"), ("name", "VARCHAR"), ("height", "INTEGER")], rows)


def series_table(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """h_series: each series with its base-year value m0, reference h, the method asked and the method used."""
    t0 = int(contract.base_year)
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE h_series AS
        WITH s AS (
            SELECT model, scenario, region, variable, any_value(unit) AS unit,
                   any_value(value) FILTER (WHERE year = {t0}) AS m0,
                   coalesce(any_value(src) FILTER (WHERE year = {t0}), arg_min(src, (src, line))) AS src,
                   coalesce(any_value(line) FILTER (WHERE year = {t0}), arg_min(line, (src, line))) AS line
            FROM checked GROUP BY model, scenario, region, variable),
        r AS (
            SELECT s.*, ref.value AS h, st.method AS requested, st.converge_year AS asked_year,
                   coalesce(vl.height, 0) + coalesce(rl.height, 0) AS lvl
            FROM s
            LEFT JOIN c_reference ref ON ref.region = s.region AND ref.variable = s.variable AND ref.year = {t0}
            LEFT JOIN h_settings st ON st.variable = s.variable
            LEFT JOIN h_levels vl ON vl.kind = 'variable' AND vl.name = s.variable
            LEFT JOIN h_levels rl ON rl.kind = 'region' AND rl.name = s.region),
        f AS (
            SELECT r.*,
                   CASE WHEN requested IS NULL OR h IS NULL OR m0 IS NULL THEN NULL
                        WHEN requested IN ('ratio', 'converging-ratio') AND m0 = 0 THEN 'zero-base'
                        WHEN requested IN ('ratio', 'converging-ratio') AND m0 * h < 0 THEN 'sign-differs'
                   END AS fallback
            FROM r),
        m AS (
            SELECT f.*,
                   CASE WHEN requested IS NULL OR h IS NULL THEN 'unchanged'
                        WHEN m0 IS NULL THEN 'no-base-year'
                        ELSE 'direct' END AS status,
                   CASE WHEN requested IS NULL OR h IS NULL OR m0 IS NULL THEN NULL
                        WHEN fallback IS NOT NULL THEN replace(requested, 'ratio', 'offset')
                        ELSE requested END AS method
            FROM f)
        SELECT model, scenario, region, variable, unit, lvl, src, line, m0, h, requested, method, fallback, status,
               CASE WHEN method IN ('converging-ratio', 'converging-offset') THEN asked_year END AS converge_year,
               CASE WHEN method IN ('ratio', 'converging-ratio') THEN h / m0 END AS factor,
               CASE WHEN method IN ('offset', 'converging-offset') THEN h - m0 END AS offset_value,
               NULL::VARCHAR AS dim, NULL::VARCHAR AS not_harmonised, NULL::VARCHAR AS above
        FROM m""")  # noqa: S608 - fragments of this package; the base year is an integer


def values_table(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """h_values: the rows of the series in play; directly harmonised series get the method's formula."""
    formula = methods.harmonised(
        "c.value", "c.year", contract.base_year, "s.method", "s.factor", "s.offset_value", "s.converge_year"
    )
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE h_values AS
        SELECT c.model, c.scenario, c.region, c.variable, c.year,
               CASE WHEN s.status = 'direct' THEN {formula} ELSE c.value END AS value
        FROM checked c JOIN h_series s USING (model, scenario, region, variable)
        WHERE s.status IN ('direct', 'unchanged')""")  # noqa: S608 - fragments of this package; the base year is an integer
