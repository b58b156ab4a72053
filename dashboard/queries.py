"""Pure query functions for the dashboard: a DuckDB connection in, a DataFrame (or plain values) out."""

from __future__ import annotations

import threading
import uuid
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any

import duckdb
import pandas as pd
import pyarrow as pa

from milepost.dashboard import stats
from milepost.validate.findings import FINDING_COLUMNS
from milepost.validate.sql import identifier
from milepost.validate.store.database import select_columns, stored_columns
from milepost.validate.store.pairs import OWN_PERIOD_KINDS as PAIR_OWN_PERIOD_KINDS

RATE_KINDS = ("rate_cagr", "rate_linear", "rate_linear_base", "rate_absolute")
# The rates the Rates page offers beside CAGR, and how each is named there (definitions: schema/indicators.toml).
LINEAR_RATES = ("rate_linear_base", "rate_linear", "rate_absolute")
RATE_LABELS = {
    "rate_cagr": "CAGR",
    "rate_linear": "linear, % of the start value",
    "rate_linear_base": "linear, % of the base-year value",
    "rate_absolute": "absolute, per year",
}
LOSS_VARIABLES = ("gdp.mer", "gdp.ppp", "consumption")
# (kind, variable) -> label shown on the Costs page, in display order
COST_METRICS: dict[tuple[str, str], str] = {
    ("loss_pct", "gdp.mer"): "GDP (MER) loss",
    ("loss_pct", "gdp.ppp"): "GDP (PPP) loss",
    ("loss_pct", "consumption"): "Consumption loss",
    ("growth_reduction_pp", "gdp.mer"): "GDP (MER) growth reduction",
    ("growth_reduction_pp", "gdp.ppp"): "GDP (PPP) growth reduction",
    ("growth_reduction_pp", "consumption"): "Consumption growth reduction",
    ("value", "price.carbon"): "Carbon price",
    ("npv", "cost.abatement"): "NPV of abatement cost",
}


@dataclass(frozen=True)
class Selection:
    """Which scenarios are compared and how they are grouped into bands by their value at a milestone."""

    variable: str = "emissions.ghg"
    year: int = 2030
    region: str = "World"
    edges: tuple[float, ...] = ()  # band edges; empty = terciles of the selected values
    models: tuple[str, ...] = ()  # empty = every model
    attribute: str = ""  # scenario attribute to filter on ("" = none)
    attribute_values: tuple[str, ...] = ()
    include_references: bool = False  # scenarios that others name as their reference (no-policy runs)
    basis: str = "raw"  # "raw" values as submitted, or "harmonised" to the base-year reference values
    outcome: tuple[tuple[str, str], ...] | None = None  # (model, scenario) of the selected outcome; None = all
    outcome_label: str = ""  # says which outcome, for headlines ("within the 2 °C budget (67 %)")
    weighting: str = "scenario"  # "model": band statistics weight each model equally
    likelihood: str = "67%"  # the carbon-budget likelihood of outcome classes, budget lines and default pairs

    @property
    def model_weighted(self) -> bool:
        return self.weighting == "model"

    def params(self) -> dict[str, Any]:
        keys = self.outcome or ()
        return {
            "outcome_on": self.outcome is not None,
            "outcome_models": [k[0] for k in keys],
            "outcome_scenarios": [k[1] for k in keys],
            "variable": self.variable,
            "year": int(self.year),
            "region": self.region,
            "edges": sorted(float(e) for e in self.edges),
            "models": list(self.models),
            "attribute": self.attribute,
            "attribute_values": list(self.attribute_values),
            "include_references": bool(self.include_references),
            "basis": self.basis,
        }


@dataclass(frozen=True)
class Choices:
    """What the database offers to choose from."""

    variables: list[str] = field(default_factory=list)
    years: list[int] = field(default_factory=list)
    base_year: int | None = None
    regions: list[str] = field(default_factory=list)
    models: list[str] = field(default_factory=list)
    attributes: list[str] = field(default_factory=list)
    data_variables: list[str] = field(default_factory=list)
    bases: list[str] = field(default_factory=lambda: ["raw"])  # "harmonised" too once such values are stored

    @property
    def milestones(self) -> list[int]:
        return [y for y in self.years if self.base_year is None or y > self.base_year]


# The selected ensemble at the milestone (filters, then the outcome: every result speaks of the selected outcome
# only), its band edges (given, or terciles of the selection) and each scenario's band number (how many edges its
# value reaches). Every results query starts from `banded` (see `_banded`).
_BANDED = """
sel AS (
  SELECT i.model, i.scenario, i.value AS band_value, s.attributes
  FROM {indicators} i
  LEFT JOIN current_scenarios s ON s.model = i.model AND s.scenario = i.scenario
  WHERE i.basis = $basis AND i.kind = 'value' AND i.variable = $variable AND i.region = $region
    AND i.year_from = $year AND i.year_to = $year AND i.value IS NOT NULL
    AND (len($models::VARCHAR[]) = 0 OR list_contains($models::VARCHAR[], i.model))
    AND ($attribute = '' OR len($attribute_values::VARCHAR[]) = 0
         OR list_contains($attribute_values::VARCHAR[], s.attributes ->> $attribute))
    AND ($include_references OR NOT EXISTS (
         SELECT 1 FROM current_scenarios r
         WHERE r.model = i.model AND r.reference = i.scenario AND r.scenario <> i.scenario))
    AND (NOT $outcome_on OR EXISTS (
         SELECT 1 FROM (SELECT unnest($outcome_models::VARCHAR[]) AS m, unnest($outcome_scenarios::VARCHAR[]) AS s) o
         WHERE o.m = i.model AND o.s = i.scenario))
),
edges AS (
  SELECT unnest(CASE WHEN len($edges::DOUBLE[]) = 0
                     THEN (SELECT quantile_cont(band_value, [1/3, 2/3]) FROM sel)
                     ELSE $edges::DOUBLE[] END) AS e
),
banded AS (
  SELECT sel.*, (SELECT count(*) FROM edges WHERE sel.band_value >= edges.e)::INTEGER AS band FROM sel
)
"""


