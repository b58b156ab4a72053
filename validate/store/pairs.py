"""Paired delay comparisons: which stored scenarios pair up, and each pair's shared indicators side by side.

Delay can only be read with the long-term outcome held fixed. A pair is two scenarios of the same model that
pursue the same outcome and differ in when they act:

- with a `[pairs]` table in the contract, scenarios whose attributes `match` are equal form a group (e.g. the
  same `ambition`), ordered by the attribute `order` (e.g. `policy_start`; compared as numbers where they are);
- without one, a group is the scenarios of one model in one outcome class (their `budget_level` at a likelihood,
  67 % by default; "above every budget" is not a class one can hold fixed, so those scenarios do not pair),
  ordered by their emissions at the first milestone (World `emissions.co2`): the lowest acts earliest.

Every later scenario of a group pairs with the earliest one (ties for earliest: the first by name; scenarios
that tie with it are not "later" and do not pair). Scenarios that other scenarios name as their reference and
scenarios without the attributes (or values) that place them are left out. The same SQL serves
`milepost export --what pairs` and the dashboard's Delay page.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from milepost.schema.contract import Contract
from milepost.validate.store.indicators import KINDS

DEFAULT_LIKELIHOOD = "67%"
# kinds over each scenario's own period (to its net-zero year, over its reported range): a pair's two rows of
# such a kind are compared even though their periods differ (year_from/year_to are then null in the pair row)
OWN_PERIOD_KINDS = tuple(sorted(k.name for k in KINDS.values() if set(k.periods) <= {"reported", "net_zero"}))
PAIR_COLUMNS = (
    "model",
    "group",
    "scenario_first",
    "scenario_later",
    "kind",
    "variable",
    "region",
    "year_from",
    "year_to",
    "value_first",
    "value_later",
    "delta",
    "ratio",
    "unit",
)


@dataclass(frozen=True)
class PairRule:
    """How scenarios pair: by attributes (`match`, `order`) or, when `order` is empty, by outcome class."""

    match: tuple[str, ...] = ()
    order: str = ""
    likelihood: str = DEFAULT_LIKELIHOOD  # outcome classes (rule without `order`)
    order_variable: str = "emissions.co2"
    order_region: str = "World"
    order_year: int = 2030

    @property
    def by_outcome(self) -> bool:
        return not self.order

    def describe(self) -> str:
        """One sentence for captions and the command line."""
        if self.by_outcome:
            return (
                f"Pairs: scenarios of one model in the same outcome class (carbon budget at {self.likelihood}); "
                f"the one with the lowest {self.order_variable} ({self.order_region}) in {self.order_year} is "
                "first, every other pairs with it."
            )
        same = ", ".join(self.match) if self.match else "no attribute"
        return (
            f"Pairs: scenarios of one model with the same {same}, ordered by {self.order}; every later one "
            "pairs with the earliest (the contract's [pairs])."
        )


def rule_for(contract: Contract | None, likelihood: str = DEFAULT_LIKELIHOOD) -> PairRule:
    """The contract's pairing rule, or the outcome-class rule (ordered at its first milestone) without one."""
    if contract is not None and contract.pairs is not None:
        return PairRule(match=contract.pairs.match, order=contract.pairs.order, likelihood=likelihood)
    if contract is None:
        return PairRule(likelihood=likelihood)
    region = contract.budgets.region if contract.budgets is not None else "World"
    later = [m for m in contract.milestones if m > contract.base_year]
    return PairRule(likelihood=likelihood, order_region=region, order_year=min(later) if later else 2030)


def indicator_source(basis: str) -> str:
    """The current indicators of one basis: the plain view for raw values (every schema has it), else the rows of
    `current_indicators_by_basis` with basis = $pair_basis (a database that holds harmonised values)."""
    if basis == "raw":
        return "current_indicators"
    return "(SELECT * FROM current_indicators_by_basis WHERE basis = $pair_basis)"


