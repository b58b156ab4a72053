"""Step 3: what the harmonisation tells its user: the findings and the per-series method table.

Tables written (TEMP): `harmonise_findings` (the columns of `milepost.validate.findings.FINDING_COLUMNS`) and
`harmonise_methods` (one row per series: the method used, its factor or offset, the convergence year, a note).
"""

from __future__ import annotations

import duckdb

from milepost.schema.contract import Contract
from milepost.validate.checks.context import fmt
from milepost.validate.findings import FINDING_COLUMNS, FINDING_TYPES
from milepost.validate.runner import effective_severity

METHOD_COLUMNS = (
    "model",
    "scenario",
    "region",
    "variable",
    "unit",
    "method",
    "requested",
    "factor",
    "offset_value",
    "convergence_year",
    "base_value",
    "reference_value",
    "note",
)

_WHERE = "s.variable || ' in ' || s.region"


def _findings_sql(contract: Contract) -> list[str]:
    t0 = int(contract.base_year)
    sev = effective_severity(contract)
    row = "i.path, i.sheet, s.line, s.model, s.scenario, s.region, s.variable, s.unit"
    src = "FROM h_series s JOIN c_inputs i ON i.src = s.src"
    return [
        f"SELECT 'harmonise-no-base-year' AS rule, '{sev['harmonise-no-base-year']}' AS severity, {row}, "  # noqa: S608 - fragments of this package; numbers and severities from the contract
        f"{t0} AS year, NULL AS value, {fmt('s.h')} AS expected, "
        f"{_WHERE} || ' has a reference value for {t0} but no value in {t0}: it cannot be harmonised and is left "
        "out of the harmonised data' AS message, "
        f"'Report a value for {t0}; totals summed from this series are left out too.' AS hint "
        f"{src} WHERE s.status = 'no-base-year'",
        f"SELECT 'harmonise-zero-base' AS rule, '{sev['harmonise-zero-base']}' AS severity, {row}, {t0} AS year, "
        f"{fmt('s.m0')} AS value, {fmt('s.h')} AS expected, "
        f"{_WHERE} || ' is 0 in {t0}: the ratio to the reference is undefined, so ' || s.method || "
        "' was used instead of ' || s.requested AS message, "
        "'To make the choice explicit, set harmonise = \"' || s.method || '\" for ' || s.variable || "
        "' in the contract.' AS hint "
        f"{src} WHERE s.status = 'direct' AND s.fallback = 'zero-base'",
        f"SELECT 'harmonise-sign-differs' AS rule, '{sev['harmonise-sign-differs']}' AS severity, {row}, "
        f"{t0} AS year, {fmt('s.m0')} AS value, {fmt('s.h')} AS expected, "
        f"{_WHERE} || ' is ' || {fmt('s.m0')} || ' in {t0} but the reference is ' || {fmt('s.h')} || "
        "': a ratio would turn the pathway upside down, so ' || s.method || ' was used instead of ' || "
        "s.requested AS message, NULL AS hint "
        f"{src} WHERE s.status = 'direct' AND s.fallback = 'sign-differs'",
        f"SELECT 'harmonise-partial-total' AS rule, '{sev['harmonise-partial-total']}' AS severity, {row}, "  # noqa: S608 - fragments of this package; numbers and severities from the contract
        f"NULL AS year, NULL AS value, NULL AS expected, "
        f"CASE WHEN s.status = 'rebuilt-partial' THEN {_WHERE} || ' was rebuilt from its ' || s.dim || "
        "', but not all of them were harmonised (' || s.not_harmonised || '): the total is harmonised in part' "
        f"ELSE {_WHERE} || ' is left out of the harmonised data: its harmonised parts cannot be summed again, "
        "because some are missing or could not be harmonised (' || s.not_harmonised || ')' END AS message, "
        "'Parts without a reference value stay as reported; give them reference values to harmonise the whole "
        "total.' AS hint "
        f"{src} WHERE s.status IN ('rebuilt-partial', 'not-rebuilt')",
        f"SELECT 'harmonise-parts-left-out' AS rule, '{sev['harmonise-parts-left-out']}' AS severity, {row}, "  # noqa: S608 - fragments of this package; numbers and severities from the contract
        "NULL AS year, NULL AS value, NULL AS expected, "
        f"{_WHERE} || ' was harmonised (' || CASE WHEN s.status = 'direct' THEN s.method "
        "ELSE 'from its ' || s.dim END || '); these parts have no reference value of their own and are left out "
        "of the harmonised data, so that its sums still hold: ' || x.parts AS message, NULL AS hint "
        f"{src} JOIN (SELECT model, scenario, above_region, above_variable, "
        "string_agg(DISTINCT CASE WHEN region = above_region THEN variable::VARCHAR ELSE region::VARCHAR END, "
        "', ' ORDER BY CASE WHEN region = above_region THEN variable::VARCHAR ELSE region::VARCHAR END) AS parts "
        "FROM h_left GROUP BY ALL) x ON x.model = s.model AND x.scenario = s.scenario "
        "AND x.above_region = s.region AND x.above_variable = s.variable "
        "WHERE s.status IN ('direct', 'rebuilt')",
    ]


