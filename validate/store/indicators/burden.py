"""Burden sharing: allowances under three allocation rules, the permits each region sells, and the money moved.

The market is the contract's `[allocation] region` (World) and its direct parts trade. Its cap in each year is the
scenario's own emissions.ghg of the market region. Each rule gives region r a share s_r(t) of the cap:

grandfathering  its share of the regions' summed emissions.ghg in the base year
per_capita      its share of the regions' summed population in that year (equal per capita)
convergence     contraction and convergence: (1 - w) x grandfathering + w x per_capita, w rising linearly from 0
                in the base year to 1 in `[allocation] convergence_year` (default 2050), 1 afterwards

At each milestone, per region and rule (the rule in the variable column):
allowance         s_r(t) x cap(t), Mt CO2e
permits_sold      allowance - the region's emissions.ghg, Mt CO2e (negative = it buys permits)
transfer          permits_sold x the market region's price.carbon / 1000, billion USD_2015/yr (positive = it
                  receives money); the sum over regions is zero when the regions' emissions add up to the cap
cost_after_trade  the region's cost.abatement minus its transfer, billion USD_2015/yr (its cost without trade is
                  the `value` of cost.abatement)
and for the market region: market_permits (permits traded: the sum of the positive permits_sold, Mt CO2e) and
market_value (money moved: the sum of the positive transfers, billion USD_2015/yr).

cost_share        each trading region's share of the burden at each milestone, as a fraction (the shares of the
                  regions that add up to the market region sum to 1): for cost.abatement its share of the market
                  region's abatement cost; for gdp.ppp, gdp.mer and consumption its share of the summed regional
                  loss (reference - scenario, in the variable's unit, against each region's own reference as in
                  loss_pct). Empty where the denominator is zero or missing, or (loss) where a part lacks a value.

A contract whose market region has no parts (the core contract's World, of countries) gets no burden rows.
A scenario lacking an input (the cap, a region's emissions or population, the carbon price, a region's abatement
cost) gets no rows of the kinds needing it and a gap row saying which input is missing. Allocation rules are
illustrations of equity principles, not negotiated shares; costs exclude avoided damages and co-benefits.
"""

from __future__ import annotations

from collections.abc import Callable

import duckdb

from milepost.schema.contract import Contract
from milepost.validate.sql import literal, literal_list
from milepost.validate.store.indicators.base import Kind, Tables, frame
from milepost.validate.store.indicators.costs import REFERENCE_NOTE, not_cyclic
from milepost.validate.store.indicators.drivers import PREFIX, gaps_sql

MARKET = PREFIX + "market"
COMPLETE = PREFIX + "complete"
SHARES = PREFIX + "shares"
RULES = ("grandfathering", "per_capita", "convergence")
# kind -> the inputs it needs besides emissions.ghg (the cap and every region's) and, but for grandfathering,
# every region's population
NEEDS: dict[str, tuple[str, ...]] = {
    "allowance": (),
    "permits_sold": (),
    "transfer": ("price",),
    "cost_after_trade": ("price", "cost"),
    "market_permits": (),
    "market_value": ("price",),
}
SELECTED_BY = "emissions.ghg"
COLUMN = {
    "allowance": "allowance",
    "permits_sold": "permits",
    "transfer": "transfer",
    "cost_after_trade": "cost_after",
}


def prepare_market(con: duckdb.DuckDBPyConnection, contract: Contract) -> str:
    """Create the table of trading regions (region, market) and return its name."""
    con.execute(f"DROP TABLE IF EXISTS {MARKET}")
    market = contract.allocation.region
    parts = list(contract.regions[market].parts) if market in contract.regions else []
    con.execute(
        f"CREATE TEMP TABLE {MARKET} AS SELECT unnest(?::VARCHAR[]) AS region, ?::VARCHAR AS market",
        [parts, market],
    )
    return MARKET


def drop_market(con: duckdb.DuckDBPyConnection) -> None:
    """Remove the burden helper tables."""
    for name in (MARKET, COMPLETE, SHARES):
        con.execute(f"DROP TABLE IF EXISTS {name}")


def prepare_shares(con: duckdb.DuckDBPyConnection, t: Tables) -> None:
    """Materialise, once for every burden kind, which scenarios are complete and the shares of each rule: the
    kinds then only pick their column (the window sums over regions run once)."""
    con.execute(f"CREATE OR REPLACE TEMP TABLE {COMPLETE} AS {_complete_sql(t)}")
    con.execute(f"CREATE OR REPLACE TEMP TABLE {SHARES} AS {_shares_sql(t)}")


