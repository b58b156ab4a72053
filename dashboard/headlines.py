"""The one-sentence answers at the top of the Rates, Costs and Delay pages, built from band or pair summaries.

Each sentence starts with the outcome it speaks of when one is selected ("Within the 2 °C budget (67 %): ...").
"""

from __future__ import annotations

import pandas as pd

from milepost.dashboard.queries import RATE_LABELS
from milepost.dashboard.stats import THIN_RULE, is_thin
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


def _lead(outcome: str, text: str) -> str:
    """`text` after the outcome it speaks of, if any."""
    return f"{outcome[0].upper()}{outcome[1:]}: {text}" if outcome else text


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
    outcome: str = "",
) -> str:
    """'Median CAGR 2030–2050 of emissions.ghg (World): high band −6.1 %/yr vs low band −2.0 %/yr (n = 40 vs 40); linear
    rate (% of the base-year value) −2.9 vs −1.4 %/yr ...'

    `top` and `bottom` are the highest and lowest bands that hold scenarios; `linear` is the rate kind shown beside
    CAGR, in `linear_unit`; `outcome` the selected outcome.
    """
    return _lead(outcome, _rates(summary, labels, top, bottom, period, variable, region, linear, linear_unit))


def _rates(
    summary: pd.DataFrame,
    labels: list[str],
    top: int,
    bottom: int,
    period: tuple[int, int],
    variable: str,
    region: str,
    linear: str,
    linear_unit: str,
) -> str:
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


def costs(ratios: pd.DataFrame, labels: list[str], top: int, bottom: int, year: int, outcome: str = "") -> str:
    """'Median costs, high vs low band: NPV of abatement cost ... (×1.4, n = 12 vs 11); GDP loss ...'

    `ratios` compares band `top` with band `bottom` (the highest and lowest bands that hold scenarios). What delay
    costs is read pair by pair on the Delay page (`delay`), not from bands.
    """
    return _lead(outcome, _costs(ratios, labels, top, bottom, year))


def _costs(ratios: pd.DataFrame, labels: list[str], top: int, bottom: int, year: int) -> str:
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
    return f"Median costs, {labels[top]} vs {labels[bottom]} band: " + "; ".join(parts) + "."


def _clause(r: pd.Series, what: str) -> str:
    unit = r["unit"]
    top = f"{sig(r['median_top'])} {unit}" if unit == "%" else sig(r["median_top"])
    ratio = f"×{fmt(r['ratio'], 2)}, " if pd.notna(r["ratio"]) else ""
    return f"{what} {top} vs {sig(r['median_bottom'])} {unit} ({ratio}n = {int(r['n_top'])} vs {int(r['n_bottom'])})"


def delay(summary: pd.DataFrame, names: dict[str, str], outcome: str = "") -> str:
    """'What delay costs, pair by pair: across 12 pairs from 4 models, the later start ... (model-balanced medians).'

    `summary` holds the all-pairs row of each metric (group == ALL): metric, n, models, balanced, low, high;
    `names` maps a metric to the words that describe it.
    """
    rows = {r["metric"]: r for _, r in summary.iterrows()}
    if not rows or all(int(r["n"]) == 0 for r in rows.values()):
        return _lead(outcome, "No pairs of scenarios for these filters: nothing to say about delay.")
    n = max(int(r["n"]) for r in rows.values())
    models = max(int(r["models"]) for r in rows.values())
    parts = []
    for metric, words in names.items():
        r = rows.get(metric)
        if r is None or int(r["n"]) == 0:
            continue
        if metric == "npv_ratio":
            parts.append(f"{words} ×{fmt(r['balanced'], 2)} (range ×{fmt(r['low'], 2)}–×{fmt(r['high'], 2)})")
        else:
            sign = "+" if r["balanced"] > 0 else ""
            parts.append(f"{words} {sign}{sig(r['balanced'])} (range {sig(r['low'])} to {sig(r['high'])})")
    thin = f" Thin evidence: {THIN_RULE}." if is_thin(models) else ""
    text = (
        f"What delay costs, pair by pair (later start vs the earliest of the same model and goal), across {n} "
        f"pair{'s' if n != 1 else ''} from {models} model{'s' if models != 1 else ''}: " + "; ".join(parts)
    )
    return _lead(outcome, text + " (model-balanced medians)." + thin)


def counted(n: int, models: int) -> str:
    """'12 scenarios, 4 models' (singular where one)."""
    return f"{n} scenario{'s' if n != 1 else ''}, {models} model{'s' if models != 1 else ''}"


def drivers(
    summary: pd.DataFrame,
    counts: pd.DataFrame,
    labels: list[str],
    top: int,
    bottom: int,
    year: int,
    unit: str,
) -> str:
    """'From the base year to 2050, in the high band (12 scenarios, 4 models) the median energy-intensity effect is
    ... ; in the low band (...) ...': the intensity effects of the highest and lowest band with the evidence behind
    each. A band resting on fewer than three models is named as thin evidence instead of being set against the
    other (its medians stay in the page's table, flagged).

    `summary` is `queries_drivers.lever_shares` at `year`; `counts` is `queries_drivers.band_counts`.
    """
    per_band = {int(b): (int(n), int(m)) for b, n, m in counts[["band", "n", "models"]].itertuples(index=False)}
    bands = (top, bottom) if top != bottom else (top,)

    def median(kind: str, band: int) -> float | None:
        row = summary[(summary["kind"] == kind) & (summary["band"] == band)]
        return None if row.empty or pd.isna(row["median"].iloc[0]) else float(row["median"].iloc[0])

    words, thin = [], []
    for band in bands:
        n, models = per_band.get(band, (0, 0))
        if len(bands) > 1 and is_thin(models):
            thin.append(f"the {labels[band]} band rests on {counted(n, models)}")
            continue
        energy, carbon = (median(k, band) for k in ("lmdi_energy_intensity", "lmdi_carbon_intensity"))
        words.append(
            f"in the {labels[band]} band ({counted(n, models)}) the median energy-intensity effect is "
            f"{fmt(energy, 0)} {unit} and the carbon-intensity effect {fmt(carbon, 0)} {unit} (carbon intensity: "
            f"{fmt(median('carbon_share', band), 0)} % of the intensity cuts)"
            + (f"; thin evidence: {THIN_RULE}" if is_thin(models) else "")
        )
    text = f"From the base year to {year}, " + "; ".join(words) if words else f"From the base year to {year}"
    if thin:
        text += (
            ("; " if words else ": ")
            + f"thin evidence ({THIN_RULE}): "
            + " and ".join(thin)
            + ", so the bands are not compared here (the table below shows the thin medians, flagged)"
        )
    return text + "."
