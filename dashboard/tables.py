"""The one formatting layer of every dashboard table: readable labels with units, whole-number years, blanks
that say what they mean, and the columns a reader needs first in front.

Pages hand over frames with the query's own column names; `prepare` looks each name up in `COLUMNS` (a page may
override a label, e.g. one that carries the milestone year) and returns the frame to show, renamed, with the
`st.column_config` of each column. The CSV download is made from the same frame, so it holds what is shown.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np
import pandas as pd
import streamlit as st

from milepost.dashboard.stats import THIN_RULE

Kind = Literal["text", "year", "count", "number"]
# what an empty cell shows where its column says nothing more specific ("None" reads like a bug)
PLACEHOLDER = "–"


@dataclass(frozen=True)
class Column:
    """How one column is shown. `blank` is written into empty cells (the column is then shown as text, so it
    sorts as text); `with_unit` puts the table's unit in the label; `round_up` rounds fractional years up."""

    label: str
    kind: Kind = "text"
    help: str | None = None
    blank: str | None = None
    with_unit: bool = False
    format: str | None = None
    width: Literal["small", "medium", "large"] | None = None
    round_up: bool = False


NET_ZERO_HELP = (
    "The first whole year at or below zero; a year found between two reported years is rounded up to the next "
    "whole year (the first whole year whose value is at or below zero)."
)

COLUMNS: dict[str, Column] = {
    # who and which
    "model": Column("model"),
    "scenario": Column("scenario"),
    "band_label": Column("band"),
    "band": Column("band"),
    "values": Column("values", help="As submitted or harmonised to the contract's base-year reference values."),
    "group": Column("group"),
    "metric": Column("metric"),
    "rate": Column("rate"),
    "unit": Column("unit"),
    "range": Column("range", with_unit=True, help="The band's range of the band variable at the milestone."),
    "outcome": Column("outcome class"),
    # years
    "year": Column("year", "year"),
    "year_from": Column("from year", "year", help="The first year of the period (losses: from the base year)."),
    "year_to": Column("to year", "year"),
    "until": Column("summed to", "year", help="The last year summed: the net-zero year, else the last year."),
    "net_zero_year": Column("net-zero year", "year", help=NET_ZERO_HELP, blank="not reached", round_up=True),
    "peak_year": Column("peak year", "year"),
    "convergence_year": Column(
        "convergence year", "year", help="From this year on the model's own values are used.", blank="not used"
    ),
    # counts
    "n": Column("scenarios", "count", help="Scenarios with a value."),
    "n_missing": Column("scenarios without a value", "count", help="Scenarios in the group that lack this value."),
    "models": Column("models", "count", help="Models with at least one value in the group."),
    "pairs": Column("pairs", "count", help="Pairs with a value."),
    # band statistics
    "median": Column("median", "number", with_unit=True),
    "q05": Column("5th percentile", "number", with_unit=True),
    "q25": Column("25th percentile", "number", with_unit=True),
    "q75": Column("75th percentile", "number", with_unit=True),
    "q95": Column("95th percentile", "number", with_unit=True),
    "iqr": Column("interquartile range", "number", with_unit=True, help="75th minus 25th percentile."),
    "balanced": Column("model-balanced median", "number", help="Each pair weighs 1/n, n its model's pairs."),
    "low": Column("min", "number"),
    "high": Column("max", "number"),
    "thin": Column("evidence", help=f"Thin evidence: the figure rests on {THIN_RULE}."),
    # screen and budgets
    "value": Column("value", "number", with_unit=True),
    "band_value": Column("milestone value", "number", with_unit=True),
    "base_value": Column("base-year value", "number", with_unit=True),
    "reference_value": Column("reference value", "number", with_unit=True, blank="no reference value"),
    "cagr_to": Column("CAGR to the milestone [%/yr]", "number", blank="undefined (a value ≤ 0)"),
    "cagr_after": Column("CAGR after the milestone [%/yr]", "number", blank="undefined (a value ≤ 0)"),
    "cumulative": Column("cumulative", "number", with_unit=True),
    "warming": Column("warming 50 % [°C]", "number", blank="no estimate"),
    "warming_low": Column("warming 17 % [°C]", "number", blank="no estimate"),
    "warming_high": Column("warming 83 % [°C]", "number", blank="no estimate"),
    # harmonisation
    "method": Column("method"),
    "factor": Column("factor", "number", format="%.4f", blank="not scaled"),
    "offset": Column("offset", "number", with_unit=True, blank="no offset"),
    "note": Column("note", blank=""),
    # costs and delay
    "ratio": Column("ratio of medians", "number", blank="no ratio (lower median missing or zero)"),
    "loss_first": Column("GDP loss first [%]", "number", blank="no reference"),
    "loss_later": Column("GDP loss later [%]", "number", blank="no reference"),
    "d_loss": Column("Δ GDP loss [pp]", "number", blank="no reference"),
    "npv_first": Column("NPV first", "number", blank="not reported"),
    "npv_later": Column("NPV later", "number", blank="not reported"),
    # submissions
    "id": Column("submission", "count"),
    "version": Column(
        "version", help="Numbered per model; a rejected submission never became data and has no version."
    ),
    "status": Column("status"),
    "errors": Column("errors", "count"),
    "warnings": Column("warnings", "count"),
    "notes": Column("notes", "count"),
    "submitted_at": Column("submitted at (UTC)"),
    "submitted_by": Column("submitted by", blank=""),
    "rows": Column("rows", "count"),
    "superseded_by": Column(
        "replaced by submission", "count", blank="current", help="The later submission that replaced this one."
    ),
    "contract_name": Column("contract"),
    "sha256": Column("SHA-256 of the files"),
    # findings
    "message": Column("message", width="large"),
    "hint": Column("how to fix", blank="", width="large"),
    "rule": Column("rule"),
    "severity": Column("severity"),
    "path": Column("file", blank=""),
    "line": Column("line", "count", blank="", help="The line of the file (1 = the header)."),
    "sheet": Column("sheet", blank=""),
    "region": Column("region", blank=""),
    "variable": Column("variable", blank=""),
    "expected": Column("expected", blank=""),
    "column_name": Column("column", blank=""),
}
# a finding's year and value are what the file holds, not a statistic: shown as found
FINDING_COLUMNS: dict[str, Column] = {
    "model": Column("model", blank=""),
    "scenario": Column("scenario", blank=""),
    "unit": Column("unit", blank=""),
    "year": Column("year", "year", blank=""),
    "value": Column("value found", blank=""),
}
FINDINGS_FIRST = ("message", "hint", "severity", "rule")


