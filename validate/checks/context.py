"""What every check sees: the DuckDB connection with the loaded rows, the contract, and the inputs."""

from __future__ import annotations

from dataclasses import dataclass, field

import duckdb

from milepost.schema.contract import Contract
from milepost.validate.readers import InputFile


@dataclass
class Context:
    """One check run.

    Tables in `con` (all TEMP): `obs` (view: every data row as read: src, path, sheet, line, key cells, year,
    year_raw, value, value_raw), `combos` (each distinct src and key cells but the year, with its row count),
    `combo_values` (col, value: the distinct cells of each key column), `c_inputs` (src -> path, sheet),
    `unit_map` (variable, unit -> factor, status), `checked` (usable rows in contract units, one per key: src,
    line, key, unit, year, value), `dups` (keys that occurred more than once), and the contract lookups
    `c_variables`, `c_parts`, `c_regions`, `c_region_parts`, `c_reference`, `c_bounds`.
    """

    con: duckdb.DuckDBPyConnection
    contract: Contract
    inputs: list[InputFile]
    # the distinct (variable, unit) pairs of contract variables, once asked (units.py)
    unit_pairs: list[tuple[str, str]] | None = field(default=None, repr=False)

    @property
    def tol_rel(self) -> float:
        return self.contract.tolerance.sum_relative

    @property
    def tol_abs(self) -> float:
        return self.contract.tolerance.sum_absolute


def fmt(expr: str) -> str:
    """SQL rendering a number the way reports show it: up to 6 significant digits, no trailing zeros."""
    return f"(CASE WHEN abs({expr}) >= 1e5 THEN printf('%.0f', {expr}) ELSE printf('%.6g', {expr}) END)"