def _complete_sql(t: Tables) -> str:
    """Per scenario: whether the market region and every trading region report each input (columns as roles)."""
    return (
        "SELECT m.model, m.scenario, k.market AS region,"
        f" bool_and(w.ghg IS NOT NULL) AND count(w.region) = (SELECT count(*) FROM {t.market}) AND"
        " any_value(m.ghg IS NOT NULL) AS ghg,"
        f" bool_and(w.pop IS NOT NULL) AND count(w.region) = (SELECT count(*) FROM {t.market}) AS pop,"
        " any_value(m.price IS NOT NULL) AS price,"
        f" bool_and(w.cost IS NOT NULL) AND count(w.region) = (SELECT count(*) FROM {t.market}) AS cost"
        f" FROM {t.inputs} m JOIN (SELECT DISTINCT market FROM {t.market}) k ON k.market = m.region"
        f" CROSS JOIN {t.market} r"
        f" LEFT JOIN {t.inputs} w ON w.model = m.model AND w.scenario = m.scenario AND w.region = r.region"
        " GROUP BY m.model, m.scenario, k.market"
    )


def shares(t: Tables, kind: str) -> str:
    """SELECT the rows of `kind` from the shares table (see `_shares_sql`)."""
    return f"SELECT * FROM {SHARES} WHERE kind = {literal(kind)}"


def _shares_sql(t: Tables) -> str:
    """SELECT one row per (burden kind, scenario, trading region, rule, period of the kind) with allowance,
    emissions, permits, transfer, cost_after (null where the price or cost is missing) and the market region."""
    base, conv = t.base_year, t.convergence_year
    b = t.base_index
    # a convergence year equal to the base year (lint refuses it; a non-strict load does not) converges at once
    w = f"coalesce(least(greatest((p.year_to - {base}) / nullif({conv} - {base}, 0)::DOUBLE, 0.0), 1.0), 1.0)"
    per_region = (
        "SELECT p.kind, c.model, c.scenario, r.region, k.market, p.year_from, p.year_to, x.unit, p.i_to,"
        " c.pop AS pop_ok,"
        " c.price AS price_ok, c.cost AS cost_ok,"
        # no share where the parts sum to zero (NULL, never NaN or infinity, in allowances and transfers)
        f" w.ghg[{b}] / nullif(sum(w.ghg[{b}]) OVER sc, 0) AS gf,"
        f" w.pop[p.i_to] / nullif(sum(w.pop[p.i_to]) OVER sc, 0) AS pc,"
        f" {w} AS weight, m.ghg[p.i_to] AS cap, w.ghg[p.i_to] AS emitted, m.price[p.i_to] AS price,"
        " w.cost[p.i_to] AS cost"
        f" FROM {COMPLETE} c JOIN {t.market} r ON r.market = c.region"
        " JOIN (SELECT DISTINCT market FROM {market}) k ON k.market = c.region".format(market=t.market)
        + f" JOIN {t.inputs} m ON m.model = c.model AND m.scenario = c.scenario AND m.region = c.region"
        f" JOIN {t.inputs} w ON w.model = c.model AND w.scenario = c.scenario AND w.region = r.region"
        f" JOIN {t.selection} x ON list_contains({literal_list(NEEDS)}, x.kind) AND x.variable = {literal(SELECTED_BY)}"
        f" JOIN {t.periods} p ON p.kind = x.kind"
        " WHERE c.ghg"
        " WINDOW sc AS (PARTITION BY p.kind, c.model, c.scenario, p.year_to)"
    )
    share = "CASE rule WHEN 'grandfathering' THEN gf WHEN 'per_capita' THEN pc ELSE (1 - weight) * gf + weight * pc END"
    allowance = f"({share}) * cap"
    return (
        f"SELECT *, {allowance} AS allowance, {allowance} - emitted AS permits,"
        f" ({allowance} - emitted) * price / 1000 AS transfer, cost - ({allowance} - emitted) * price / 1000"
        f" AS cost_after FROM ({per_region}) CROSS JOIN (SELECT unnest({literal_list(RULES)}) AS rule)"
        " WHERE pop_ok OR rule = 'grandfathering'"
    )


def _note(t: Tables) -> str:
    return (
        "CASE rule WHEN 'grandfathering' THEN 'shares of base-year emissions.ghg'"
        " WHEN 'per_capita' THEN 'shares of population in ' || year_to"
        f" ELSE 'shares moving from base-year emissions to population, equal per capita by {t.convergence_year}'"
        " END || '; an illustration of an equity principle, not a negotiated share'"
    )


