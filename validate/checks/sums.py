"""Sums: a variable against the weighted sum of its parts, and a region against the sum of its parts.

A sum is checked only where every part is reported: a missing part is a coverage question, not a wrong sum.
The tolerance is |reported - expected| <= max(sum_relative * |expected|, sum_absolute), in the total's unit.
"""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt

_T = "t.path, t.sheet, t.line, t.model, t.scenario, t.region, t.variable, t.unit, t.year"


def _diff_pct(reported: str, expected: str) -> str:
    return (f"CASE WHEN {expected} = 0 THEN '' ELSE ' (' || printf('%+.2f', ({reported} - {expected}) "
            f"/ abs({expected}) * 100) || ' %)' END")


def check_sum_of_parts(ctx: Context) -> list[str]:
    """sum-of-parts: a total that differs from the weighted sum of its (complete) parts beyond the tolerance."""
    return [
        "WITH p AS (SELECT c.model, c.scenario, c.region, c.year, cp.total, sum(c.value * cp.factor) AS expected, "
        "count(*) AS n, string_agg(c.variable || ' = ' || " + fmt("c.value") + ", ', ' ORDER BY c.variable) AS detail "
        "FROM checked c JOIN c_parts cp ON c.variable = cp.part GROUP BY ALL) "
        f"SELECT 'sum-of-parts' AS rule, {_T}, {fmt('t.value')} AS value, {fmt('p.expected')} AS expected, "
        "t.variable || ' is ' || " + fmt("t.value") + " || ' but its parts sum to ' || " + fmt("p.expected")
        + " || " + _diff_pct("t.value", "p.expected") + " AS message, 'parts: ' || p.detail AS hint "
        "FROM p JOIN c_part_counts k ON p.total = k.total AND p.n = k.n "
        "JOIN checked t ON t.model = p.model AND t.scenario = p.scenario AND t.region = p.region "
        "AND t.year = p.year AND t.variable = p.total "
        f"WHERE abs(t.value - p.expected) > greatest({ctx.tol_rel} * abs(p.expected), {ctx.tol_abs})"
    ]


def check_sum_of_regions(ctx: Context) -> list[str]:
    """sum-of-regions: a region unequal to the sum of its parts, or regions of a net-zero variable not netting out."""
    grouped = (
        "SELECT c.model, c.scenario, rp.parent, c.variable, c.year, any_value(v.regions) AS rule_kind, "
        "sum(c.value) AS expected, sum(abs(c.value)) AS gross, count(*) AS n, min(c.path) AS path, "
        "min(c.line) AS line, string_agg(c.region || ' = ' || " + fmt("c.value") + ", ', ' ORDER BY c.region) "
        "AS detail FROM checked c JOIN c_region_parts rp ON c.region = rp.part "
        "JOIN c_variables v ON c.variable = v.variable WHERE v.regions IN ('sum', 'zero') GROUP BY ALL"
    )
    full = (f"WITH r AS ({grouped}), "
            "f AS (SELECT r.* FROM r JOIN c_region_counts k ON r.parent = k.parent AND r.n = k.n) ")
    return [
        full + f"SELECT 'sum-of-regions' AS rule, {_T}, {fmt('t.value')} AS value, {fmt('f.expected')} AS expected, "
        "t.region || ' ' || t.variable || ' is ' || " + fmt("t.value") + " || ' but its regions sum to ' || "
        + fmt("f.expected") + " || " + _diff_pct("t.value", "f.expected") + " AS message, "
        "'regions: ' || f.detail AS hint FROM f JOIN checked t ON t.model = f.model AND t.scenario = f.scenario "
        "AND t.region = f.parent AND t.variable = f.variable AND t.year = f.year "
        f"WHERE f.rule_kind = 'sum' AND abs(t.value - f.expected) > greatest({ctx.tol_rel} * abs(f.expected), "
        f"{ctx.tol_abs})",
        full + "SELECT 'sum-of-regions' AS rule, coalesce(t.path, f.path) AS path, t.sheet, "
        "coalesce(t.line, f.line) AS line, f.model, f.scenario, f.parent AS region, f.variable, "
        "v.unit, f.year, " + fmt("f.expected") + " AS value, '0' AS expected, "
        "'the regions of ' || f.parent || ' must net to zero for ' || f.variable || ', but sum to ' || "
        + fmt("f.expected") + " AS message, 'regions: ' || f.detail AS hint "
        "FROM f JOIN c_variables v ON f.variable = v.variable LEFT JOIN checked t ON t.model = f.model "
        "AND t.scenario = f.scenario AND t.region = f.parent AND t.variable = f.variable AND t.year = f.year "
        f"WHERE f.rule_kind = 'zero' AND abs(f.expected) > greatest({ctx.tol_rel} * f.gross, {ctx.tol_abs})",
    ]
