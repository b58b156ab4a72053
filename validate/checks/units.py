"""Units: a unit that does not convert into the contract's (error), or one that does and was converted (warning).

Units are compared once per distinct (variable, unit) pair, not per row; the resulting `unit_map` table gives the
factor the runner multiplies values by when it builds `checked`.
"""

from __future__ import annotations

from milepost.schema.units import CARBON_CONTEXT, NITROGEN_CONTEXT, LazyUnits, UnitError, normalise, scale_factor
from milepost.validate.checks.context import Context
from milepost.validate.sql import insert_rows

# contract options ([units] in contract.toml) that make a unit of another species convert
_OPTIONS = (
    (CARBON_CONTEXT, "carbon mass (C) into CO2"),
    (NITROGEN_CONTEXT, "the nitrogen in N2O (N2O-N) into N2O"),
)

_ROW = "o.path, o.sheet, o.line, o.model, o.scenario, o.region, o.variable, o.unit, o.year"


def _pairs(ctx: Context) -> list[tuple[str, str]]:
    if ctx.unit_pairs is None:
        ctx.unit_pairs = ctx.con.execute(
            "SELECT DISTINCT o.variable, o.unit FROM combos o JOIN c_variables v ON o.variable = v.variable "
            "WHERE o.unit IS NOT NULL AND trim(o.unit) <> ''"
        ).fetchall()
    return ctx.unit_pairs


def warm_registry(ctx: Context) -> None:
    """Start building the contract's pint registry in the background when some unit will need it (one that is
    neither the contract's nor a tonne prefix away): its 0.3 s then overlaps the checks that run before this one."""
    units = ctx.contract.units
    if not isinstance(units, LazyUnits):
        return
    variables = ctx.contract.variables
    if any(scale_factor(u, variables[v].unit) is None for v, u in _pairs(ctx)):
        units.warm_in_background()


def build_unit_map(ctx: Context) -> bool:
    """TEMP table unit_map(variable, unit, factor, status, target, why, allows): status same|spelling|converted|wrong;
    `allows` names the contract option under which a wrong unit would convert. Returns whether any unit differs."""
    pairs = _pairs(ctx)
    units = ctx.contract.units
    rows: list[tuple[str, str, float | None, str, str, str | None, str | None]] = []
    for variable, unit in pairs:
        target = ctx.contract.variables[variable].unit
        if unit == target:
            rows.append((variable, unit, 1.0, "same", target, None, None))
            continue
        # kt against Mt, or a spelling of the same unit: known without importing pint (0.3 s with its registry)
        factor = scale_factor(unit, target)
        if factor is not None:
            same = normalise(unit) == normalise(target)
            rows.append((variable, unit, factor, "spelling" if same else "converted", target, None, None))
            continue
        try:
            factor = units.factor(unit, target)
        except UnitError as e:
            rows.append((variable, unit, None, "wrong", target, str(e), _allowing_option(ctx, unit, target)))
            continue
        spelling = normalise(unit) == normalise(target) or (
            abs(factor - 1.0) < 1e-12 and units.parse(unit) == units.parse(target)
        )
        rows.append((variable, unit, factor, "spelling" if spelling else "converted", target, None, None))
    ctx.con.execute(
        "CREATE OR REPLACE TEMP TABLE unit_map (variable VARCHAR, unit VARCHAR, factor DOUBLE, "
        "status VARCHAR, target VARCHAR, why VARCHAR, allows VARCHAR)"
    )
    columns = [("variable", "VARCHAR"), ("unit", "VARCHAR"), ("factor", "DOUBLE"), ("status", "VARCHAR")]
    columns += [("target", "VARCHAR"), ("why", "VARCHAR"), ("allows", "VARCHAR")]
    insert_rows(ctx.con, "unit_map", columns, rows)
    return any(r[3] != "same" for r in rows)


def _allowing_option(ctx: Context, unit: str, target: str) -> str | None:
    """The hint text for a contract option that is off here and under which `unit` would convert, else None."""
    c = ctx.contract
    for name, what in _OPTIONS:
        if getattr(c, name):
            continue
        try:
            c.units.factor_if(name, unit, target)
        except UnitError:
            continue
        return (
            f"; or, for the contract to accept it, set `{name} = true` under [units] in contract.toml (converts {what})"
        )
    return None


def check_units(ctx: Context) -> list[str]:
    """wrong-unit (does not convert) and converted-unit (converts; a note when only the spelling differs)."""
    if not build_unit_map(ctx):
        return []
    return [
        f"SELECT 'wrong-unit' AS rule, 'unit' AS column_name, {_ROW}, o.unit AS value, m.target AS expected, "  # noqa: S608 - names from the code; contract text via validate.sql
        "'unit ' || o.unit || ' does not convert to ' || m.target || ' (' || o.variable || ')' AS message, "
        "'Report ' || o.variable || ' in ' || m.target || coalesce(m.allows, '') || '.' AS hint "
        "FROM obs o JOIN unit_map m USING (variable, unit) WHERE m.status = 'wrong'",
        # One finding per file and (variable, unit): a file reported in Gt instead of Mt is one fact, not 10,000.
        "SELECT 'converted-unit' AS rule, 'unit' AS column_name, "
        "CASE WHEN any_value(m.status) = 'spelling' THEN 'note' END AS severity, "
        "o.path, any_value(o.sheet) AS sheet, min(o.line) AS line, o.variable, o.unit, o.unit AS value, "
        "any_value(m.target) AS expected, "
        "CASE WHEN any_value(m.status) = 'spelling' THEN 'unit ' || o.unit || ' read as ' || any_value(m.target) "
        "ELSE 'unit ' || o.unit || ' converted to ' || any_value(m.target) || ' (factor ' "
        "|| printf('%.6g', any_value(m.factor)) || ')' END || ' in ' || count(*) "
        "|| CASE WHEN count(*) = 1 THEN ' row' ELSE ' rows' END || ' from line ' "
        "|| min(o.line) AS message, 'Report ' || o.variable || ' in ' || any_value(m.target) "
        "|| ' to avoid the conversion.' AS hint "
        "FROM obs o JOIN unit_map m USING (variable, unit) WHERE m.status IN ('spelling', 'converted') "
        "GROUP BY o.path, o.variable, o.unit",
    ]