def pairs_sql(rule: PairRule, basis: str = "raw") -> tuple[str, dict[str, Any]]:
    """SELECT model, "group", scenario_first, scenario_later over the current scenarios, and its parameters.

    Outcome classes and the order value (rule without `order`) are read on `basis`."""
    params: dict[str, Any] = {} if basis == "raw" else {"pair_basis": basis}
    source = indicator_source(basis)
    not_reference = (
        "NOT EXISTS (SELECT 1 FROM current_scenarios r WHERE r.model = s.model AND r.reference = s.scenario"
        " AND r.scenario <> s.scenario)"
    )
    if rule.by_outcome:
        params.update({"pair_lik": rule.likelihood, "pair_var": rule.order_variable, "pair_region": rule.order_region})
        params["pair_year"] = int(rule.order_year)
        candidates = f"""
          SELECT s.model, s.scenario, printf('%g °C (%s)', b.value, b.variable) AS grp,
                 {{'n': v.value, 't': ''}} AS okey
          FROM current_scenarios s
          JOIN {source} b ON b.model = s.model AND b.scenario = s.scenario AND b.kind = 'budget_level'
               AND b.variable = $pair_lik AND b.value IS NOT NULL
          JOIN {source} v ON v.model = s.model AND v.scenario = s.scenario AND v.kind = 'value'
               AND v.variable = $pair_var AND v.region = $pair_region AND v.year_from = $pair_year
               AND v.value IS NOT NULL
          WHERE {not_reference}"""  # noqa: S608 - fixed SQL text; every value is a bound parameter
    else:
        keys = []
        for i, name in enumerate(rule.match):
            params[f"pair_m{i}"] = name
            keys.append(f"s.attributes ->> $pair_m{i}")
        params["pair_order"] = rule.order
        values = f"[{', '.join(keys)}]::VARCHAR[]" if keys else "[]::VARCHAR[]"
        candidates = f"""
          SELECT model, scenario, array_to_string(vals, ' | ') AS grp, okey FROM (
            SELECT s.model, s.scenario, {values} AS vals,
                   {{'n': coalesce(try_cast(s.attributes ->> $pair_order AS DOUBLE), 'inf'::DOUBLE),
                     't': s.attributes ->> $pair_order}} AS okey,
                   s.attributes ->> $pair_order AS o
            FROM current_scenarios s WHERE {not_reference})
          WHERE o IS NOT NULL AND NOT list_contains(list_transform(vals, lambda x: x IS NULL), true)"""  # noqa: S608 - fixed SQL text; every value is a bound parameter
    sql = f"""
      WITH cand AS ({candidates}),
      firsts AS (
        SELECT model, grp, arg_min(scenario, {{'k': okey, 's': scenario}}) AS scenario_first, min(okey) AS fkey
        FROM cand GROUP BY model, grp)
      SELECT c.model, c.grp AS "group", f.scenario_first, c.scenario AS scenario_later
      FROM cand c JOIN firsts f ON f.model = c.model AND f.grp = c.grp
      WHERE c.okey > f.fkey"""  # noqa: S608 - fixed SQL text; every value is a bound parameter
    return sql, params


def pair_rows_sql(
    rule: PairRule,
    models: Sequence[str] = (),
    scenarios: Sequence[str] = (),
    regions: Sequence[str] = (),
    variables: Sequence[str] = (),
    kinds: Sequence[str] = (),
    basis: str = "raw",
) -> tuple[str, dict[str, Any]]:
    """Every indicator both scenarios of a pair have, side by side (PAIR_COLUMNS), filtered; and the parameters.

    A scenario filter keeps pairs where either scenario is named. Rows match on kind, variable, region and period;
    kinds over each scenario's own period (OWN_PERIOD_KINDS) match without the period. Indicators (and the
    pairing) are those of `basis`: raw, or harmonised where the database holds them.
    """
    pairs, params = pairs_sql(rule, basis)
    source = indicator_source(basis)
    params.update(
        {
            "f_models": list(models),
            "f_scenarios": list(scenarios),
            "f_regions": list(regions),
            "f_variables": list(variables),
            "f_kinds": list(kinds),
            "own_period": list(OWN_PERIOD_KINDS),
        }
    )
    sql = f"""
      WITH p AS ({pairs})
      SELECT p.model, p."group", p.scenario_first, p.scenario_later, f.kind, f.variable, f.region,
             CASE WHEN f.year_from = l.year_from THEN f.year_from END AS year_from,
             CASE WHEN f.year_to = l.year_to THEN f.year_to END AS year_to,
             f.value AS value_first, l.value AS value_later, l.value - f.value AS delta,
             CASE WHEN f.value <> 0 THEN l.value / f.value END AS ratio, f.unit
      FROM p
      JOIN {source} f ON f.model = p.model AND f.scenario = p.scenario_first
      JOIN {source} l ON l.model = p.model AND l.scenario = p.scenario_later
           AND l.kind = f.kind AND l.variable = f.variable AND l.region = f.region
           AND (list_contains($own_period::VARCHAR[], f.kind)
                OR (l.year_from = f.year_from AND l.year_to = f.year_to))
      WHERE (len($f_models::VARCHAR[]) = 0 OR list_contains($f_models::VARCHAR[], p.model))
        AND (len($f_scenarios::VARCHAR[]) = 0 OR list_contains($f_scenarios::VARCHAR[], p.scenario_first)
             OR list_contains($f_scenarios::VARCHAR[], p.scenario_later))
        AND (len($f_regions::VARCHAR[]) = 0 OR list_contains($f_regions::VARCHAR[], f.region))
        AND (len($f_variables::VARCHAR[]) = 0 OR list_contains($f_variables::VARCHAR[], f.variable))
        AND (len($f_kinds::VARCHAR[]) = 0 OR list_contains($f_kinds::VARCHAR[], f.kind))
      ORDER BY p.model, p."group", p.scenario_later, f.kind, f.variable, f.region, f.year_from, f.year_to"""  # noqa: S608 - fixed SQL text; every value is a bound parameter
    return sql, params