def _df(con: duckdb.DuckDBPyConnection, sql: str, params: dict[str, Any] | list[Any] | None = None) -> pd.DataFrame:
    return con.execute(sql, params or {}).df()


def _has_basis(con: duckdb.DuckDBPyConnection) -> bool:
    """Whether stored rows carry a `basis` (schema 4 on); an older database, not migrated yet, holds raw values."""
    return "basis" in stored_columns(con, "data")


def _indicators(con: duckdb.DuckDBPyConnection) -> str:
    """The current indicators of every basis (column `basis`), also in a database written before bases existed."""
    return "current_indicators_by_basis" if _has_basis(con) else "(SELECT *, 'raw' AS basis FROM current_indicators)"


def _data(con: duckdb.DuckDBPyConnection) -> str:
    """The current data of every basis (column `basis`), also in a database written before bases existed."""
    return "current_data_by_basis" if _has_basis(con) else "(SELECT *, 'raw' AS basis FROM current_data)"


def _banded(con: duckdb.DuckDBPyConnection, sel: Selection | None = None) -> str:
    return _BANDED.format(indicators=_slice(con, sel) if sel is not None else _indicators(con))


# ---------------------------------------------------------------- the indicators of one selection, cached

# Every Screen and Rates query reads the current indicators of one (basis, variable, region): a few hundred
# thousand rows of tens of millions. They are read once per version of the database and kept as an Arrow table
# (a page rerun, a second reviewer and a filter change on the same variable read them again from memory).
SLICE_ENTRIES = 16
_SLICES: OrderedDict[tuple[Any, ...], pa.Table] = OrderedDict()
_SLICES_LOCK = threading.Lock()
_MARK_LOCK = threading.Lock()


# Where a connection keeps the key of the file version it was opened on: a table of its own in-memory catalog
# (the Reader's connection is an in-memory DuckDB with the file attached), which every cursor of it sees.
_OPENED_AS = "memory.main.milepost_opened_as"


def mark_opened(con: duckdb.DuckDBPyConnection, key: tuple[Any, ...]) -> None:
    """Record on `con` the key of the file version it was opened on (`dashboard/connection.file_key`): the slice
    cache keys on it, so a slice read through `con` is only ever handed to connections opened on the same key."""
    con.execute(f"CREATE OR REPLACE TABLE {_OPENED_AS} AS SELECT ?::VARCHAR AS key", [repr(key)])


def _opened_as(con: duckdb.DuckDBPyConnection) -> str | None:
    """The key `mark_opened` recorded on `con`; a connection opened without one (a Reader of the bench or of a
    test) gets a token of its own on first use, so its slices are never shared with another connection. None
    where the connection cannot hold one (no in-memory catalog): nothing is cached then."""
    read = f"SELECT key FROM {_OPENED_AS}"  # noqa: S608 - a constant of this module
    try:
        row = con.execute(read).fetchone()
    except duckdb.CatalogException:
        with _MARK_LOCK:  # two cursors of one connection meeting it unmarked: one token, the first
            try:
                con.execute(
                    f"CREATE TABLE IF NOT EXISTS {_OPENED_AS} AS SELECT ?::VARCHAR AS key",
                    [f"connection {uuid.uuid4()}"],
                )
                row = con.execute(read).fetchone()
            except duckdb.Error:
                return None
    return None if row is None else str(row[0])


def signature(con: duckdb.DuckDBPyConnection) -> tuple[Any, ...] | None:
    """What identifies the content a connection reads: the key of the file version it was opened on
    (`mark_opened`: path, inode and modification time as the connection layer saw them when it opened the file),
    the file's settings (schema version, creation time, outdated marks) and its submissions with their status.

    Never a fresh look at the file: a writer may have replaced it since the connection opened it, and the new
    file's inode beside the old connection's rows would label them as the new version's. None for an in-memory
    database."""
    (path,) = con.execute("SELECT path FROM duckdb_databases() WHERE database_name = current_database()").fetchall()[0]
    if not path:
        return None
    opened = _opened_as(con)
    if opened is None:
        return None
    meta, subs, rows = con.execute(
        "SELECT (SELECT list((key, value) ORDER BY key) FROM meta), "
        "(SELECT list((id, status) ORDER BY id) FROM submissions), (SELECT count(*) FROM indicators)"
    ).fetchall()[0]
    return (opened, str(meta), str(subs), rows)


def _slice(con: duckdb.DuckDBPyConnection, sel: Selection) -> str:
    """The name of a relation on `con` holding the current indicators of `sel`'s basis, variable and region (the
    filters every query on it applies anyway), registered from the cache."""
    version = signature(con)
    key = (version, sel.basis, sel.variable, sel.region)
    with _SLICES_LOCK:
        table = _SLICES.get(key) if version is not None else None
        if table is not None:
            _SLICES.move_to_end(key)
    if table is None:
        table = con.sql(
            f"SELECT * FROM {_indicators(con)} WHERE basis = $basis AND variable = $variable AND region = $region",  # noqa: S608 - fragments of this module; values bound as $parameters
            params={"basis": sel.basis, "variable": sel.variable, "region": sel.region},
        ).to_arrow_table()
        if version is not None:
            with _SLICES_LOCK:
                _SLICES[key] = table
                while len(_SLICES) > SLICE_ENTRIES:
                    _SLICES.popitem(last=False)
    con.register("selection_indicators", table)
    return "selection_indicators"


def clear_cache() -> None:
    """Forget the cached indicator slices (the bench's cold runs; tests)."""
    with _SLICES_LOCK:
        _SLICES.clear()


def _note(con: duckdb.DuckDBPyConnection) -> str:
    """The indicators' note column, or an empty one in a database written before notes existed (schema 1)."""
    return "i.note" if "note" in stored_columns(con, "indicators") else "NULL::VARCHAR"


