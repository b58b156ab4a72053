"""Queries of the Drivers and Regions pages: LMDI effects, allocations and transfers of the selected scenarios.

Pure functions in the style of `queries`: a connection and a selection in, a DataFrame out. Every query starts
from the selection's bands (filters and outcome, see `queries._banded`), so both pages speak of the selected
outcome only. The numbers are indicators stored at ingest (schema/indicators.toml).
"""

from __future__ import annotations

from collections.abc import Iterable

import duckdb
import pandas as pd

from milepost.dashboard import queries
from milepost.dashboard.queries import Selection
from milepost.validate.store.database import stored_columns

# The four effects in the order of the Kaya identity, and how the pages name them.
EFFECTS = {
    "lmdi_population": "population",
    "lmdi_gdp_per_capita": "GDP per person",
    "lmdi_energy_intensity": "energy intensity (energy/GDP)",
    "lmdi_carbon_intensity": "carbon intensity (CO2/energy)",
}
# Shorter names for the bars of a waterfall.
STEP_NAMES = ("population", "GDP/person", "energy/GDP", "CO2/energy")
RULES = {
    "grandfathering": "grandfathering (base-year emission shares)",
    "per_capita": "equal per capita",
    "convergence": "contraction and convergence",
}
REGION_KINDS = ("allowance", "permits_sold", "transfer", "cost_after_trade")
MARKET_KINDS = ("market_permits", "market_value")
CO2 = "emissions.co2.fossil"


def _gaps(con: duckdb.DuckDBPyConnection) -> str | None:
    """The current gaps of every basis, or None in a database written before gaps were stored (schema < 6)."""
    if not stored_columns(con, "indicator_gaps"):
        return None
    return "current_indicator_gaps_by_basis"


def effects(con: duckdb.DuckDBPyConnection, sel: Selection, region: str) -> pd.DataFrame:
    """The LMDI effects of the selected scenarios in `region`, one row per scenario, effect and milestone, with the
    fossil CO2 of the base year (`start`) and of the milestone (`end`) beside them."""
    kinds = ", ".join(f"'{k}'" for k in EFFECTS)
    sql = f"""WITH {queries._banded(con)}
    SELECT b.model, b.scenario, b.band, i.kind, i.year_from, i.year_to AS year, i.value, i.note,
           v0.value AS start, v1.value AS "end"
    FROM banded b
    JOIN {queries._indicators(con)} i ON i.model = b.model AND i.scenario = b.scenario AND i.region = $area
         AND i.basis = $basis AND i.kind IN ({kinds})
    LEFT JOIN {queries._indicators(con)} v0 ON v0.model = b.model AND v0.scenario = b.scenario AND v0.region = $area
         AND v0.basis = $basis AND v0.kind = 'value' AND v0.variable = '{CO2}' AND v0.year_to = i.year_from
    LEFT JOIN {queries._indicators(con)} v1 ON v1.model = b.model AND v1.scenario = b.scenario AND v1.region = $area
         AND v1.basis = $basis AND v1.kind = 'value' AND v1.variable = '{CO2}' AND v1.year_to = i.year_to
    ORDER BY year, b.band, b.model, b.scenario, i.kind"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return queries._df(con, sql, {**sel.params(), "area": region})


def gaps(con: duckdb.DuckDBPyConnection, sel: Selection, kinds: tuple[str, ...]) -> pd.DataFrame:
    """The gaps (kinds left out for a missing input) of the selected scenarios among `kinds`, any region."""
    source = _gaps(con)
    if source is None:
        return pd.DataFrame(columns=["model", "scenario", "region", "kind", "variable", "note"])
    sql = f"""WITH {queries._banded(con)}
    SELECT g.model, g.scenario, g.region, g.kind, g.variable, g.note FROM banded b
    JOIN {source} g ON g.model = b.model AND g.scenario = b.scenario AND g.basis = $basis
    WHERE list_contains($kinds::VARCHAR[], g.kind)
    ORDER BY g.model, g.scenario, g.region, g.kind, g.variable"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return queries._df(con, sql, {**sel.params(), "kinds": list(kinds)})


