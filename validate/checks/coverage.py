"""Coverage: required variables reported for every scenario at the base year and each milestone."""

from __future__ import annotations

from milepost.validate.checks.context import Context, sql_str


def check_missing_required(ctx: Context) -> list[str]:
    """missing-required: no usable row for a required variable, scenario, required region and key year."""
    c = ctx.contract
    years = sorted({y for y in (c.base_year, *c.milestones) if c.first_year <= y <= c.last_year})
    regions = [r for r in c.required_regions if c.is_region(r)]
    if not years or not regions:
        return []
    year_list = ", ".join(str(y) for y in years)
    region_list = ", ".join(sql_str(r) for r in regions)
    return [
        "WITH s AS (SELECT model, scenario, min(path) AS path FROM obs WHERE trim(model) <> '' "
        "AND trim(scenario) <> '' GROUP BY ALL), "
        f"y AS (SELECT unnest([{year_list}]) AS year), g AS (SELECT unnest([{region_list}]) AS region) "
        "SELECT 'missing-required' AS rule, s.path, s.model, s.scenario, g.region, v.variable, v.unit, y.year, "
        "'a value of ' || v.variable || ' in ' || v.unit AS expected, "
        "'required ' || v.variable || ' is missing for ' || s.model || ' / ' || s.scenario || ' in ' || g.region "
        "|| ' at ' || y.year AS message, "
        "'Add a row for ' || v.variable || ', ' || g.region || ', ' || y.year || ' (or fix the row that has "
        "another finding).' AS hint "
        "FROM s CROSS JOIN (SELECT * FROM c_variables WHERE required) v CROSS JOIN y CROSS JOIN g "
        "WHERE NOT EXISTS (SELECT 1 FROM checked k WHERE k.model = s.model AND k.scenario = s.scenario "
        "AND k.region = g.region AND k.variable = v.variable AND k.year = y.year)"
    ]