def indicators_outdated(con: duckdb.DuckDBPyConnection) -> str | None:
    """Why the stored indicators follow older conventions (a migration waits for the next ingest), or None."""
    from milepost.validate.store.recompute import outdated_reason

    return outdated_reason(con)


def band_labels(n_bands: int) -> list[str]:
    """Names of the bands, lowest first."""
    if n_bands <= 1:
        return ["all"]
    if n_bands == 2:
        return ["low", "high"]
    if n_bands == 3:
        return ["low", "middle", "high"]
    return ["B1 low", *[f"B{i}" for i in range(2, n_bands)], f"B{n_bands} high"]


def choices(con: duckdb.DuckDBPyConnection) -> Choices:
    """Variables, milestone years, regions, models and scenario attributes present in the current data.

    The distinct values come from the base tables restricted to submissions that still have a current scenario
    (a semi-join on the submission id): joining the views on (submission, model, scenario) first costs about a
    second on a 3,000-scenario database, for the same lists.
    """
    live = "submission_id IN (SELECT submission_id FROM current_versions)"

    def column(sql: str) -> list[Any]:
        return [v for (v,) in con.execute(sql).fetchall()]

    years = [
        int(y)
        for y in column(f"SELECT DISTINCT year_from FROM indicators WHERE kind = 'value' AND {live} ORDER BY 1")  # noqa: S608 - fragments of this module; values bound as $parameters
    ]
    variables = column(f"SELECT DISTINCT variable FROM indicators WHERE kind = 'value' AND {live} ORDER BY 1")  # noqa: S608 - fragments of this module; values bound as $parameters
    regions = column(
        f"SELECT DISTINCT region FROM indicators WHERE kind = 'value' AND {live} ORDER BY region <> 'World', region"  # noqa: S608 - fragments of this module; values bound as $parameters
    )
    models = column("SELECT DISTINCT model FROM current_scenarios ORDER BY 1")
    attributes = column("""SELECT DISTINCT k FROM (SELECT unnest(json_keys(attributes)) AS k FROM current_scenarios
                           WHERE attributes IS NOT NULL) WHERE k <> 'reference' ORDER BY 1""")
    # the base year is where every `cumulative` indicator starts; without them, the first value year
    (base,) = con.execute(
        f"SELECT coalesce((SELECT min(year_from) FROM indicators WHERE kind = 'cumulative' AND {live}), "  # noqa: S608 - fragments of this module; values bound as $parameters
        f"(SELECT min(year_from) FROM indicators WHERE kind = 'value' AND {live}))"
    ).fetchall()[0]
    data_variables = column(f"SELECT DISTINCT variable FROM data WHERE {live} ORDER BY 1")  # noqa: S608 - fragments of this module; values bound as $parameters
    bases = ["raw"]
    if _has_basis(con):
        bases = column(f"SELECT DISTINCT basis FROM data WHERE {live} ORDER BY basis <> 'raw', basis") or bases  # noqa: S608 - fragments of this module; values bound as $parameters
    return Choices(
        variables,
        years,
        int(base) if base is not None else None,
        regions,
        models,
        attributes,
        data_variables,
        bases,
    )


def attribute_values(con: duckdb.DuckDBPyConnection, attribute: str) -> list[str]:
    """The distinct values of one scenario attribute."""
    rows = con.execute(
        "SELECT DISTINCT attributes ->> $a AS v FROM current_scenarios WHERE v IS NOT NULL ORDER BY 1", {"a": attribute}
    ).fetchall()
    return [v for (v,) in rows]


def band_edges(con: duckdb.DuckDBPyConnection, sel: Selection) -> list[float]:
    """The band edges in use: the given ones, or the terciles of the selected values."""
    (edges,) = con.execute(f"WITH {_banded(con, sel)} SELECT list(e ORDER BY e) FROM edges", sel.params()).fetchall()[0]  # noqa: S608 - fragments of this module; values bound as $parameters
    return [float(e) for e in edges or []]


def selected(con: duckdb.DuckDBPyConnection, sel: Selection) -> pd.DataFrame:
    """The selected scenarios with their band number and value at the milestone."""
    sql = (
        f"WITH {_banded(con, sel)} SELECT model, scenario, band, band_value FROM banded "  # noqa: S608 - fragments of this module; values bound as $parameters
        "ORDER BY band, band_value, model, scenario"
    )
    return _df(con, sql, sel.params())


def variable_unit(con: duckdb.DuckDBPyConnection, variable: str) -> str:
    """The (contract) unit of a variable as stored."""
    rows = con.execute("SELECT unit FROM current_data WHERE variable = $v LIMIT 1", {"v": variable}).fetchall()
    return (rows[0][0] or "") if rows else ""