def undefined(df: pd.DataFrame) -> pd.DataFrame:
    """Scenario-milestones whose effects are empty (negative CO2, say), with the note saying why."""
    empty = df[df["value"].isna()]
    return empty.groupby(["model", "scenario", "year"], as_index=False).agg(note=("note", "first"))


def scenario_waterfall(df: pd.DataFrame, model: str, scenario: str, year: int) -> pd.DataFrame:
    """The steps of one scenario's waterfall: the base-year CO2, each effect, the milestone CO2 (see `steps`)."""
    one = df[(df["model"] == model) & (df["scenario"] == scenario) & (df["year"] == year)]
    if one.empty or one["value"].isna().any():
        return pd.DataFrame(columns=["step", "order", "low", "high", "value", "kind"])
    amounts = one.set_index("kind")["value"].reindex(list(EFFECTS)).to_numpy(dtype=float)
    return steps(float(one["start"].iloc[0]), amounts)


def band_counts(df: pd.DataFrame, year: int) -> pd.DataFrame:
    """Per band: the scenarios (`n`) and models with a decomposition at `year`, the evidence behind its medians."""
    rows = df[(df["year"] == year) & df["value"].notna()].drop_duplicates(["band", "model", "scenario"])
    return rows.groupby("band", sort=True, as_index=False).agg(n=("scenario", "size"), models=("model", "nunique"))


def band_waterfall(df: pd.DataFrame, band: int, year: int, model_weighted: bool = False) -> pd.DataFrame:
    """A band's waterfall from medians: the median base-year CO2, then the median of each effect; the last bar is
    their sum, which need not be the median of the milestone CO2 (medians do not add up). Each bar carries the
    scenarios (`n`) and models behind its median; the last bar those of the effects (the fewest)."""
    rows = df[(df["band"] == band) & (df["year"] == year) & df["value"].notna()]
    if rows.empty:
        return pd.DataFrame(columns=["step", "order", "low", "high", "value", "kind", "n", "models"])
    firsts = rows.drop_duplicates(["model", "scenario"]).assign(kind="start", value=lambda d: d["start"])
    medians = queries.summarise(pd.concat([firsts, rows]), ["kind"], model_weighted=model_weighted)
    medians = medians.set_index("kind").reindex(["start", *EFFECTS])
    out = steps(float(medians["median"].iloc[0]), medians["median"].iloc[1:].to_numpy(dtype=float))
    effects = medians.iloc[1:]
    last = (int(effects["n"].min()), int(effects["models"].min()))
    out["n"] = [*medians["n"].fillna(0).astype(int), last[0]]
    out["models"] = [*medians["models"].fillna(0).astype(int), last[1]]
    return out


def steps(start: float, amounts: Iterable[float]) -> pd.DataFrame:
    """Waterfall bars: `start`, one floating bar per effect (low..high, in Kaya order) and the end total."""
    values = [float(a) for a in amounts]
    rows = [{"step": "base year", "low": 0.0, "high": start, "value": start, "kind": "level"}]
    level = start
    for label, amount in zip(STEP_NAMES, values, strict=True):
        rows.append(
            {
                "step": label,
                "low": min(level, level + amount),
                "high": max(level, level + amount),
                "value": amount,
                "kind": "rise" if amount >= 0 else "fall",
            }
        )
        level += amount
    rows.append({"step": "milestone", "low": 0.0, "high": level, "value": level, "kind": "level"})
    out = pd.DataFrame(rows)
    out["order"] = range(len(out))
    return out


def lever_shares(df: pd.DataFrame, model_weighted: bool = False) -> pd.DataFrame:
    """Per band and milestone, the median of each effect (Mt CO2) and of its share of the sum of the two
    intensity effects: do high-band scenarios lean on energy intensity or on carbon intensity?"""
    ok = df[df["value"].notna()].copy()
    wide = ok.pivot_table(index=["model", "scenario", "band", "year"], columns="kind", values="value").reset_index()
    for k in EFFECTS:
        if k not in wide:
            wide[k] = float("nan")
    levers = wide["lmdi_energy_intensity"] + wide["lmdi_carbon_intensity"]
    wide["carbon_share"] = (wide["lmdi_carbon_intensity"] / levers.where(levers < 0)) * 100
    long = wide.melt(
        id_vars=["model", "scenario", "band", "year"],
        value_vars=[*EFFECTS, "carbon_share"],
        var_name="kind",
        value_name="value",
    )
    return queries.summarise(long, ["kind", "year", "band"], model_weighted=model_weighted)


