"""Values: the sign rule of non-negative variables and the contract's plausibility bounds."""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt

_ROW = "i.path, i.sheet, c.line, c.model, c.scenario, c.region, c.variable, c.unit, c.year"


def check_sign(ctx: Context) -> list[str]:
    """sign: a negative value for a variable the contract declares non-negative."""
    return [
        f"SELECT 'sign' AS rule, 'value' AS column_name, {_ROW}, {fmt('c.value')} AS value, '>= 0' AS expected, "
        "c.variable || ' must not be negative, but is ' || " + fmt("c.value") + " || ' ' || c.unit AS message, "
        "'Check the sign convention; net removals belong in a variable that may be negative.' AS hint "
        "FROM checked c JOIN c_variables v ON c.variable = v.variable JOIN c_inputs i ON i.src = c.src "
        "WHERE v.sign = 'non-negative' AND c.value < 0"
    ]


def check_bounds(ctx: Context) -> list[str]:
    """out-of-bounds: a value outside a plausibility bound of the contract (a warning: it may be right)."""
    rng = "coalesce(" + fmt("b.low") + ", '-∞') || ' … ' || coalesce(" + fmt("b.high") + ", '∞')"
    return [
        "SELECT 'out-of-bounds' AS rule, 'value' AS column_name, "  # noqa: S608 - names from the code; contract text via validate.sql
        f"{_ROW}, {fmt('c.value')} AS value, {rng} AS expected, "
        f"c.variable || ' = ' || {fmt('c.value')} || ' ' || c.unit || ' is outside the plausible range ' || {rng} "
        "AS message, 'Check the value and its unit; if it is right, say why in the submission note.' AS hint "
        "FROM checked c JOIN c_bounds b ON c.variable = b.variable "
        "AND (b.region IS NULL OR b.region = c.region) "
        "AND c.year BETWEEN coalesce(b.year_from, -1000000) AND coalesce(b.year_to, 1000000) "
        "JOIN c_inputs i ON i.src = c.src "
        "WHERE c.value < b.low OR c.value > b.high"
    ]
