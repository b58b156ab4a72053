"""Indicators computed at ingest in DuckDB SQL: one module per kind family, registered in `FAMILIES`.

`compute_indicators` reads long rows (model, scenario, region, variable, unit, year, value; contract units) and
the scenarios table (model, scenario, reference), and writes one row per (model, scenario, region, kind,
variable, year_from, year_to) with its value, unit and an optional note (why a value is what it is: the reference
a loss was measured against, a net-zero year that was not reached). Which variables get which kinds, over which
periods and in which unit comes from schema/indicators.toml. All kinds read one shared piecewise-linear
interpolation (see `interpolation`), and everything is set-based SQL: the cost does not grow with Python loops
over scenarios.

Indicators are computed for every series in `data`, reference scenarios included; a reference read from
another submission (e.g. a view that unions new rows with stored ones) works the same. Undefined values are
rows with a null value (no reference, a rate across a sign change, a year outside the reported range). The
`unit` column of `data` is not read: values must already be in the contract's units. Row order is unspecified.

To add a kind: write a module with a `KINDS` tuple of `Kind` (name, accepted period shapes, unit scaling, a
function returning its SELECT), add the module to `FAMILIES`, give it a table in indicators.toml, add tests.
These numbers are model projections, not forecasts; costs exclude avoided damages and co-benefits.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import duckdb

from milepost.schema.contract import Contract
from milepost.validate.sql import qualified
from milepost.validate.store.indicators import budgets, burden, costs, cumulative, drivers, levels, rates, timing
from milepost.validate.store.indicators.base import Kind, Tables
from milepost.validate.store.indicators.definitions import IndicatorSpecError, Plan, load_definitions, resolve
from milepost.validate.store.indicators.interpolation import IndicatorDataError, drop_helpers, prepare

__all__ = [
    "COLUMNS",
    "FAMILIES",
    "GAP_COLUMNS",
    "KINDS",
    "IndicatorDataError",
    "IndicatorSpecError",
    "Kind",
    "compute_indicators",
    "plan",
]

FAMILIES = (levels, rates, cumulative, timing, costs, budgets, drivers, burden)
KINDS: dict[str, Kind] = {k.name: k for family in FAMILIES for k in family.KINDS}
COLUMNS = (
    ("model", "VARCHAR"),
    ("scenario", "VARCHAR"),
    ("region", "VARCHAR"),
    ("kind", "VARCHAR"),
    ("variable", "VARCHAR"),
    ("year_from", "INTEGER"),
    ("year_to", "INTEGER"),
    ("value", "DOUBLE"),
    ("unit", "VARCHAR"),
    ("note", "VARCHAR"),
)
# A kind that needs several input series (drivers, burden) and lacks one for a scenario writes no rows for it but
# one row here saying which input is missing (never a zero, never a silent gap).
GAP_COLUMNS = (
    ("model", "VARCHAR"),
    ("scenario", "VARCHAR"),
    ("region", "VARCHAR"),
    ("kind", "VARCHAR"),
    ("variable", "VARCHAR"),
    ("note", "VARCHAR"),
)
GAP_FAMILIES = (drivers, burden)


def plan(contract: Contract, definitions: str | Path | None = None) -> Plan:
    """indicators.toml (default: the packaged one) resolved for `contract`: selection, periods, skipped."""
    return resolve(contract, load_definitions(definitions), KINDS)


def compute_indicators(
    con: duckdb.DuckDBPyConnection,
    contract: Contract,
    data: str = "checked",
    scenarios: str = "checked_scenarios",
    target: str = "computed_indicators",
    *,
    definitions: str | Path | None = None,
) -> int:
    """Create or replace TEMP TABLE `target` with every indicator of `data` and return its row count.

    TEMP TABLE `target`_gaps gets the gaps (GAP_COLUMNS): kinds left out of a scenario for a missing input.
    `data` and `scenarios` name tables or views on `con`. `definitions` overrides schema/indicators.toml.
    Raises IndicatorSpecError for unusable definitions and IndicatorDataError for conflicting repeated rows.
    """
    resolved = plan(contract, definitions)
    out = qualified(target)
    columns = ", ".join(f"{name} {sql_type}" for name, sql_type in COLUMNS)
    kinds = resolved.kinds()
    inputs, unavailable = drivers.input_rows(contract)
    try:
        tables = prepare(
            con,
            data,
            scenarios,
            [*resolved.selection, *inputs],
            resolved.periods,
            contract.base_year,
            contract.discount_rate,
        )
        levels_table, pieces_table = budgets.prepare_budgets(con, contract.budgets)
        inputs_table, _ = drivers.prepare_inputs(con, tables, inputs, unavailable)
        tables = replace(
            tables,
            budget_levels=levels_table,
            budget_pieces=pieces_table,
            inputs=inputs_table,
            market=burden.prepare_market(con, contract),
            convergence_year=contract.allocation.convergence_year,
            budget_sums=budgets.prepare_sums(con, tables),
        )
        burden.prepare_shares(con, tables)
        _store_gaps(con, tables, kinds, f"{target}_gaps")
        parts = [KINDS[kind].sql(tables) for kind in kinds]
        if parts:
            # BY NAME: a kind without notes leaves out the `note` column and gets nulls there
            notes = "SELECT NULL::VARCHAR AS note WHERE false"  # so that the column exists when no kind has notes
            union = " UNION ALL BY NAME ".join(f"({sql})" for sql in [*parts, notes])
            casts = ", ".join(f"{name}::{sql_type} AS {name}" for name, sql_type in COLUMNS)
            con.execute(f"CREATE OR REPLACE TEMP TABLE {out} AS SELECT {casts} FROM ({union})")
        else:
            con.execute(f"CREATE OR REPLACE TEMP TABLE {out} ({columns})")
        return int(con.execute(f"SELECT count(*) FROM {out}").fetchall()[0][0])
    finally:
        drop_helpers(con)
        budgets.drop_budgets(con)
        drivers.drop_inputs(con)
        burden.drop_market(con)


def _store_gaps(con: duckdb.DuckDBPyConnection, tables: Tables, kinds: tuple[str, ...], target: str) -> None:
    out = qualified(target)
    columns = ", ".join(f"{name} {sql_type}" for name, sql_type in GAP_COLUMNS)
    con.execute(f"CREATE OR REPLACE TEMP TABLE {out} ({columns})")
    names = ", ".join(name for name, _ in GAP_COLUMNS)
    for family in GAP_FAMILIES:
        con.execute(f"INSERT INTO {out} ({names}) SELECT {names} FROM ({family.gaps(tables, kinds)})")
