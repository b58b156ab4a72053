"""Coverage: required variables reported for every scenario at the base year and each milestone."""

from __future__ import annotations

from milepost.validate.checks.context import Context
from milepost.validate.sql import literal


def check_missing_required(ctx: Context) -> list[str]:
    """missing-required: no usable row for a required variable, scenario, required region and key year."""
    c = ctx.contract
    years = sorted({y for y in (c.base_year, *c.milestones) if c.first_year <= y <= c.last_year})
    regions = [r for r in c.required_regions if c.is_region(r)]
    if not years or not regions:
        return []
    year_list = ", ".join(str(y) for y in years)
    region_list = ", ".join(literal(r) for r in regions)
    return [
        "WITH s AS (SELECT model, scenario, min(src) AS src FROM combos WHERE trim(model) <> '' "  # noqa: S608 - names from the code; contract text via validate.sql
        "AND trim(scenario) <> '' GROUP BY ALL), "
        f"y AS (SELECT unnest([{year_list}]) AS year), g AS (SELECT unnest([{region_list}]) AS region), "
        "need AS (SELECT s.*, v.variable, v.unit, y.year, g.region FROM s CROSS JOIN "
        "(SELECT * FROM c_variables WHERE required) v CROSS JOIN y CROSS JOIN g), "
        "have AS (SELECT DISTINCT model, scenario, region, variable, year FROM checked "
        f"WHERE year IN ({year_list}) AND region IN ({region_list}) "
        "AND variable IN (SELECT variable FROM c_variables WHERE required)) "
        "SELECT 'missing-required' AS rule, i.path, n.model, n.scenario, n.region, n.variable, n.unit, n.year, "
        "'a value of ' || n.variable || ' in ' || n.unit AS expected, "
        "'required ' || n.variable || ' is missing for ' || n.model || ' / ' || n.scenario || ' in ' || n.region "
        "|| ' at ' || n.year AS message, "
        "'Add a row for ' || n.variable || ', ' || n.region || ', ' || n.year || ' (or fix the row that has "
        "another finding).' AS hint "
        "FROM need n JOIN c_inputs i ON i.src = n.src "
        "ANTI JOIN have h ON h.model = n.model AND h.scenario = n.scenario AND h.region = n.region "
        "AND h.variable = n.variable AND h.year = n.year"
    ]
