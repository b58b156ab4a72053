"""Check families: one module each; a check is a small function that returns SQL selecting finding rows.

Every check takes the `Context` of a run and returns a list of SQL SELECT statements whose columns are named like
`milepost.validate.findings.FINDING_COLUMNS` (columns that do not apply may be left out). The runner inserts them
BY NAME into the TEMP table `findings`, so a check never loops over rows in Python.
"""

from __future__ import annotations

from collections.abc import Callable

from milepost.validate.checks import (
    coverage,
    duplicates,
    names,
    reference,
    scenarios,
    structure,
    sums,
    units,
    values,
)
from milepost.validate.checks.context import Context

Check = Callable[[Context], list[str]]

# Order matters only for reading the report: file problems first, then cells, then the table as a whole.
ROW_CHECKS: tuple[Check, ...] = (
    structure.check_missing_cells,
    structure.check_bad_year,
    structure.check_bad_value,
    names.check_unknown_region,
    names.check_unknown_variable,
    names.check_control_characters,
    units.check_units,
)
TABLE_CHECKS: tuple[Check, ...] = (
    duplicates.check_duplicates,
    values.check_sign,
    sums.check_sum_of_parts,
    sums.check_sum_of_regions,
    coverage.check_missing_required,
    reference.check_base_year,
    values.check_bounds,
    scenarios.check_no_data,
    scenarios.check_unknown_reference,
    scenarios.check_scenario_without_data,
    scenarios.check_scenario_not_listed,
    scenarios.check_missing_reference,
    scenarios.check_reference_cycle,
)

__all__ = ["ROW_CHECKS", "TABLE_CHECKS", "Check", "Context"]
