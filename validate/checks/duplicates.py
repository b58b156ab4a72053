"""Duplicates: the same key (model, scenario, region, variable, year) more than once, with the same or other values."""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt


def check_duplicates(ctx: Context) -> list[str]:
    """duplicate-row (same value: harmless, warning) and conflicting-row (different values: error, both lines named).

    Reads `dups` (one row per repeated key, built with `checked`), so a file without repeats costs nothing here.
    """
    same = "(d.vmax - d.vmin) <= 1e-9 * greatest(abs(d.vmax), abs(d.vmin), 1e-300)"
    where = (
        "CASE WHEN d.src_last = d.src THEN 'lines ' || d.line || ' and ' || d.line_last "
        "ELSE i.path || ':' || d.line || ' and ' || j.path || ':' || d.line_last END"
    )
    row = "i.path, i.sheet, d.line, d.model, d.scenario, d.region, d.variable, d.unit, d.year"
    src = "FROM dups d JOIN c_inputs i ON i.src = d.src JOIN c_inputs j ON j.src = d.src_last"
    return [
        "SELECT 'duplicate-row' AS rule, 'value' AS column_name, "
        f"{row}, {fmt('d.vmin')} AS value, 'one row per key' AS expected, "
        f"'the same key and value appear ' || d.n || ' times (' || {where} || ')' AS message, "
        f"'Delete the repeated rows.' AS hint {src} WHERE {same}",
        "SELECT 'conflicting-row' AS rule, 'value' AS column_name, "
        f"{row}, {fmt('d.vmin')} || ' … ' || {fmt('d.vmax')} AS value, "
        "'one value per key' AS expected, "
        f"'the same key appears ' || d.n || ' times with different values (' || {where} || ')' AS message, "
        f"'Keep one row per model, scenario, region, variable and year.' AS hint {src} WHERE NOT {same}",
    ]