def findings_table(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """harmonise_findings: one row per thing the user should know, in the shape every report reads."""
    columns = ", ".join(f"{c} {FINDING_TYPES.get(c, 'VARCHAR')}" for c in FINDING_COLUMNS)
    con.execute(f"CREATE OR REPLACE TEMP TABLE harmonise_findings ({columns})")
    for sql in _findings_sql(contract):
        con.execute(f"INSERT INTO harmonise_findings BY NAME ({sql})")


def methods_table(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """harmonise_methods: for every series, the method used and why, in plain values (no ENUM types)."""
    t0 = int(contract.base_year)
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE harmonise_methods AS
        SELECT s.model::VARCHAR AS model, s.scenario::VARCHAR AS scenario, s.region::VARCHAR AS region,
               s.variable::VARCHAR AS variable, s.unit::VARCHAR AS unit,
               CASE s.status WHEN 'direct' THEN s.method
                             WHEN 'rebuilt' THEN 'from-' || s.dim
                             WHEN 'rebuilt-partial' THEN 'from-' || s.dim
                             WHEN 'unchanged' THEN 'unchanged'
                             ELSE 'left-out' END AS method,
               s.requested,
               CASE WHEN s.status = 'direct' THEN s.factor END AS factor,
               CASE WHEN s.status = 'direct' THEN s.offset_value END AS offset_value,
               CASE WHEN s.status = 'direct' THEN s.converge_year END AS convergence_year,
               s.m0 AS base_value, s.h AS reference_value,
               CASE s.status
                 WHEN 'direct' THEN CASE s.fallback
                   WHEN 'zero-base' THEN 'base-year value is 0: ' || s.method || ' instead of ' || s.requested
                   WHEN 'sign-differs' THEN 'base-year value and reference differ in sign: ' || s.method
                        || ' instead of ' || s.requested
                   ELSE 'harmonised to the reference value' END
                 WHEN 'rebuilt' THEN 'sum of its harmonised ' || s.dim
                 WHEN 'rebuilt-partial' THEN 'sum of its ' || s.dim || '; not harmonised: ' || s.not_harmonised
                 WHEN 'unchanged' THEN CASE WHEN s.h IS NULL THEN 'no reference value for {t0}'
                                            ELSE 'the contract does not harmonise this variable' END
                 WHEN 'no-base-year' THEN 'no value in {t0}: left out'
                 WHEN 'below-harmonised' THEN 'below ' || s.above || ', which is harmonised: left out'
                 WHEN 'not-rebuilt' THEN 'its parts cannot be summed again (' || s.not_harmonised || '): left out'
               END AS note,
               s.status
        FROM h_series s""")  # noqa: S608 - fragments of this package; numbers and severities from the contract
