"""Scenarios: the scenarios table against the data (listed without rows, rows not listed), references that name
no scenario, that are missing where the contract requires them, or that go round in a circle; and a submission
without any data table.

The runner puts the scenarios tables given into the TEMP table `s_listed` (path, sheet, line, model, scenario,
reference) and, at ingest, the database's current scenarios into `s_known` (model, scenario, reference), so a
partial revision may name a reference stored before.
"""

from __future__ import annotations

from milepost.validate.checks.context import Context
from milepost.validate.reference_cycles import cyclic_scenarios

_WHERE = "l.path, l.sheet, l.line, l.model, l.scenario"
# the data scenarios of a model, for `expected` (the first few, sorted)
_DATA_SCENARIOS = (
    "(SELECT array_to_string(list_sort(list_distinct(list(c.scenario)))[1:6], ', ') FROM combos c "
    "WHERE c.model = l.model AND c.scenario IS NOT NULL)"
)


def _tables_given(ctx: Context) -> bool:
    return any(i.kind == "scenarios" for i in ctx.inputs)


def check_unknown_reference(ctx: Context) -> list[str]:
    """unknown-reference: a `reference` that names no scenario of the submission (nor, at ingest, a stored one)."""
    if not _tables_given(ctx):
        return []
    return [
        f"SELECT 'unknown-reference' AS rule, {_WHERE}, 'reference' AS column_name, l.reference AS value, "  # noqa: S608 - names from the code
        f"{_DATA_SCENARIOS} AS expected, "
        "'reference ' || l.reference || ' of ' || l.model || ' / ' || l.scenario || ' names no scenario of this "
        "submission: its losses and growth reductions stay empty until that scenario is ingested' AS message, "
        "'Check the name: it must be one of the model''s scenarios (the no-policy run it is measured against), "
        "in this submission or one ingested before.' AS hint "
        "FROM s_listed l WHERE l.reference IS NOT NULL AND l.reference <> l.scenario "
        "AND NOT EXISTS (SELECT 1 FROM combos c WHERE c.model = l.model AND c.scenario = l.reference) "
        "AND NOT EXISTS (SELECT 1 FROM s_known k WHERE k.model = l.model AND k.scenario = l.reference)"
    ]


def check_scenario_without_data(ctx: Context) -> list[str]:
    """scenario-without-data: a scenario the scenarios table lists that has no data row."""
    if not _tables_given(ctx) or not any(i.kind == "data" for i in ctx.inputs):
        return []  # without any data table, no-data-rows says so once
    return [
        f"SELECT 'scenario-without-data' AS rule, {_WHERE}, 'scenario' AS column_name, l.scenario AS value, "  # noqa: S608 - names from the code
        f"{_DATA_SCENARIOS} AS expected, "
        "'scenario ' || l.model || ' / ' || l.scenario || ' is listed in the scenarios table but has no data rows' "
        "AS message, 'Add its data, correct its name, or leave it out of the scenarios table.' AS hint "
        "FROM s_listed l WHERE NOT EXISTS (SELECT 1 FROM combos c WHERE c.model = l.model AND c.scenario = l.scenario) "
        # a scenario stored before (at ingest) has its data in the database
        "AND NOT EXISTS (SELECT 1 FROM s_known k WHERE k.model = l.model AND k.scenario = l.scenario)"
    ]


def check_scenario_not_listed(ctx: Context) -> list[str]:
    """scenario-not-listed: data for a scenario the scenarios table does not list (only where a table is given)."""
    if not _tables_given(ctx):
        return []
    unlisted = (
        "SELECT DISTINCT model, scenario FROM combos c WHERE trim(c.model) <> '' AND trim(c.scenario) <> '' "
        "AND NOT EXISTS (SELECT 1 FROM s_listed l WHERE l.model = c.model AND l.scenario = c.scenario)"
    )
    if not ctx.con.execute(f"SELECT count(*) FROM ({unlisted})").fetchall()[0][0]:  # noqa: S608 - names from the code
        return []
    listed = "(SELECT array_to_string(list_sort(list(scenario))[1:6], ', ') FROM s_listed)"
    return [
        "SELECT 'scenario-not-listed' AS rule, any_value(o.path) AS path, any_value(o.sheet) AS sheet, "  # noqa: S608 - names from the code
        "min(o.line) AS line, o.model, o.scenario, 'scenario' AS column_name, o.scenario AS value, "
        f"{listed} AS expected, "
        "'scenario ' || o.model || ' / ' || o.scenario || ' has data but is not listed in the scenarios table "
        "(first on this line)' AS message, "
        "'Add a row for it to the scenarios table (with its reference), or correct the scenario name.' AS hint "
        f"FROM obs o SEMI JOIN ({unlisted}) u ON u.model = o.model AND u.scenario = o.scenario "
        "GROUP BY o.src, o.model, o.scenario"
    ]