def pair_medians(pairs: pd.DataFrame, model_weighted: bool = False) -> pd.DataFrame:
    """Per effect (in Kaya order), over the pairs of `pair_effects`: pairs with a difference (`n`), models, and the
    median difference later - first with its quartiles."""
    out = queries.summarise(pairs, ["effect"], "difference", model_weighted=model_weighted)
    order = {label: i for i, label in enumerate(EFFECTS.values())}
    return out.sort_values("effect", key=lambda e: e.map(order)).reset_index(drop=True)


def pair_effects(rows: pd.DataFrame) -> pd.DataFrame:
    """The LMDI effects of the two scenarios of each delay pair side by side, from pair rows (`queries.pair_rows`
    with the fossil CO2 variable): first, later and later - first, per milestone."""
    cols = ["model", "group", "scenario_first", "scenario_later", "year", "effect", "first", "later", "difference"]
    if rows.empty:
        return pd.DataFrame(columns=cols)
    out = rows[rows["kind"].isin(list(EFFECTS))].copy()
    out["effect"] = out["kind"].map(EFFECTS)
    out["order"] = out["kind"].map({k: i for i, k in enumerate(EFFECTS)})
    out = out.rename(columns={"year_to": "year", "value_first": "first", "value_later": "later", "delta": "difference"})
    out = out.sort_values(["model", "group", "scenario_later", "year", "order"])
    return out[cols].reset_index(drop=True)


def burden(con: duckdb.DuckDBPyConnection, sel: Selection) -> pd.DataFrame:
    """Allocations, permits, transfers and costs after trade of the selected scenarios, one row per scenario,
    region, rule and milestone, with the region's abatement cost without trade and its GDP (PPP) loss."""
    kinds = ", ".join(f"'{k}'" for k in REGION_KINDS)
    ind = queries._indicators(con)
    sql = f"""WITH {queries._banded(con)},
    rows AS (
      SELECT b.model, b.scenario, b.band, i.region, i.variable AS rule, i.year_to AS year, i.kind, i.value
      FROM banded b JOIN {ind} i ON i.model = b.model AND i.scenario = b.scenario AND i.basis = $basis
           AND i.kind IN ({kinds})
    ),
    wide AS (
      SELECT model, scenario, band, region, rule, year,
             max(value) FILTER (WHERE kind = 'allowance') AS allowance,
             max(value) FILTER (WHERE kind = 'permits_sold') AS permits_sold,
             max(value) FILTER (WHERE kind = 'transfer') AS transfer,
             max(value) FILTER (WHERE kind = 'cost_after_trade') AS cost_after_trade
      FROM rows GROUP BY ALL
    )
    SELECT w.*, c.value AS cost, l.value AS loss_pct FROM wide w
    LEFT JOIN {ind} c ON c.model = w.model AND c.scenario = w.scenario AND c.region = w.region AND c.basis = $basis
         AND c.kind = 'value' AND c.variable = 'cost.abatement' AND c.year_to = w.year
    LEFT JOIN {ind} l ON l.model = w.model AND l.scenario = w.scenario AND l.region = w.region AND l.basis = $basis
         AND l.kind = 'loss_pct' AND l.variable = 'gdp.ppp' AND l.year_to = w.year
    ORDER BY w.year, w.rule, w.region, w.band, w.model, w.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return queries._df(con, sql, sel.params())


SHARE_BASES = {"cost.abatement": "abatement cost", "gdp.ppp": "GDP (PPP) loss", "gdp.mer": "GDP (MER) loss",
               "consumption": "consumption loss"}  # fmt: skip


def cost_shares(con: duckdb.DuckDBPyConnection, sel: Selection) -> pd.DataFrame:
    """Each region's share (`cost_share`, a fraction) of the World abatement cost and of the summed regional loss
    for the selected scenarios, one row per scenario, region, basis variable and milestone."""
    ind = queries._indicators(con)
    sql = f"""WITH {queries._banded(con)}
    SELECT b.model, b.scenario, b.band, i.region, i.variable, i.year_to AS year, i.value AS share
    FROM banded b JOIN {ind} i ON i.model = b.model AND i.scenario = b.scenario AND i.basis = $basis
         AND i.kind = 'cost_share'
    ORDER BY year, i.variable, i.region, b.band, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return queries._df(con, sql, sel.params())


