"""Sums: a variable against the weighted sum of its parts, and a region against the sum of its parts.

A sum is checked only where every part is reported: a missing part is a coverage question, not a wrong sum.
The tolerance is |reported - expected| <= max(sum_relative * |expected|, sum_absolute), in the total's unit.
Sums are compared as numbers first; the text listing the parts is built only for the sums that fail.
"""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt

_T = "i.path, i.sheet, t.line, t.model, t.scenario, t.region, t.variable, t.unit, t.year"


def _diff_pct(reported: str, expected: str) -> str:
    return (f"CASE WHEN {expected} = 0 THEN '' ELSE ' (' || printf('%+.2f', ({reported} - {expected}) "
            f"/ abs({expected}) * 100) || ' %)' END")


def check_sum_of_parts(ctx: Context) -> list[str]:
    """sum-of-parts: a total that differs from the weighted sum of its (complete) parts beyond the tolerance."""
    failing = (
        "WITH p AS (SELECT c.model, c.scenario, c.region, c.year, cp.total, sum(c.value * cp.factor) AS expected, "
        "count(*) AS n FROM checked c JOIN c_parts cp ON c.variable = cp.part GROUP BY ALL), "
        "bad AS MATERIALIZED (SELECT t.*, p.expected FROM p JOIN c_part_counts k ON p.total = k.total AND p.n = k.n "
        "JOIN checked t ON t.model = p.model AND t.scenario = p.scenario AND t.region = p.region "
        "AND t.year = p.year AND t.variable = p.total "
        f"WHERE abs(t.value - p.expected) > greatest({ctx.tol_rel} * abs(p.expected), {ctx.tol_abs})), "
        "detail AS (SELECT b.model, b.scenario, b.region, b.year, b.variable, "
        "string_agg(c.variable || ' = ' || " + fmt("c.value") + ", ', ' ORDER BY c.variable) AS parts "
        "FROM bad b JOIN c_parts cp ON cp.total = b.variable JOIN checked c ON c.model = b.model "
        "AND c.scenario = b.scenario AND c.region = b.region AND c.year = b.year AND c.variable = cp.part "
        "GROUP BY ALL) "
    )
    return [
        failing + f"SELECT 'sum-of-parts' AS rule, {_T}, {fmt('t.value')} AS value, {fmt('t.expected')} AS expected, "
        "t.variable || ' is ' || " + fmt("t.value") + " || ' but its parts sum to ' || " + fmt("t.expected")
        + " || " + _diff_pct("t.value", "t.expected") + " AS message, 'parts: ' || d.parts AS hint "
        "FROM bad t JOIN detail d USING (model, scenario, region, year, variable) JOIN c_inputs i ON i.src = t.src"
    ]


def check_sum_of_regions(ctx: Context) -> list[str]:
    """sum-of-regions: a region unequal to the sum of its parts, or regions of a net-zero variable not netting out."""
    grouped = (
        "SELECT c.model, c.scenario, rp.parent, c.variable, c.year, any_value(v.regions) AS rule_kind, "
        "sum(c.value) AS expected, sum(abs(c.value)) AS gross, count(*) AS n, arg_min(c.src, c.line) AS src, "
        "min(c.line) AS line FROM checked c JOIN c_region_parts rp ON c.region = rp.part "
        "JOIN c_variables v ON c.variable = v.variable WHERE v.regions IN ('sum', 'zero') GROUP BY ALL"
    )
    complete = f"f AS (SELECT r.* FROM ({grouped}) r JOIN c_region_counts k ON r.parent = k.parent AND r.n = k.n)"
    bad = (
        f"WITH {complete}, bad AS MATERIALIZED ("
        "SELECT f.*, t.value AS reported, t.line AS t_line, t.src AS t_src, v.unit FROM f "
        "JOIN c_variables v ON f.variable = v.variable LEFT JOIN checked t ON t.model = f.model "
        "AND t.scenario = f.scenario AND t.region = f.parent AND t.variable = f.variable AND t.year = f.year "
        f"WHERE (f.rule_kind = 'sum' AND t.value IS NOT NULL AND abs(t.value - f.expected) > "
        f"greatest({ctx.tol_rel} * abs(f.expected), {ctx.tol_abs})) OR (f.rule_kind = 'zero' AND "
        f"abs(f.expected) > greatest({ctx.tol_rel} * f.gross, {ctx.tol_abs}))), "
        "detail AS (SELECT b.model, b.scenario, b.parent, b.variable, b.year, "
        "string_agg(c.region || ' = ' || " + fmt("c.value") + ", ', ' ORDER BY c.region) AS regions "
        "FROM bad b JOIN c_region_parts rp ON rp.parent = b.parent JOIN checked c ON c.model = b.model "
        "AND c.scenario = b.scenario AND c.region = rp.part AND c.variable = b.variable AND c.year = b.year "
        "GROUP BY ALL) "
    )
    return [
        bad + "SELECT 'sum-of-regions' AS rule, i.path, i.sheet, coalesce(b.t_line, b.line) AS line, b.model, "
        "b.scenario, b.parent AS region, b.variable, b.unit, b.year, "
        "CASE WHEN b.rule_kind = 'sum' THEN " + fmt("b.reported") + " ELSE " + fmt("b.expected") + " END AS value, "
        "CASE WHEN b.rule_kind = 'sum' THEN " + fmt("b.expected") + " ELSE '0' END AS expected, "
        "CASE WHEN b.rule_kind = 'sum' THEN b.parent || ' ' || b.variable || ' is ' || " + fmt("b.reported")
        + " || ' but its regions sum to ' || " + fmt("b.expected") + " || " + _diff_pct("b.reported", "b.expected")
        + " ELSE 'the regions of ' || b.parent || ' must net to zero for ' || b.variable || ', but sum to ' || "
        + fmt("b.expected") + " END AS message, 'regions: ' || d.regions AS hint "
        "FROM bad b JOIN detail d USING (model, scenario, parent, variable, year) "
        "JOIN c_inputs i ON i.src = coalesce(b.t_src, b.src)"
    ]
