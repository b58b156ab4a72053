"""The one-sentence answers at the top of the Rates and Costs pages, built from the band summaries."""

from __future__ import annotations

import pandas as pd

from milepost.dashboard.queries import RATE_LABELS
from milepost.dashboard.ui import fmt


def sig(x: float | None) -> str:
    """About three significant figures for a sentence."""
    if x is None or pd.isna(x):
        return "n/a"
    a = abs(x)
    return fmt(x, 0 if a >= 100 else 1 if a >= 10 else 2)


def _band(summary: pd.DataFrame, band: int) -> pd.Series | None:
    rows = summary[summary["band"] == band]
    return rows.iloc[0] if len(rows) else None


ONE_BAND = "Only one band has scenarios: set band edges inside the range of values to compare bands."


def rates(
    summary: pd.DataFrame,
    labels: list[str],
    top: int,
    bottom: int,
    period: tuple[int, int],
    variable: str,
    region: str,
    linear: str = "rate_linear",
    linear_unit: str = "%/yr",
) -> str:
    """'Median CAGR 2030–2050 of emissions.ghg (World): high band −6.1 %/yr vs low band −2.0 %/yr (n = 40 vs 40); linear
    rate (% of the base-year value) −2.9 vs −1.4 %/yr ...'

    `top` and `bottom` are the highest and lowest bands that hold scenarios; `linear` is the rate kind shown beside
    CAGR, in `linear_unit`.
    """
    if top == bottom:
        return ONE_BAND
    cagr = summary[summary["kind"] == "rate_cagr"]
    lin = summary[summary["kind"] == linear]
    t, b = _band(cagr, top), _band(cagr, bottom)
    lt, lb = _band(lin, top), _band(lin, bottom)
    head = f"Median CAGR {period[0]}–{period[1]} of {variable} ({region}): "
    if t is None or b is None:
        text = head + f"not available for both the {labels[top]} and the {labels[bottom]} band"
    else:
        text = (
            f"{head}{labels[top]} band {fmt(t['median'])} %/yr vs {labels[bottom]} band {fmt(b['median'])} %/yr "
            f"(n = {int(t['n'])} vs {int(b['n'])})"
        )
    if lt is not None and lb is not None:
        text += f"; {RATE_LABELS[linear]} {sig(lt['median'])} vs {sig(lb['median'])} {linear_unit}"
    missing = int(cagr["n_missing"].sum())
    if missing:
        text += f". CAGR undefined for {missing} scenario(s) whose value is not positive at both ends"
    return text + "."


def costs(ratios: pd.DataFrame, labels: list[str], top: int, bottom: int, year: int) -> str:
    """'What delay costs (median, high vs low band): NPV of abatement cost ... (×1.4, n = 12 vs 11); GDP loss ...'

    `ratios` compares band `top` with band `bottom` (the highest and lowest bands that hold scenarios).
    """
    if top == bottom:
        return ONE_BAND
    parts = []
    npv = ratios[ratios["kind"] == "npv"].sort_values("year")
    if len(npv):
        r = npv.iloc[-1]
        parts.append(_clause(r, f"NPV of abatement cost {int(r['year_from'])}–{int(r['year'])}"))
    for variable in ("gdp.mer", "gdp.ppp", "consumption"):
        loss = ratios[(ratios["kind"] == "loss_pct") & (ratios["variable"] == variable)].sort_values("year")
        if len(loss):
            later = loss[loss["year"] > year]
            r = (later if len(later) else loss).iloc[0]
            parts.append(_clause(r, f"{r['metric']} in {int(r['year'])}"))
            break
    if not parts:
        return "No cost indicators (losses, NPV of abatement cost) for the selected scenarios."
    return f"What delay costs (median, {labels[top]} vs {labels[bottom]} band): " + "; ".join(parts) + "."


def _clause(r: pd.Series, what: str) -> str:
    unit = r["unit"]
    top = f"{sig(r['median_top'])} {unit}" if unit == "%" else sig(r["median_top"])
    ratio = f"×{fmt(r['ratio'], 2)}, " if pd.notna(r["ratio"]) else ""
    return f"{what} {top} vs {sig(r['median_bottom'])} {unit} ({ratio}n = {int(r['n_top'])} vs {int(r['n_bottom'])})"
