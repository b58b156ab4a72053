"""Emission drivers: the Kaya factors and the additive LMDI-I decomposition of the change in fossil CO2.

Kaya identity, per scenario, region and year: C = P x (G/P) x (E/G) x (C/E), with P population, G GDP (PPP), E
primary energy and C fossil CO2 (emissions.co2.fossil).

gdp_per_capita         G/P in thousand USD_2015 per person (billion USD_2015/yr over million people)
energy_intensity       E/G in MJ per USD_2015 (EJ/yr over billion USD_2015/yr, x 1000)
carbon_intensity       C/E in g CO2 per MJ (Mt CO2/yr over EJ/yr)
lmdi_population        the additive LMDI-I effects (Ang 2005, Energy Policy 33:867-871) of each factor on the
lmdi_gdp_per_capita    change of C from the base year to each milestone, in Mt CO2 (per year, as C):
lmdi_energy_intensity  effect_k = L(C_T, C_0) x ln(x_k,T / x_k,0), L(a, b) = (a - b) / (ln a - ln b), L(a, a) = a.
lmdi_carbon_intensity  The four effects sum to C_T - C_0 (a perfect decomposition).

Zero values take the analytical limits (Ang & Liu 2007; Wood & Lenzen 2006, Energy Policy 34:1326-1331): when C
is zero at one end, the factor that is zero there (carbon intensity, or energy intensity when primary energy is
zero too) carries the whole change and the others none; zero at both ends gives four zero effects. Population or
GDP at or below zero, negative energy or CO2, or CO2 without energy have no decomposition: rows with an empty
value and a note. Inputs are read in their canonical units (converted from the contract's units).

A scenario and region that lacks an input series altogether gets no row of the kinds needing it, but a row in
the gaps table (`gaps_sql`) that says which input is missing: never a zero.
These are model projections, not forecasts.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import duckdb

from milepost.schema.contract import Contract
from milepost.validate.sql import literal
from milepost.validate.store.indicators.base import Kind, Tables

PREFIX = "_milepost_drivers_"


@dataclass(frozen=True)
class Role:
    """One input of the driver and burden kinds: its column in the inputs table, contract variable, unit."""

    column: str
    variable: str
    unit: str


ROLES = (
    Role("pop", "population", "million"),
    Role("gdp", "gdp.ppp", "billion USD_2015/yr"),
    Role("energy", "energy.primary", "EJ/yr"),
    Role("co2", "emissions.co2.fossil", "Mt CO2/yr"),
    Role("ghg", "emissions.ghg", "Mt CO2e/yr"),
    Role("price", "price.carbon", "USD_2015/t CO2"),
    Role("cost", "cost.abatement", "billion USD_2015/yr"),
)
ROLE = {r.column: r for r in ROLES}
INPUT_KIND = "_driver_input"  # selection rows that only make `prepare` read an input variable
LMDI = {
    "lmdi_population": "pop",
    "lmdi_gdp_per_capita": "gpp",
    "lmdi_energy_intensity": "epg",
    "lmdi_carbon_intensity": "cpe",
}
# kind -> (the variable written in its rows, the inputs it needs)
NEEDS: dict[str, tuple[str, tuple[str, ...]]] = {
    "gdp_per_capita": ("gdp.ppp", ("pop", "gdp")),
    "energy_intensity": ("energy.primary", ("gdp", "energy")),
    "carbon_intensity": ("emissions.co2.fossil", ("energy", "co2")),
    **{k: ("emissions.co2.fossil", ("pop", "gdp", "energy", "co2")) for k in LMDI},
}


def input_rows(contract: Contract) -> tuple[list[tuple[str, str, str, float]], dict[str, str]]:
    """Selection rows (kind INPUT_KIND, variable, unit, factor into the role's unit) for every input the contract
    has in a unit that converts, and why each other input is unavailable (role column -> reason)."""
    from milepost.schema.units import UnitError, Units

    units = contract.units if contract.units is not None else Units()
    rows: list[tuple[str, str, str, float]] = []
    missing: dict[str, str] = {}
    for r in ROLES:
        var = contract.variables.get(r.variable)
        if var is None:
            missing[r.column] = f"the contract has no variable {r.variable}"
            continue
        try:
            factor = 1.0 if var.unit == r.unit else units.factor(var.unit, r.unit)
        except UnitError:
            missing[r.column] = f"{r.variable} is in {var.unit}, which does not convert into {r.unit}"
            continue
        rows.append((INPUT_KIND, r.variable, r.unit, factor))
    return rows, missing


def prepare_inputs(
    con: duckdb.DuckDBPyConnection, t: Tables, rows: list[tuple[str, str, str, float]], missing: dict[str, str]
) -> tuple[str, str]:
    """Create the inputs table (one row per reported model, scenario, region; a list per role) and the table of
    unavailable roles; return their names."""
    drop_inputs(con)
    inputs, unavailable = PREFIX + "inputs", PREFIX + "unavailable"
    roles = {r.variable: r.column for r in ROLES}
    pairs = [(roles[v], v, f) for _, v, _, f in rows]
    pivot = ", ".join(
        f"first(list_transform(s.ends, lambda v: v * i.factor)) FILTER (WHERE i.role = {literal(r.column)})"
        f" AS {r.column}"
        for r in ROLES
    )
    con.execute(
        f"CREATE TEMP TABLE {inputs} AS SELECT s.model, s.scenario, s.region, {pivot}"
        f" FROM (SELECT DISTINCT model, scenario, region FROM {t.series}) u"
        f" LEFT JOIN {t.series} s ON s.model = u.model AND s.scenario = u.scenario AND s.region = u.region"
        " LEFT JOIN (SELECT unnest(?::VARCHAR[]) AS role, unnest(?::VARCHAR[]) AS variable,"
        " unnest(?::DOUBLE[]) AS factor) i ON i.variable = s.variable"
        " GROUP BY s.model, s.scenario, s.region",
        [[p[0] for p in pairs], [p[1] for p in pairs], [p[2] for p in pairs]],
    )
    con.execute(
        f"CREATE TEMP TABLE {unavailable} AS SELECT unnest(?::VARCHAR[]) AS role, unnest(?::VARCHAR[]) AS reason",
        [list(missing), list(missing.values())],
    )
    return inputs, unavailable


def drop_inputs(con: duckdb.DuckDBPyConnection) -> None:
    """Remove the driver helper tables."""
    for name in ("inputs", "unavailable"):
        con.execute(f"DROP TABLE IF EXISTS {PREFIX}{name}")


def _frame(t: Tables, kind: str) -> str:
    """FROM clause: every input row with all inputs of `kind`, times the kind's periods (aliases w, x, p)."""
    variable, needs = NEEDS[kind]
    present = " AND ".join(f"w.{c} IS NOT NULL" for c in needs)
    return (
        f"FROM {t.inputs} w JOIN {t.selection} x ON x.kind = {literal(kind)} AND x.variable = {literal(variable)}"
        f" JOIN {t.periods} p ON p.kind = {literal(kind)} WHERE {present}"
    )


def _head(kind: str) -> str:
    return f"w.model, w.scenario, w.region, {literal(kind)} AS kind, x.variable, p.year_from, p.year_to"


def ratio_sql(kind: str, num: str, den: str, scale: float) -> Callable[[Tables], str]:
    """The SQL of a Kaya factor num/den x scale at each period year (empty with a note where den <= 0)."""

    def sql(t: Tables) -> str:
        n, d = f"w.{num}[p.i_to]", f"w.{den}[p.i_to]"
        value = f"CASE WHEN {d} > 0 THEN {n} / {d} * {scale!r} END"
        note = (
            f"CASE WHEN {n} IS NULL OR {d} IS NULL THEN 'an input is not reported in ' || p.year_to"
            f" WHEN {d} <= 0 THEN {literal(ROLE[den].variable + ' is zero or negative')} END"
        )
        return f"SELECT {_head(kind)}, {value} AS value, x.unit, {note} AS note {_frame(t, kind)}"

    return sql


def _ends(i: str) -> str:
    """The Kaya inputs at list position `i` (P, G, E, C) with a suffix naming the end."""
    return ", ".join(f"w.{c}[{i}]" for c in ("pop", "gdp", "energy", "co2"))


def lmdi_terms(t: Tables, kind: str) -> str:
    """SELECT of the rows of `kind` with columns p0 g0 e0 c0 pT gT eT cT (P, G, E, C at each end) and the output
    key; shared by the four effects so that they read the same numbers."""
    return (
        f"SELECT {_head(kind)}, x.unit, w.pop[p.i_from] AS p0, w.gdp[p.i_from] AS g0, w.energy[p.i_from] AS e0,"
        " w.co2[p.i_from] AS c0, w.pop[p.i_to] AS p1, w.gdp[p.i_to] AS g1, w.energy[p.i_to] AS e1,"
        f" w.co2[p.i_to] AS c1 {_frame(t, kind)}"
    )


# Why a row has no decomposition (null when it has one); aliases of `lmdi_terms`.
LMDI_UNDEFINED = (
    "CASE WHEN p0 IS NULL OR g0 IS NULL OR e0 IS NULL OR c0 IS NULL OR p1 IS NULL OR g1 IS NULL OR e1 IS NULL"
    " OR c1 IS NULL THEN 'an input is not reported in the base year or in ' || year_to"
    " WHEN p0 <= 0 OR p1 <= 0 THEN 'population is zero or negative'"
    " WHEN g0 <= 0 OR g1 <= 0 THEN 'gdp.ppp is zero or negative'"
    " WHEN e0 < 0 OR e1 < 0 OR c0 < 0 OR c1 < 0 THEN 'negative primary energy or fossil CO2 has no log decomposition'"
    " WHEN (e0 = 0 AND c0 <> 0) OR (e1 = 0 AND c1 <> 0) THEN 'fossil CO2 without primary energy' END"
)


def lmdi_effect(factor: str) -> str:
    """SQL of one LMDI-I effect on the columns of `lmdi_terms` (see the module docstring for the zero limits)."""
    ratio = {
        "pop": "p1 / p0",
        "gpp": "(g1 / p1) / (g0 / p0)",
        "epg": "(e1 / g1) / (e0 / g0)",
        "cpe": "(c1 / e1) / (c0 / e0)",
    }[factor]
    # L(C1, C0); when the two are equal to rounding the log of their ratio is mostly noise, and L is their mean
    weight = "CASE WHEN abs(c1 - c0) <= 1e-12 * greatest(c0, c1) THEN (c0 + c1) / 2 ELSE (c1 - c0) / ln(c1 / c0) END"
    # the factor that is zero where C is zero: energy intensity when energy is zero too, else carbon intensity
    zero0 = "CASE WHEN e0 = 0 THEN 'epg' ELSE 'cpe' END"
    zero1 = "CASE WHEN e1 = 0 THEN 'epg' ELSE 'cpe' END"
    f = literal(factor)
    return (
        f"CASE WHEN ({LMDI_UNDEFINED}) IS NOT NULL THEN NULL"
        " WHEN c0 = 0 AND c1 = 0 THEN 0.0"
        f" WHEN c0 = 0 THEN CASE WHEN {zero0} = {f} THEN c1 - c0 ELSE 0.0 END"
        f" WHEN c1 = 0 THEN CASE WHEN {zero1} = {f} THEN c1 - c0 ELSE 0.0 END"
        f" ELSE ({weight}) * ln({ratio}) END"
    )


def lmdi_sql(kind: str) -> Callable[[Tables], str]:
    """The SQL function of one LMDI effect kind."""

    def sql(t: Tables) -> str:
        cols = "model, scenario, region, kind, variable, year_from, year_to, unit"
        return (
            f"SELECT {cols}, {lmdi_effect(LMDI[kind])} AS value, {LMDI_UNDEFINED} AS note FROM ({lmdi_terms(t, kind)})"
        )

    return sql


def gaps_sql(wanted: list[tuple[str, str, str]], scope: str, where: str = "") -> str:
    """SELECT model, scenario, region, kind, variable, note: for each (kind, variable, input role) of `wanted` and
    each row of `scope` (a relation with model, scenario, region and one boolean column per role: whether that
    input is there) that lacks the input, one row per (kind, variable) whose note names every input missing.
    `where` (code text, not user text) is added to "no X is reported"."""
    if not wanted:
        cols = ", ".join(f"NULL::VARCHAR AS {c}" for c in ("model", "scenario", "region", "kind", "variable", "note"))
        return f"SELECT {cols} WHERE false"
    req = " UNION ALL ".join(
        f"SELECT {literal(k)} AS kind, {literal(v)} AS variable, {literal(c)} AS role,"
        f" {literal(ROLE[c].variable)} AS input"
        for k, v, c in wanted
    )
    has = "CASE q.role " + " ".join(f"WHEN {literal(c)} THEN u.{c}" for c in sorted({c for _, _, c in wanted})) + " END"
    why = f"coalesce(n.reason, 'no ' || q.input || ' is reported{where}')"
    return (
        "SELECT u.model, u.scenario, u.region, q.kind, q.variable,"
        f" string_agg({why}, '; ' ORDER BY q.input) || ': no ' || q.kind || ' is computed' AS note"
        f" FROM {scope} u CROSS JOIN ({req}) q LEFT JOIN {PREFIX}unavailable n ON n.role = q.role"
        f" WHERE NOT coalesce({has}, false) GROUP BY u.model, u.scenario, u.region, q.kind, q.variable"
    )


def gaps(t: Tables, kinds: tuple[str, ...]) -> str:
    """The gaps of the driver kinds among `kinds`: per scenario and region reported at all."""
    wanted = [(k, NEEDS[k][0], c) for k in kinds if k in NEEDS for c in NEEDS[k][1]]
    present = ", ".join(f"{c} IS NOT NULL AS {c}" for c in ROLE)
    return gaps_sql(wanted, f"(SELECT model, scenario, region, {present} FROM {t.inputs})")


KINDS = (
    Kind("gdp_per_capita", ("points", "milestones"), "label", ratio_sql("gdp_per_capita", "gdp", "pop", 1.0)),
    Kind("energy_intensity", ("points", "milestones"), "label", ratio_sql("energy_intensity", "energy", "gdp", 1000.0)),
    Kind("carbon_intensity", ("points", "milestones"), "label", ratio_sql("carbon_intensity", "co2", "energy", 1.0)),
    *(Kind(k, ("from_base",), "label", lmdi_sql(k)) for k in LMDI),
)