def region_sql(kind: str) -> Callable[[Tables], str]:
    """The SQL function of one per-region kind."""

    def sql(t: Tables) -> str:
        return (
            f"SELECT model, scenario, region, {literal(kind)} AS kind, rule AS variable, year_from, year_to,"
            f" {COLUMN[kind]} AS value, unit, {_note(t)} AS note FROM ({shares(t, kind)})" + _present(kind)
        )

    return sql


def market_sql(kind: str, column: str) -> Callable[[Tables], str]:
    """The SQL function of a market-size kind: the sum of the positive `column` over the trading regions."""

    def sql(t: Tables) -> str:
        where = _present(kind)
        return (
            f"SELECT model, scenario, market AS region, {literal(kind)} AS kind, rule AS variable, year_from,"
            f" year_to, sum(greatest({column}, 0)) AS value, any_value(unit) AS unit"
            f" FROM ({shares(t, kind)}){where} GROUP BY model, scenario, market, rule, year_from, year_to"
        )

    return sql


def _present(kind: str) -> str:
    """WHERE clause keeping the scenarios that report the price and costs the kind needs (a year missing from a
    reported series gives an empty value, as in every kind)."""
    needs = [f"{role}_ok" for role in NEEDS[kind]]
    return (" WHERE " + " AND ".join(needs)) if needs else ""


def gaps(t: Tables, kinds: tuple[str, ...]) -> str:
    """The gaps of the burden kinds among `kinds`: per scenario at the market region, per rule."""
    wanted = [
        (k, rule, role)
        for k in kinds
        if k in NEEDS
        for rule in RULES
        for role in ("ghg", *(() if rule == "grandfathering" else ("pop",)), *NEEDS[k])
    ]
    return gaps_sql(wanted, COMPLETE, " for the market region or one of its parts")


COST_BASIS = "cost.abatement"  # the variable whose share is of the market region's total; the others: of summed losses


def cost_share_sql(t: Tables) -> str:
    """SQL for `cost_share` rows: one window over the trading regions of each scenario, variable and milestone."""
    amount = (
        f"CASE WHEN s.variable = {literal(COST_BASIS)} THEN s.ends[p.i_to] ELSE s.ref_ends[p.i_to] - s.ends[p.i_to] END"
    )
    parts = (
        f"SELECT s.model, s.scenario, s.region, s.variable, p.year_from, p.year_to, x.unit, k.market,"
        f" {amount} AS amount, CASE WHEN s.variable = {literal(COST_BASIS)} THEN NULL ELSE {REFERENCE_NOTE} END"
        f" AS note {frame(t, 'cost_share')} JOIN {t.market} k ON k.region = s.region{not_cyclic(t)}"
    )
    totals = (
        f"SELECT s.model, s.scenario, s.region AS market, s.variable, p.year_to, s.ends[p.i_to] AS total"
        f" {frame(t, 'cost_share')} WHERE s.region IN (SELECT market FROM {t.market})"
    )
    n_parts = f"(SELECT count(*) FROM {t.market})"
    window = "OVER (PARTITION BY r.model, r.scenario, r.variable, r.year_to)"
    denominator = (
        f"CASE WHEN r.variable = {literal(COST_BASIS)} THEN w.total"
        f" WHEN count(r.amount) {window} = {n_parts} THEN sum(r.amount) {window} END"
    )
    return (
        "SELECT r.model, r.scenario, r.region, 'cost_share' AS kind, r.variable, r.year_from, r.year_to,"
        f" r.amount / nullif({denominator}, 0) AS value, r.unit,"
        f" CASE WHEN r.variable = {literal(COST_BASIS)} THEN 'share of the ' || r.market || ' abatement cost'"
        " ELSE 'share of the loss summed over the parts of ' || r.market || ' (' || r.note || ')' END AS note"
        f" FROM ({parts}) r LEFT JOIN ({totals}) w ON w.model = r.model AND w.scenario = r.scenario"
        " AND w.market = r.market AND w.variable = r.variable AND w.year_to = r.year_to"
    )


KINDS = (
    Kind("cost_share", ("milestones", "points"), "label", cost_share_sql),
    *(Kind(k, ("milestones", "points"), "label", region_sql(k)) for k in COLUMN),
    Kind("market_permits", ("milestones", "points"), "label", market_sql("market_permits", "permits")),
    Kind("market_value", ("milestones", "points"), "label", market_sql("market_value", "transfer")),
)
