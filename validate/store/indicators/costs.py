"""Cost indicators: losses against the reference scenario and the net present value of abatement costs.

The reference is the scenario named in the scenario's `reference` attribute (the `scenarios` table), same model,
same region, same variable; its rows may come from another submission. Without one the value is null. Each model
names its own reference, which may be a no-policy run rather than a current-policies pathway: the `note` of every
loss_pct and growth_reduction_pp row names the reference scenario it was measured against (or why there is none).

loss_pct             (reference - scenario) / reference * 100 at each milestone, in %; null when the reference
                     value is 0 or either value is missing. Positive = the scenario is below its reference.
growth_reduction_pp  CAGR(reference, y0 -> y1) - CAGR(scenario, y0 -> y1) in percentage points per year: the
                     annualised reduction of GDP or consumption growth (as AR6 WGIII SPM C.12.2 states it for GDP
                     over 2020-2050). Null when either CAGR is undefined (a value <= 0) or a value is missing.
npv                  sum over every year t = y0..y1 inclusive of C_t / (1 + r)**(t - base), C_t the annual
                     interpolation and r = contract.discount_rate / 100. The base year itself is not discounted
                     (as numpy_financial.npv, which does not discount its first value); with y0 later than base the
                     value is still discounted to the base year. Null unless every year y0..y1 is covered.
                     Unit: the variable's unit without its trailing "/yr" (annual flows summed over years).
A scenario that names itself as its reference, or whose references lead back to it, gets no loss_pct and no
growth_reduction_pp rows (its losses would read as exactly 0).
Costs are model results: they exclude avoided climate damages and co-benefits.
"""

from __future__ import annotations

from milepost.validate.reference_cycles import cyclic_scenarios
from milepost.validate.store.indicators.base import Kind, Tables, cagr, frame, head

# Which reference a loss was measured against, in words, for the `note` column (aliases as in `frame`).
REFERENCE_NOTE = (
    "CASE WHEN s.reference IS NULL THEN 'no reference scenario is named in the scenarios table'"
    " WHEN s.ref_sid IS NULL THEN 'the reference scenario ' || s.reference || ' does not report this series'"
    " ELSE 'against ' || s.reference || ', the model''s own reference scenario named in the scenarios table"
    " (it may differ from a current-policies pathway)' END"
)


def not_cyclic(t: Tables) -> str:
    """WHERE clause leaving out series of scenarios that name themselves as reference or whose references lead
    back to them (rule reference-cycle): measured against themselves their losses would read as 0, a real value."""
    links = f"SELECT DISTINCT model, scenario, reference FROM {t.series} WHERE reference IS NOT NULL"
    cyclic = cyclic_scenarios(links)
    return f" WHERE NOT EXISTS (SELECT 1 FROM ({cyclic}) cy WHERE cy.model = s.model AND cy.scenario = s.scenario)"


def loss_sql(t: Tables) -> str:
    """SQL for `loss_pct` rows."""
    scen, ref = "s.ends[p.i_to]", "s.ref_ends[p.i_to]"
    value = f"(CASE WHEN {ref} <> 0 THEN ({ref} - {scen}) / {ref} * 100 END)"
    return (
        f"SELECT {head('loss_pct')}, p.year_from, p.year_to, {value} AS value, x.unit, {REFERENCE_NOTE} AS note"
        f" {frame(t, 'loss_pct')}{not_cyclic(t)}"
    )


def growth_reduction_sql(t: Tables) -> str:
    """SQL for `growth_reduction_pp` rows."""
    scen = cagr("s.ends[p.i_from]", "s.ends[p.i_to]", "p.year_from", "p.year_to")
    ref = cagr("s.ref_ends[p.i_from]", "s.ref_ends[p.i_to]", "p.year_from", "p.year_to")
    return (
        f"SELECT {head('growth_reduction_pp')}, p.year_from, p.year_to, {ref} - {scen} AS value, x.unit,"
        f" {REFERENCE_NOTE} AS note {frame(t, 'growth_reduction_pp')}{not_cyclic(t)}"
    )


def npv_sql(t: Tables) -> str:
    """SQL for `npv` rows."""
    growth = 1.0 + t.discount_rate / 100.0
    discounted = (
        f"SELECT a.sid, p.year_from, p.year_to, count(*) AS years,"
        f" sum(a.value / power({growth!r}, a.year - {t.base_year})) AS pv"
        f" FROM {t.annual} a JOIN {t.periods} p ON p.kind = 'npv' AND a.year BETWEEN p.year_from AND p.year_to"
        f" WHERE a.sid IN (SELECT s.sid FROM {t.series} s JOIN {t.selection} x ON x.kind = 'npv'"
        " AND x.variable = s.variable) GROUP BY a.sid, p.year_from, p.year_to"
    )
    return (
        f"SELECT {head('npv')}, p.year_from, p.year_to,"
        " CASE WHEN d.years = p.year_to - p.year_from + 1 THEN d.pv * x.factor END AS value, x.unit"
        f" {frame(t, 'npv')} LEFT JOIN ({discounted}) d"
        " ON d.sid = s.sid AND d.year_from = p.year_from AND d.year_to = p.year_to"
    )


KINDS = (
    Kind("loss_pct", ("milestones", "points"), "label", loss_sql),
    Kind("growth_reduction_pp", ("from_base", "pairs"), "label", growth_reduction_sql),
    Kind("npv", ("from_base", "pairs"), "integral", npv_sql),
)