def screen_table(
    con: duckdb.DuckDBPyConnection,
    sel: Selection,
    base_year: int | None,
    next_year: int | None,
    attributes: list[str] | tuple[str, ...] = (),
) -> pd.DataFrame:
    """One row per selected scenario: band, value at the milestone and key indicators of the same variable.

    `net_zero_searched_to` is the last year the net-zero year was sought in (the series' last reported year), so
    an empty net-zero year reads "not reached by" that year; `net_zero_note` is the stored note.
    """
    params = {**sel.params(), "base": base_year, "next": next_year}
    attr_cols = "".join(f", b.attributes ->> $attr_{i} AS {identifier(a)}" for i, a in enumerate(attributes))
    params.update({f"attr_{i}": a for i, a in enumerate(attributes)})
    # Aggregated per scenario before the join (only the kinds shown), so the attributes are read from JSON once
    # per scenario rather than once per indicator row (measured at 3,000 scenarios: 54 ms -> 35 ms, with the slice
    # looked up once).
    selection = _slice(con, sel)  # once: each call looks up the database's signature
    sql = f"""WITH {_BANDED.format(indicators=selection)},
    per_scenario AS (
      SELECT i.model, i.scenario,
        max(i.value) FILTER (WHERE i.kind = 'value' AND i.year_from = $base) AS base_value,
        max(i.value) FILTER (WHERE i.kind = 'rate_cagr' AND i.year_from = $base AND i.year_to = $year) AS cagr_to,
        max(i.value) FILTER (WHERE i.kind = 'rate_cagr' AND i.year_from = $year AND i.year_to = $next) AS cagr_after,
        max(i.value) FILTER (WHERE i.kind = 'cumulative' AND i.year_to = $year) AS cumulative,
        max(i.unit) FILTER (WHERE i.kind = 'cumulative' AND i.year_to = $year) AS cumulative_unit,
        max(i.value) FILTER (WHERE i.kind = 'net_zero_year') AS net_zero_year,
        max(i.year_to) FILTER (WHERE i.kind = 'net_zero_year') AS net_zero_searched_to,
        max({_note(con)}) FILTER (WHERE i.kind = 'net_zero_year') AS net_zero_note,
        max(i.value) FILTER (WHERE i.kind = 'peak_year') AS peak_year
      FROM {selection} i
      WHERE i.basis = $basis AND i.region = $region AND i.variable = $variable
        AND i.kind IN ('value', 'rate_cagr', 'cumulative', 'net_zero_year', 'peak_year')
      GROUP BY i.model, i.scenario
    )
    SELECT b.model, b.scenario{attr_cols}, b.band, b.band_value AS value, a.* EXCLUDE (model, scenario)
    FROM banded b
    LEFT JOIN per_scenario a ON a.model = b.model AND a.scenario = b.scenario
    ORDER BY b.band, value, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, params)


def rate_periods(con: duckdb.DuckDBPyConnection, variable: str, region: str) -> list[tuple[int, int]]:
    """The (year_from, year_to) pairs for which reduction rates exist."""
    # current_indicators holds the raw basis: its slice of the cache is the same rows
    raw = _slice(con, Selection(variable=variable, region=region, basis="raw"))
    rows = con.execute(
        f"""SELECT DISTINCT year_from, year_to FROM {raw}
           WHERE list_contains($kinds::VARCHAR[], kind) AND variable = $v AND region = $r ORDER BY 1, 2""",  # noqa: S608 - fragments of this module; values bound as $parameters
        {"v": variable, "r": region, "kinds": list(RATE_KINDS)},
    ).fetchall()
    return [(int(a), int(b)) for a, b in rows]


def rates(con: duckdb.DuckDBPyConnection, sel: Selection, year_from: int, year_to: int) -> pd.DataFrame:
    """Every rate kind (CAGR, the linear rates, the absolute rate) of the band variable over one period, one row per
    scenario and kind (value may be null), with the unit of each."""
    selection = _slice(con, sel)  # once: each call looks up the database's signature
    sql = f"""WITH {_BANDED.format(indicators=selection)}
    SELECT b.model, b.scenario, b.band, b.band_value, i.kind, i.value, i.unit
    FROM banded b
    JOIN {selection} i ON i.model = b.model AND i.scenario = b.scenario
         AND i.basis = $basis AND i.region = $region AND i.variable = $variable
         AND list_contains($kinds::VARCHAR[], i.kind) AND i.year_from = $yf AND i.year_to = $yt
    ORDER BY i.kind, b.band, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {**sel.params(), "yf": int(year_from), "yt": int(year_to), "kinds": list(RATE_KINDS)})


def cagr_undefined(df: pd.DataFrame) -> pd.DataFrame:
    """Per band of a `rates` frame: scenarios whose CAGR is empty although both values exist (one is at or below
    zero, where a compound rate has no real value); their linear and absolute rates exist."""
    wide = df.pivot_table(index=["model", "scenario", "band"], columns="kind", values="value", dropna=False)
    wide = wide.reset_index()
    if "rate_cagr" not in wide or "rate_absolute" not in wide:
        return pd.DataFrame({"band": pd.Series(dtype="int64"), "n": pd.Series(dtype="int64")})
    undefined = wide[wide["rate_cagr"].isna() & wide["rate_absolute"].notna()]
    return undefined.groupby("band", as_index=False).size().rename(columns={"size": "n"})


def reference_names(con: duckdb.DuckDBPyConnection, sel: Selection) -> list[str]:
    """The reference scenarios (scenarios table, column `reference`) that the selected scenarios are compared with."""
    sql = f"""WITH {_banded(con)}
    SELECT DISTINCT s.reference FROM banded b JOIN current_scenarios s ON s.model = b.model AND s.scenario = b.scenario
    WHERE s.reference IS NOT NULL ORDER BY 1"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return [r for (r,) in con.execute(sql, sel.params()).fetchall()]


def costs(con: duckdb.DuckDBPyConnection, sel: Selection, base_year: int | None) -> pd.DataFrame:
    """Cost indicators (losses, carbon price, NPV) of the selected scenarios in the band region, long format."""
    sql = f"""WITH {_banded(con)}
    SELECT b.model, b.scenario, b.band, i.kind, i.variable, i.year_from, i.year_to AS year, i.value, i.unit
    FROM banded b
    JOIN {_indicators(con)} i ON i.model = b.model AND i.scenario = b.scenario AND i.region = $region
         AND i.basis = $basis
    WHERE (i.kind = 'loss_pct' AND i.variable IN ('gdp.mer', 'gdp.ppp', 'consumption'))
       OR (i.kind = 'growth_reduction_pp' AND i.variable IN ('gdp.mer', 'gdp.ppp', 'consumption'))
       OR (i.kind = 'value' AND i.variable = 'price.carbon' AND i.year_from > coalesce($base, -1))
       OR (i.kind = 'npv' AND i.variable = 'cost.abatement')
    ORDER BY i.kind, i.variable, year, b.band, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {**sel.params(), "base": base_year})


