"""Duplicates: the same key (model, scenario, region, variable, year) more than once, with the same or other values."""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt

_KEY = "path, sheet, line, model, scenario, region, variable, unit, year"


def check_duplicates(ctx: Context) -> list[str]:
    """duplicate-row (same value: harmless, warning) and conflicting-row (different values: error, both lines named)."""
    same = "(vmax - vmin) <= 1e-9 * greatest(abs(vmax), abs(vmin), 1e-300)"
    where = "CASE WHEN path_last = path THEN 'lines ' || line || ' and ' || line_last " \
            "ELSE path || ':' || line || ' and ' || path_last || ':' || line_last END"
    return [
        f"SELECT 'duplicate-row' AS rule, {_KEY}, {fmt('value')} AS value, 'one row per key' AS expected, "
        f"'the same key and value appear ' || n || ' times (' || {where} || ')'"
        " AS message, 'Delete the repeated rows.' AS hint "
        f"FROM checked WHERE n > 1 AND {same}",
        f"SELECT 'conflicting-row' AS rule, {_KEY}, {fmt('vmin')} || ' … ' || {fmt('vmax')} AS value, "
        "'one value per key' AS expected, "
        f"'the same key appears ' || n || ' times with different values (' || {where} || ')'"
        " AS message, 'Keep one row per model, scenario, region, variable and year.' AS hint "
        f"FROM checked WHERE n > 1 AND NOT {same}",
    ]
