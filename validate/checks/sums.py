"""Sums: a variable against the weighted sum of its parts, and a region against the sum of its parts.

A sum is checked only where every part is reported: a missing part is a coverage question, not a wrong sum.
The tolerance is |reported - expected| <= max(sum_relative * |expected|, sum_absolute), in the total's unit.
Sums are compared as numbers first; the text listing the parts is built only for the sums that fail.
"""

from __future__ import annotations

from milepost.validate.checks.context import Context, fmt


def _diff_pct(reported: str, expected: str) -> str:
    return (
        f"CASE WHEN {expected} = 0 THEN '' ELSE ' (' || printf('%+.2f', ({reported} - {expected}) "
        f"/ abs({expected}) * 100) || ' %)' END"
    )


def check_sum_of_parts(ctx: Context) -> list[str]:
    """sum-of-parts: a total that differs from the weighted sum of its (complete) parts beyond the tolerance."""
    # One join and one group: each row meets the totals it is a part of and, as a total, its own group.
    roles = (
        "SELECT total, part AS variable, factor, false AS is_total FROM e_parts UNION ALL "
        "SELECT DISTINCT total, total AS variable, 1.0, true FROM e_parts"
    )
    failing = (
        "WITH p AS (SELECT c.model, c.scenario, c.region, c.year, r.total, "  # noqa: S608 - names from the code; contract text via validate.sql
        "sum(c.value * r.factor) FILTER (WHERE NOT r.is_total) AS expected, count(*) FILTER (WHERE NOT r.is_total) "
        "AS n, any_value(c.value) FILTER (WHERE r.is_total) AS reported, any_value(c.src) FILTER (WHERE r.is_total) "
        "AS src, any_value(c.line) FILTER (WHERE r.is_total) AS line, any_value(c.unit) FILTER (WHERE r.is_total) "
        f"AS unit FROM checked c JOIN ({roles}) r ON c.variable = r.variable GROUP BY ALL), "
        "bad AS MATERIALIZED (SELECT p.* FROM p JOIN c_part_counts k ON p.total = k.total AND p.n = k.n "
        f"WHERE p.reported IS NOT NULL AND abs(p.reported - p.expected) > "
        f"greatest({ctx.tol_rel} * abs(p.expected), {ctx.tol_abs})), "
        "detail AS (SELECT b.model, b.scenario, b.region, b.year, b.total, "
        "string_agg(c.variable || ' = ' || " + fmt("c.value") + ", ', ' ORDER BY c.variable) AS parts "
        "FROM bad b JOIN e_parts cp ON cp.total = b.total JOIN checked c ON c.model = b.model "
        "AND c.scenario = b.scenario AND c.region = b.region AND c.year = b.year AND c.variable = cp.part "
        "GROUP BY ALL) "
    )
    return [
        failing + "SELECT 'sum-of-parts' AS rule, 'value' AS column_name, "
        "i.path, i.sheet, t.line, t.model, t.scenario, t.region, "
        f"t.total AS variable, t.unit, t.year, {fmt('t.reported')} AS value, {fmt('t.expected')} AS expected, "
        "t.total || ' in ' || t.scenario || ', ' || t.region || ', ' || t.year || ' is ' || "
        + fmt("t.reported")
        + " || ' but its parts sum to ' || "
        + fmt("t.expected")
        + " || "
        + _diff_pct("t.reported", "t.expected")
        + " AS message, 'parts: ' || d.parts AS hint "
        "FROM bad t JOIN detail d USING (model, scenario, region, year, total) JOIN c_inputs i ON i.src = t.src"
    ]


def check_sum_of_regions(ctx: Context) -> list[str]:
    """sum-of-regions: a region unequal to the sum of its parts, or regions of a net-zero variable not netting out."""
    roles = (
        "SELECT parent, part AS region, false AS is_total FROM e_region_parts UNION ALL "
        "SELECT DISTINCT parent, parent AS region, true FROM e_region_parts"
    )
    grouped = (
        "SELECT c.model, c.scenario, r.parent, c.variable, c.year, any_value(v.regions) AS rule_kind, "  # noqa: S608 - names from the code; contract text via validate.sql
        "any_value(c.unit) AS unit, "
        "sum(c.value) FILTER (WHERE NOT r.is_total) AS expected, "
        "sum(abs(c.value)) FILTER (WHERE NOT r.is_total) AS gross, count(*) FILTER (WHERE NOT r.is_total) AS n, "
        "any_value(c.value) FILTER (WHERE r.is_total) AS reported, "
        "coalesce(any_value(c.src) FILTER (WHERE r.is_total), min(c.src)) AS src, "
        "coalesce(any_value(c.line) FILTER (WHERE r.is_total), min(c.line)) AS line "
        f"FROM checked c JOIN ({roles}) r ON c.region = r.region "
        "JOIN e_variables v ON c.variable = v.variable WHERE v.regions IN ('sum', 'zero') GROUP BY ALL"
    )
    bad = (
        f"WITH f AS ({grouped}), bad AS MATERIALIZED (SELECT f.* FROM f "  # noqa: S608 - names from the code; contract text via validate.sql
        "JOIN c_region_counts k ON f.parent = k.parent AND f.n = k.n "
        f"WHERE (f.rule_kind = 'sum' AND f.reported IS NOT NULL AND abs(f.reported - f.expected) > "
        f"greatest({ctx.tol_rel} * abs(f.expected), {ctx.tol_abs})) OR (f.rule_kind = 'zero' AND "
        f"abs(f.expected) > greatest({ctx.tol_rel} * f.gross, {ctx.tol_abs}))), "
        "detail AS (SELECT b.model, b.scenario, b.parent, b.variable, b.year, "
        "string_agg(c.region || ' = ' || " + fmt("c.value") + ", ', ' ORDER BY c.region) AS regions "
        "FROM bad b JOIN e_region_parts rp ON rp.parent = b.parent JOIN checked c ON c.model = b.model "
        "AND c.scenario = b.scenario AND c.region = rp.part AND c.variable = b.variable AND c.year = b.year "
        "GROUP BY ALL) "
    )
    return [
        bad + "SELECT 'sum-of-regions' AS rule, 'value' AS column_name, i.path, i.sheet, b.line, b.model, "
        "b.scenario, b.parent AS region, b.variable, b.unit, b.year, "
        "CASE WHEN b.rule_kind = 'sum' THEN " + fmt("b.reported") + " ELSE " + fmt("b.expected") + " END AS value, "
        "CASE WHEN b.rule_kind = 'sum' THEN " + fmt("b.expected") + " ELSE '0' END AS expected, "
        "CASE WHEN b.rule_kind = 'sum' THEN b.parent || ' ' || b.variable || ' in ' || b.scenario || ', ' "
        "|| b.year || ' is ' || "
        + fmt("b.reported")
        + " || ' but its regions sum to ' || "
        + fmt("b.expected")
        + " || "
        + _diff_pct("b.reported", "b.expected")
        + " ELSE 'the regions of ' || b.parent || ' must net to zero for ' || b.variable || ' in ' || b.scenario "
        "|| ', ' || b.year || ', but sum to ' || "
        + fmt("b.expected")
        + " END AS message, 'regions: ' || d.regions AS hint "
        "FROM bad b JOIN detail d USING (model, scenario, parent, variable, year) "
        "JOIN c_inputs i ON i.src = b.src"
    ]