def pathway_bands(
    con: duckdb.DuckDBPyConnection, sel: Selection, variable: str, region: str, basis: str | None = None
) -> pd.DataFrame:
    """Per band and year: n, median and the 5/25/75/95 % quantiles of `variable` in `region`.

    The bands come from the selection (on its basis); the values shown from `basis` (default: the selection's),
    so raw and harmonised pathways of the same scenarios can be drawn side by side. With `sel.weighting` =
    "model" each model weighs the same: the quantiles are then computed from the scenario points in pandas."""
    if sel.model_weighted:
        points = _df(
            con,
            f"""WITH {_banded(con)}
            SELECT b.band, b.model, d.year, d.unit, d.value FROM banded b
            JOIN {_data(con)} d ON d.model = b.model AND d.scenario = b.scenario
                 AND d.basis = $shown_basis AND d.variable = $pv AND d.region = $pr
            WHERE d.value IS NOT NULL""",  # noqa: S608 - fragments of this module; values bound as $parameters
            {**sel.params(), "pv": variable, "pr": region, "shown_basis": basis or sel.basis},
        )
        cols = ["band", "year", "unit", "n", "q05", "q25", "median", "q75", "q95"]
        if points.empty:
            return pd.DataFrame(columns=cols)
        by = ["band", "year"]
        w = points.assign(w=stats.model_weights(points, by))
        qs = {"q05": 0.05, "q25": 0.25, "median": 0.5, "q75": 0.75, "q95": 0.95}
        out = stats.weighted_quantiles(w, by, "value", "w", qs)
        size = points.groupby(by, as_index=False).agg(unit=("unit", "first"), n=("value", "count"))
        return size.merge(out, on=by).sort_values(by).reset_index(drop=True)[cols]
    sql = f"""WITH {_banded(con)}, q AS (
      SELECT b.band, d.year, any_value(d.unit) AS unit, count(d.value) AS n,
             quantile_cont(d.value, [0.05, 0.25, 0.5, 0.75, 0.95]) AS q
      FROM banded b
      JOIN {_data(con)} d ON d.model = b.model AND d.scenario = b.scenario
           AND d.basis = $shown_basis AND d.variable = $pv AND d.region = $pr
      WHERE d.value IS NOT NULL
      GROUP BY ALL)
    SELECT band, year, unit, n, q[1] AS q05, q[2] AS q25, q[3] AS median, q[4] AS q75, q[5] AS q95
    FROM q ORDER BY band, year"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {**sel.params(), "pv": variable, "pr": region, "shown_basis": basis or sel.basis})


def scenario_series(
    con: duckdb.DuckDBPyConnection, variable: str, region: str, keys: list[tuple[str, str]], basis: str = "raw"
) -> pd.DataFrame:
    """The reported (or harmonised) points of `variable` in `region` for the given (model, scenario) pairs."""
    sql = f"""WITH k AS (SELECT unnest($m::VARCHAR[]) AS model, unnest($s::VARCHAR[]) AS scenario)
    SELECT d.model, d.scenario, d.year, d.value, d.unit
    FROM {_data(con)} d JOIN k USING (model, scenario)
    WHERE d.basis = $b AND d.variable = $v AND d.region = $r ORDER BY d.model, d.scenario, d.year"""  # noqa: S608 - fragments of this module; values bound as $parameters
    params = {"m": [k[0] for k in keys], "s": [k[1] for k in keys], "v": variable, "r": region, "b": basis}
    return _df(con, sql, params)


def harmonisation_methods(con: duckdb.DuckDBPyConnection, sel: Selection, variable: str, region: str) -> pd.DataFrame:
    """How each selected scenario's `variable` in `region` was harmonised: method, factor or offset, why
    (no rows in a database without harmonised values)."""
    names = ["model", "scenario", "band", "method", "factor", "offset", "convergence_year", "base_value"]
    names += ["reference_value", "unit", "note"]
    if not _has_basis(con):
        return pd.DataFrame({n: pd.Series(dtype="float64" if n in ("factor", "offset") else "object") for n in names})
    columns = "b.model, b.scenario, b.band, h.method, h.factor, h.offset_value AS offset, h.convergence_year, "
    columns += "h.base_value, h.reference_value, h.unit, h.note"
    sql = f"""WITH {_banded(con)}
    SELECT {columns}
    FROM banded b
    JOIN current_harmonisation h ON h.model = b.model AND h.scenario = b.scenario
         AND h.variable = $pv AND h.region = $pr
    ORDER BY b.band, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {**sel.params(), "pv": variable, "pr": region})


def data_regions(con: duckdb.DuckDBPyConnection, variable: str) -> list[str]:
    """Regions that report `variable`, World first."""
    rows = con.execute(
        "SELECT DISTINCT region FROM current_data WHERE variable = $v ORDER BY region <> 'World', region",
        {"v": variable},
    ).fetchall()
    return [r for (r,) in rows]


def contract_name(con: duckdb.DuckDBPyConnection) -> str | None:
    """The contract of the newest accepted submission."""
    rows = con.execute("""SELECT contract_name FROM submissions WHERE status = 'accepted'
                          ORDER BY submitted_at DESC, id DESC LIMIT 1""").fetchall()
    return rows[0][0] if rows else None


def contract_names(con: duckdb.DuckDBPyConnection) -> list[str]:
    """Every contract the database's submissions name, the most recently used first."""
    rows = con.execute("""SELECT contract_name FROM submissions WHERE contract_name IS NOT NULL
                          GROUP BY 1 ORDER BY max(submitted_at) DESC, 1""").fetchall()
    return [r[0] for r in rows]


