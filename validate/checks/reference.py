"""Reference values: base-year values against the contract's agreed historical reference."""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt

_ROW = "i.path, i.sheet, c.line, c.model, c.scenario, c.region, c.variable, c.unit, c.year"


def check_base_year(ctx: Context) -> list[str]:
    """base-year-deviation: |value - reference| > base_year_relative * |reference| (absolute floor if it is 0)."""
    tol = ctx.contract.tolerance.base_year_relative
    return [
        "SELECT 'base-year-deviation' AS rule, 'value' AS column_name, "
        f"{_ROW}, {fmt('c.value')} AS value, {fmt('r.value')} AS expected, "
        "c.variable || ' in ' || c.region || ' ' || c.year || ' is ' || " + fmt("c.value") + " || ' ' || c.unit "
        "|| ', the reference is ' || " + fmt("r.value") + " || CASE WHEN r.value = 0 THEN '' ELSE ' (' || "
        "printf('%+.1f', (c.value - r.value) / abs(r.value) * 100) || ' %)' END "
        f"|| '; tolerance ±{tol * 100:g} %' AS message, "
        "'Calibrate the base year to the reference, or explain the difference in the submission note.' AS hint "
        "FROM checked c JOIN c_reference r ON c.region = r.region AND c.variable = r.variable AND c.year = r.year "
        "JOIN c_inputs i ON i.src = c.src "
        f"WHERE abs(c.value - r.value) > CASE WHEN r.value = 0 THEN {ctx.tol_abs} ELSE {tol} * abs(r.value) END"
    ]