def market(con: duckdb.DuckDBPyConnection, sel: Selection) -> pd.DataFrame:
    """Market size of the selected scenarios: permits traded (Mt CO2e) and money moved (billion USD_2015/yr) per
    scenario, rule and milestone."""
    sql = f"""WITH {queries._banded(con)}
    SELECT b.model, b.scenario, b.band, i.variable AS rule, i.year_to AS year, i.kind, i.value
    FROM banded b JOIN {queries._indicators(con)} i ON i.model = b.model AND i.scenario = b.scenario
         AND i.basis = $basis AND i.kind IN ('market_permits', 'market_value')
    ORDER BY year, rule, b.band, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return queries._df(con, sql, sel.params())


def who_pays(df: pd.DataFrame, model_weighted: bool = False) -> pd.DataFrame:
    """Per rule, milestone, band and region: the median transfer (positive = receives) and how many of the band's
    scenarios see the region pay (buy permits) or receive."""
    ok = df[df["transfer"].notna()]
    summary = queries.summarise(ok, ["rule", "year", "band", "region"], "transfer", model_weighted)
    counts = (
        ok.assign(pays=ok["transfer"] < 0, receives=ok["transfer"] > 0)
        .groupby(["rule", "year", "band", "region"], as_index=False)[["pays", "receives"]]
        .sum()
    )
    return summary.merge(counts, on=["rule", "year", "band", "region"], how="left")


def market_sizes(market: pd.DataFrame, model_weighted: bool = False) -> pd.DataFrame:
    """Per rule and market measure (`kind`: permits traded, money moved) over the rows of `market`: scenarios with
    a value (`n`), models and the median. Money moved needs the World carbon price, permits do not, so the two
    may rest on different scenarios: each carries its own counts."""
    return queries.summarise(market, ["rule", "kind"], model_weighted=model_weighted)


def trade_costs(rows: pd.DataFrame, model_weighted: bool = False) -> pd.DataFrame:
    """Per rule, region and band over burden rows (`burden`, one milestone): the median abatement cost without
    trade and after trade over the same scenarios, those with both (`n`, `models`), and the median GDP (PPP)
    loss over the scenarios that have one (`n_loss`, `models_loss`)."""
    by = ["rule", "region", "band"]
    both = rows.dropna(subset=["cost", "cost_after_trade"])
    cost = queries.summarise(both, by, "cost", model_weighted)[[*by, "n", "models", "median"]]
    after = queries.summarise(both, by, "cost_after_trade", model_weighted)[[*by, "median"]]
    loss = queries.summarise(rows.dropna(subset=["loss_pct"]), by, "loss_pct", model_weighted)
    loss = loss[[*by, "n", "models", "median"]].rename(
        columns={"n": "n_loss", "models": "models_loss", "median": "loss_pct"}
    )
    out = cost.rename(columns={"median": "cost"}).merge(after.rename(columns={"median": "cost_after_trade"}), on=by)
    out = out.merge(loss, on=by, how="outer")
    counts = ["n", "models", "n_loss", "models_loss"]
    out[counts] = out[counts].fillna(0).astype("int64")
    return out.sort_values(by).reset_index(drop=True)


def share_medians(shares: pd.DataFrame, model_weighted: bool = False) -> pd.DataFrame:
    """Per basis variable, region and band over `cost_shares` rows (one milestone): scenarios with a share (`n`),
    models and the median share (a fraction)."""
    return queries.summarise(shares, ["variable", "region", "band"], "share", model_weighted)