def _whole_text(values: pd.Series, blank: str) -> pd.Series:
    return values.astype("str").where(values.notna(), blank)


def _number_text(values: pd.Series, fmt: str | None, blank: str) -> pd.Series:
    text = np.char.mod(fmt or "%.2f", values.fillna(0.0).to_numpy(dtype="float64"))
    return pd.Series(text, index=values.index, dtype="str").where(values.notna(), blank)


def whole_years(values: pd.Series, round_up: bool = False) -> pd.Series:
    """Years as whole numbers (Int64): rounded to the nearest, or up where a fractional year means 'reached during'."""
    numeric = pd.to_numeric(values, errors="coerce").astype("float64")
    whole = np.ceil(numeric) if round_up else np.round(numeric)
    return pd.Series(whole, index=values.index).astype("Int64")


def prepare(
    df: pd.DataFrame,
    *,
    unit: str | None = None,
    columns: Mapping[str, Column | str] | None = None,
    first: Iterable[str] = (),
    known: Mapping[str, Column] | None = None,
) -> tuple[pd.DataFrame, dict[str, Any]]:
    """The frame to show and its column configuration.

    `columns` overrides `COLUMNS` per query column (a string replaces only the label); `unit` is added to the
    labels of the columns that carry the table's unit; `first` moves these columns to the front. Columns the layer
    does not know are shown under their own name, whole numbers as counts and other numbers with two decimals.
    """
    specs = {**COLUMNS, **(known or {})}
    front = [c for c in first if c in df.columns]
    out = df[front + [c for c in df.columns if c not in front]].copy()
    shown: dict[str, pd.Series] = {}
    config: dict[str, Any] = {}
    for raw in out.columns:
        name = str(raw)
        given = (columns or {}).get(name)
        spec = specs.get(name) or _guess(name, out[raw])
        if isinstance(given, str):
            spec = replace(spec, label=given, with_unit=False)
        elif given is not None:
            spec = given
        label = f"{spec.label} [{unit}]" if spec.with_unit and unit else spec.label
        while label in shown:  # two query columns may share a reader's word; keep both visible
            label += " "
        values, conf = _format(out[raw], spec, label)
        shown[label] = values
        config[label] = conf
    return pd.DataFrame(shown, index=out.index).reset_index(drop=True), config


def _guess(name: str, values: pd.Series) -> Column:
    kind = values.dtype.kind
    if kind in "iu" or str(values.dtype).startswith(("Int", "UInt")):
        return Column(name, "count")
    if kind == "f":
        return Column(name, "number")
    return Column(name)


def _format(values: pd.Series, spec: Column, label: str) -> tuple[pd.Series, Any]:
    kw: dict[str, Any] = {"help": spec.help, "width": spec.width}
    numeric = values.dtype.kind in "fiub" or str(values.dtype).startswith(("Int", "UInt", "Float"))
    if spec.kind != "text" and not numeric:  # a page already wrote the cells as text (e.g. "not reached by 2100")
        return values.astype("object").where(values.notna(), spec.blank or PLACEHOLDER), st.column_config.TextColumn(
            label, alignment="right", **kw
        )
    has_blank = spec.blank is not None and bool(values.isna().any())
    if spec.kind == "year":
        years = whole_years(values, spec.round_up)
        if has_blank:
            return _whole_text(years, spec.blank or ""), st.column_config.TextColumn(label, alignment="right", **kw)
        return years, st.column_config.NumberColumn(label, format="%d", **kw)
    if spec.kind == "count":
        counts = pd.to_numeric(values, errors="coerce").round().astype("Int64")
        if has_blank:
            return _whole_text(counts, spec.blank or ""), st.column_config.TextColumn(label, alignment="right", **kw)
        return counts, st.column_config.NumberColumn(label, format="%d", **kw)
    if spec.kind == "number":
        if has_blank:
            text = _number_text(pd.to_numeric(values).astype("float64"), spec.format, spec.blank or "")
            return text, st.column_config.TextColumn(label, alignment="right", **kw)
        return pd.to_numeric(values).astype("float64"), st.column_config.NumberColumn(
            label, format=spec.format or "%.2f", **kw
        )
    if spec.blank is not None:
        values = values.astype("object").where(values.notna(), spec.blank)
    return values, st.column_config.TextColumn(label, **kw)