def check_missing_reference(ctx: Context) -> list[str]:
    """missing-reference: the contract requires a reference for cost indicators ([costs] reference_required), and a
    scenario that is no scenario's reference names none."""
    if not ctx.contract.reference_required:
        return []
    scenarios = (
        "SELECT l.path, l.sheet, l.line, l.model, l.scenario, l.reference FROM s_listed l UNION ALL "
        "SELECT any_value(o.path), any_value(o.sheet), min(o.line), o.model, o.scenario, NULL FROM obs o "
        "WHERE trim(o.model) <> '' AND trim(o.scenario) <> '' AND NOT EXISTS (SELECT 1 FROM s_listed l "
        "WHERE l.model = o.model AND l.scenario = o.scenario) GROUP BY o.src, o.model, o.scenario"
    )
    named = "SELECT model, reference FROM s_listed UNION ALL SELECT model, reference FROM s_known"
    return [
        f"SELECT 'missing-reference' AS rule, {_WHERE}, 'reference' AS column_name, "  # noqa: S608 - names from the code
        "'a reference scenario' AS expected, "
        "'scenario ' || l.model || ' / ' || l.scenario || ' names no reference scenario, which this contract "
        "requires for its cost indicators' AS message, "
        "'Give a scenarios table with a reference column naming the model''s no-policy scenario "
        "(the contract sets [costs] reference_required).' AS hint "
        f"FROM ({scenarios}) l WHERE l.reference IS NULL AND NOT EXISTS (SELECT 1 FROM ({named}) n "
        "WHERE n.model = l.model AND n.reference = l.scenario)"
    ]


def check_reference_cycle(ctx: Context) -> list[str]:
    """reference-cycle: a scenario that names itself as its reference, or whose references lead back to it."""
    if not _tables_given(ctx):
        return []
    # the listed references, and the stored ones of scenarios this submission does not list again
    links = (
        "SELECT model, scenario, reference FROM s_listed WHERE reference IS NOT NULL UNION ALL "
        "SELECT model, scenario, reference FROM s_known k WHERE reference IS NOT NULL AND NOT EXISTS "
        "(SELECT 1 FROM s_listed l WHERE l.model = k.model AND l.scenario = k.scenario)"
    )
    cyclic = cyclic_scenarios(links)
    return [
        f"SELECT 'reference-cycle' AS rule, {_WHERE}, 'reference' AS column_name, l.reference AS value, "  # noqa: S608 - names from the code
        "'another scenario (the no-policy run)' AS expected, "
        "CASE WHEN l.reference = l.scenario THEN 'scenario ' || l.model || ' / ' || l.scenario || ' names itself "
        "as its reference' ELSE 'the references of ' || l.model || ' / ' || l.scenario || ' lead back to it (' "
        "|| c.steps || ' steps, via ' || l.reference || ')' END || ': no cost indicator is computed for it' "
        "AS message, 'Name the no-policy scenario the policy scenario is measured against; a reference "
        "scenario itself names none.' AS hint "
        f"FROM s_listed l JOIN ({cyclic}) c ON c.model = l.model AND c.scenario = l.scenario"
    ]


def check_no_data(ctx: Context) -> list[str]:
    """no-data-rows: the submission holds no data table at all (only scenarios tables)."""
    if any(i.kind in ("data", "unreadable") for i in ctx.inputs):
        return []  # a data file without rows has its own findings (empty-table, missing-column, unreadable-file)
    return [
        "SELECT 'no-data-rows' AS rule, any_value(path) AS path, 'at least one data table' AS expected, "
        "'the submission holds no data rows, only scenarios tables (' || count(*) || ')' AS message, "
        "'Give the data table (model, scenario, region, variable, unit, year, value) with the scenarios table.' "
        "AS hint FROM c_inputs"
    ]