def submissions(con: duckdb.DuckDBPyConnection) -> pd.DataFrame:
    """Every submission, newest first, with its version per model (the `submission_versions` view; none if rejected)
    and `retried` (a rejected attempt followed by another submission of the model or files): the rows of
    `milepost submissions`, from the same library function."""
    from milepost.validate.store.exports import submission_rows  # the exports module is heavy; only this page needs it

    cols = ["id", "model", "version", "status", "retried", "submitted_at", "submitted_by", "rows", "errors",
            "warnings", "notes", "superseded_by", "contract_name", "note", "sha256"]  # fmt: skip
    rows = submission_rows(con)
    out = pd.DataFrame([{c: r[c] for c in cols} for r in rows], columns=cols)
    for c in ("version", "superseded_by"):
        out[c] = out[c].astype("Int64")
    return out.iloc[::-1].reset_index(drop=True)


def rule_counts(con: duckdb.DuckDBPyConnection) -> pd.DataFrame:
    """Findings per submission, rule and severity."""
    return _df(
        con,
        """SELECT submission_id, rule, severity, count(*) AS n FROM findings
                       GROUP BY ALL ORDER BY submission_id, rule""",
    )


def findings(
    con: duckdb.DuckDBPyConnection,
    submission_id: int,
    rules: list[str] | tuple[str, ...] = (),
    severities: list[str] | tuple[str, ...] = (),
    limit: int = 5000,
) -> pd.DataFrame:
    """The findings of one submission, optionally restricted to some rules and severities."""
    sql = f"""SELECT {select_columns(con, "findings", FINDING_COLUMNS)}
      FROM findings
      WHERE submission_id = $id
        AND (len($rules::VARCHAR[]) = 0 OR list_contains($rules::VARCHAR[], rule))
        AND (len($sev::VARCHAR[]) = 0 OR list_contains($sev::VARCHAR[], severity))
      ORDER BY severity = 'error' DESC, severity = 'warning' DESC, rule, path, line
      LIMIT $limit"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {"id": int(submission_id), "rules": list(rules), "sev": list(severities), "limit": limit})


def summarise(df: pd.DataFrame, by: list[str], value: str = "value", model_weighted: bool = False) -> pd.DataFrame:
    """n (non-null), n_missing, models, median and interquartile range of `value` per group (see dashboard.stats)."""
    return stats.summarise(df, by, value, model_weighted)


def band_ratio(summary: pd.DataFrame, by: list[str], top: int, bottom: int) -> pd.DataFrame:
    """Median of band `top` over median of band `bottom` per group, with both band sizes (ratio only if bottom > 0)."""
    cols = [*by, "median", "n"]
    t = summary.loc[summary["band"] == top, cols].rename(columns={"median": "median_top", "n": "n_top"})
    b = summary.loc[summary["band"] == bottom, cols].rename(columns={"median": "median_bottom", "n": "n_bottom"})
    out = t.merge(b, on=by, how="outer")
    out[["n_top", "n_bottom"]] = out[["n_top", "n_bottom"]].fillna(0).astype("int64")
    out["ratio"] = out["median_top"] / out["median_bottom"].where(out["median_bottom"] > 0)
    return out


def full_scan(con: duckdb.DuckDBPyConnection) -> tuple[int, float]:
    """Count and sum over the whole indicators table: the floor the bench compares the page queries with."""
    n, s = con.execute("SELECT count(*), sum(value) FROM indicators").fetchall()[0]
    return int(n), float(s or 0.0)


# ---------------------------------------------------------------- outcomes (carbon-budget classes, ranges)

# kinds whose period is each scenario's own (to its net-zero year, its reported range): a range filter on them
# does not name years
OWN_PERIOD_KINDS = PAIR_OWN_PERIOD_KINDS
FIRST_INDICATORS = ("cumulative_net_zero", "warming_peak", "warming_peak_low", "warming_peak_high", "net_zero_year")


@dataclass(frozen=True)
class OutcomeSpec:
    """Which long-term outcome the results speak of: all scenarios, budget classes, or a range of an indicator."""

    mode: str = "all"  # all | class | range
    likelihood: str = "67%"
    levels: tuple[float | None, ...] = ()  # warming levels of budget_level; None = above every budget
    indicator: str = ""  # range: an `indicator_key`
    low: float | None = None
    high: float | None = None
    region: str = "World"
    basis: str = "raw"  # the values the outcome is read from (raw or harmonised), as the bands


@dataclass(frozen=True)
class OutcomeOptions:
    """What the database offers for the outcome filter."""

    region: str = "World"
    likelihoods: list[str] = field(default_factory=list)
    levels: dict[str, list[float]] = field(default_factory=dict)  # likelihood -> warming levels present
    above: dict[str, bool] = field(default_factory=dict)  # likelihood -> some scenario is above every budget
    indicators: list[tuple[str, str]] = field(default_factory=list)  # (indicator_key, label)


def indicator_key(kind: str, variable: str, year_from: int | None = None, year_to: int | None = None) -> str:
    """'kind|variable|year_from|year_to' (years empty for kinds over each scenario's own period)."""
    yf = "" if year_from is None else str(int(year_from))
    yt = "" if year_to is None else str(int(year_to))
    return f"{kind}|{variable}|{yf}|{yt}"


def parse_indicator_key(key: str) -> tuple[str, str, int | None, int | None]:
    """The parts of an indicator_key; ValueError if it is not one."""
    kind, variable, yf, yt = key.split("|")
    return kind, variable, int(yf) if yf else None, int(yt) if yt else None


def level_text(level: float | None) -> str:
    """'2', '1.5', or 'above' for the class above every budget."""
    return "above" if level is None else f"{level:g}"


def class_label(level: float | None, likelihood: str) -> str:
    """'within the 1.5 °C budget (67 %)' or 'above every budget (67 %)'."""
    lik = likelihood.replace("%", " %")
    if level is None:
        return f"above every budget ({lik})"
    return f"within the {level:g} °C budget ({lik})"


def budget_region(con: duckdb.DuckDBPyConnection) -> str | None:
    """The region the carbon-budget indicators are written for (None without them)."""
    rows = con.execute("SELECT DISTINCT region FROM current_indicators WHERE kind = 'budget_level' LIMIT 1").fetchall()
    return rows[0][0] if rows else None


def outcome_options(con: duckdb.DuckDBPyConnection, region: str, basis: str = "raw") -> OutcomeOptions:
    """Likelihoods and warming levels of the budget classes, and the scenario-level indicators of `region`."""
    rows = con.execute(
        f"""SELECT variable, list(DISTINCT value ORDER BY value) FILTER (WHERE value IS NOT NULL),
                  bool_or(value IS NULL)
           FROM {_indicators(con)} WHERE basis = $b AND kind = 'budget_level' AND region = $r
           GROUP BY variable""",  # noqa: S608 - fragments of this module; values bound as $parameters
        {"r": region, "b": basis},
    ).fetchall()
    rows.sort(key=lambda r: float(str(r[0]).rstrip("%") or 0))
    found = con.execute(
        f"""SELECT kind, variable,
                  CASE WHEN list_contains($own::VARCHAR[], kind) THEN NULL ELSE year_from END AS yf,
                  CASE WHEN list_contains($own::VARCHAR[], kind) THEN NULL ELSE year_to END AS yt,
                  any_value(unit) AS unit
           FROM {_indicators(con)} WHERE basis = $b AND region = $r AND kind <> 'budget_level'
           GROUP BY ALL""",  # noqa: S608 - fragments of this module; values bound as $parameters
        {"r": region, "own": list(OWN_PERIOD_KINDS), "b": basis},
    ).fetchall()

    def order(row: tuple[Any, ...]) -> tuple[int, str, str, int, int]:
        kind, variable, yf, yt, _ = row
        first = FIRST_INDICATORS.index(kind) if kind in FIRST_INDICATORS else len(FIRST_INDICATORS)
        return (first, kind, variable, yf or 0, yt or 0)

    indicators = []
    for kind, variable, yf, yt, unit in sorted(found, key=order):
        years = "" if yf is None else f" {yf}" if yf == yt else f" {yf}–{yt}"
        indicators.append((indicator_key(kind, variable, yf, yt), f"{kind} · {variable}{years} [{unit}]"))
    return OutcomeOptions(
        region=region,
        likelihoods=[r[0] for r in rows],
        levels={r[0]: [float(x) for x in (r[1] or [])] for r in rows},
        above={r[0]: bool(r[2]) for r in rows},
        indicators=indicators,
    )


def outcome_keys(con: duckdb.DuckDBPyConnection, spec: OutcomeSpec) -> tuple[tuple[str, str], ...] | None:
    """(model, scenario) of every current scenario with the outcome; None when the spec selects all scenarios."""
    if spec.mode == "class":
        if not spec.levels:
            return None
        rows = con.execute(
            f"""SELECT model, scenario FROM {_indicators(con)}
               WHERE basis = $b AND kind = 'budget_level' AND variable = $lik AND region = $r
                 AND (list_contains($levels::DOUBLE[], value) OR ($above AND value IS NULL))""",  # noqa: S608 - fragments of this module; values bound as $parameters
            {
                "b": spec.basis,
                "lik": spec.likelihood,
                "r": spec.region,
                "levels": [float(x) for x in spec.levels if x is not None],
                "above": any(x is None for x in spec.levels),
            },
        ).fetchall()
    elif spec.mode == "range":
        if not spec.indicator or (spec.low is None and spec.high is None):
            return None
        kind, variable, yf, yt = parse_indicator_key(spec.indicator)
        rows = con.execute(
            f"""SELECT model, scenario FROM {_indicators(con)}
               WHERE basis = $b AND kind = $k AND variable = $v AND region = $r AND value IS NOT NULL
                 AND ($yf IS NULL OR (year_from = $yf AND year_to = $yt))
                 AND ($lo IS NULL OR value >= $lo) AND ($hi IS NULL OR value <= $hi)""",  # noqa: S608 - fragments of this module; values bound as $parameters
            {
                "b": spec.basis,
                "k": kind,
                "v": variable,
                "r": spec.region,
                "yf": yf,
                "yt": yt,
                "lo": spec.low,
                "hi": spec.high,
            },
        ).fetchall()
    else:
        return None
    return tuple(sorted({(m, sc) for m, sc in rows}))


# ---------------------------------------------------------------- budgets and delay pairs


def budget_scenarios(con: duckdb.DuckDBPyConnection, sel: Selection, region: str) -> pd.DataFrame:
    """Per selected scenario: band, milestone value, CO2 to net zero (and its end year), the net-zero year with the
    last year it was sought in and its note (as `screen_table` gives them, for `ui.net_zero_text`), the budget
    class at `sel.likelihood` and the indicative warming (central, low, high)."""
    sql = f"""WITH {_banded(con)}
    SELECT b.model, b.scenario, b.band, b.band_value,
      max(i.value) FILTER (WHERE i.kind = 'cumulative_net_zero') AS cumulative,
      max(i.unit) FILTER (WHERE i.kind = 'cumulative_net_zero') AS unit,
      max(i.year_to) FILTER (WHERE i.kind = 'cumulative_net_zero') AS until,
      max(i.value) FILTER (WHERE i.kind = 'net_zero_year') AS net_zero_year,
      max(i.year_to) FILTER (WHERE i.kind = 'net_zero_year') AS net_zero_searched_to,
      max({_note(con)}) FILTER (WHERE i.kind = 'net_zero_year') AS net_zero_note,
      bool_or(i.kind = 'budget_level') AS has_level,
      max(i.value) FILTER (WHERE i.kind = 'budget_level') AS level,
      max(i.value) FILTER (WHERE i.kind = 'warming_peak') AS warming,
      max(i.value) FILTER (WHERE i.kind = 'warming_peak_low') AS warming_low,
      max(i.value) FILTER (WHERE i.kind = 'warming_peak_high') AS warming_high
    FROM banded b
    JOIN {_indicators(con)} i ON i.model = b.model AND i.scenario = b.scenario AND i.region = $budget_region
     AND i.basis = $basis AND ((i.kind = 'budget_level' AND i.variable = $lik)
          OR (i.variable = 'emissions.co2' AND i.kind IN ('cumulative_net_zero', 'net_zero_year', 'warming_peak',
                                                          'warming_peak_low', 'warming_peak_high')))
    GROUP BY ALL
    ORDER BY b.band, b.band_value, b.model, b.scenario"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {**sel.params(), "budget_region": region, "lik": sel.likelihood})


def pair_rows(con: duckdb.DuckDBPyConnection, sel: Selection, rule: Any, variables: list[str]) -> pd.DataFrame:
    """Pair rows (see milepost.validate.store.pairs) of the pairs whose two scenarios are both selected by `sel`
    (filters and outcome), for `variables` in the band region."""
    from milepost.validate.store.pairs import pair_rows_sql

    pair_sql, params = pair_rows_sql(
        rule, models=sel.models, regions=[sel.region], variables=variables, basis=sel.basis
    )
    sql = f"""WITH {_banded(con)}, rows AS ({pair_sql})
    SELECT r.* FROM rows r
    WHERE EXISTS (SELECT 1 FROM banded b WHERE b.model = r.model AND b.scenario = r.scenario_first)
      AND EXISTS (SELECT 1 FROM banded b WHERE b.model = r.model AND b.scenario = r.scenario_later)"""  # noqa: S608 - fragments of this module; values bound as $parameters
    return _df(con, sql, {**sel.params(), **params})


DELAY_METRICS = ("d_milestone", "d_rate", "npv_ratio", "d_npv", "d_loss")


def delay_table(
    rows: pd.DataFrame, sel: Selection, next_year: int | None, loss_year: int | None
) -> tuple[pd.DataFrame, tuple[int, int] | None]:
    """One row per pair from `pair_rows`: the band variable at the milestone, its CAGR from the milestone to
    `next_year`, NPV of abatement cost over its longest stored period and GDP (MER) loss in `loss_year`, each for
    the first and the later scenario, with the differences (later - first) and the NPV ratio; and that NPV period."""
    keys = ["model", "group", "scenario_first", "scenario_later"]
    out = rows[keys].drop_duplicates().reset_index(drop=True)

    def pick(mask: pd.Series, name: str) -> None:
        nonlocal out
        part = rows.loc[mask, [*keys, "value_first", "value_later", "delta", "ratio"]]
        part = part.drop_duplicates(keys).rename(
            columns={
                "value_first": f"{name}_first",
                "value_later": f"{name}_later",
                "delta": f"d_{name}",
                "ratio": f"{name}_ratio",
            }
        )
        out = out.merge(part, on=keys, how="left")

    var = rows["variable"] == sel.variable
    pick(var & (rows["kind"] == "value") & (rows["year_from"] == sel.year), "milestone")
    pick(
        var & (rows["kind"] == "rate_cagr") & (rows["year_from"] == sel.year) & (rows["year_to"] == next_year),
        "rate",
    )
    npv = rows[(rows["kind"] == "npv") & (rows["variable"] == "cost.abatement")]
    longest = npv["year_to"].max() if len(npv) else None
    start = npv.loc[npv["year_to"] == longest, "year_from"].min() if len(npv) else None
    at = (rows["year_to"] == longest) & (rows["year_from"] == start)
    pick((rows["kind"] == "npv") & (rows["variable"] == "cost.abatement") & at, "npv")
    loss = (rows["kind"] == "loss_pct") & (rows["variable"] == "gdp.mer") & (rows["year_to"] == loss_year)
    pick(loss, "loss")
    wanted = [f"{n}_{s}" for n in ("milestone", "rate", "npv", "loss") for s in ("first", "later")]
    wanted += [f"d_{n}" for n in ("milestone", "rate", "npv", "loss")] + ["npv_ratio"]
    for c in wanted:
        if c not in out:
            out[c] = float("nan")
    period = (int(start), int(longest)) if longest is not None and start is not None else None
    return out[[*keys, *wanted]].sort_values(keys).reset_index(drop=True), period


ALL_PAIRS = "all pairs"


def delay_summary(pairs: pd.DataFrame) -> pd.DataFrame:
    """Per group (and over all pairs, group ALL_PAIRS) and metric: pairs with a value, models, median, the
    model-balanced median (each pair 1/n of its model's pairs in the group), minimum, maximum, and whether the
    figure is thin evidence (`stats.thin`)."""
    cols = ["group", "metric", "n", "models", "median", "balanced", "low", "high", "thin"]
    if pairs.empty:
        return pd.DataFrame(columns=cols)
    long = pairs.melt(id_vars=["model", "group"], value_vars=list(DELAY_METRICS), var_name="metric")
    long = pd.concat([long, long.assign(group=ALL_PAIRS)], ignore_index=True)
    by = ["group", "metric"]
    have = long.dropna(subset=["value"])
    g = have.groupby(by, sort=False)["value"]
    out = pd.DataFrame(
        {"n": g.count(), "models": have.groupby(by, sort=False)["model"].nunique(), "median": g.median()}
    )
    out["low"], out["high"] = g.min(), g.max()
    w = have.assign(w=stats.model_weights(have, by))
    balanced = stats.weighted_quantiles(w, by, "value", "w", {"balanced": 0.5}).set_index(by)
    out = out.join(balanced).reset_index()
    out["thin"] = stats.thin(out["models"])
    groups = [*sorted(set(out["group"]) - {ALL_PAIRS}), ALL_PAIRS]
    out["group"] = pd.Categorical(out["group"], groups, ordered=True)
    out["metric"] = pd.Categorical(out["metric"], list(DELAY_METRICS), ordered=True)
    out = out.sort_values(["group", "metric"]).reset_index(drop=True)
    out["group"], out["metric"] = out["group"].astype(str), out["metric"].astype(str)
    return out[cols]
