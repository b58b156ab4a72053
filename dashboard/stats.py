"""Band statistics: n, median and quantiles per group, plain or with every model weighted equally.

A model that submits many scenarios otherwise sets a band's median. With model weighting each scenario weighs
1/n, n the number of its model's scenarios (with a value) in the same group, so every model in a group weighs 1.

Weighted quantiles are the averaged inverted CDF of the weights (Hyndman and Fan's type 2, numpy's
"averaged_inverted_cdf"): the q-quantile is the smallest value whose cumulative weight reaches q, and the mean of it
and the next value where the cumulative weight equals q exactly. With whole-number weights this is the type-2
quantile of the sample with each value repeated by its weight, and the median of equal weights is the usual
median (two models with one scenario each: their mean). Unweighted statistics keep the linear interpolation
(type 7) that pandas, numpy and DuckDB use by default, so quartiles may differ a little between the two when every
weight is equal; medians do not.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

QUANTILES = {"q25": 0.25, "median": 0.5, "q75": 0.75}
_TOL = 1e-9

# A median over fewer models than this says more about those models than about the group (common practice in
# model intercomparisons: a finding needs several independent models behind it). Every page flags it alike.
THIN_MODELS = 3
THIN = "thin evidence"
THIN_RULE = "fewer than three models"  # THIN_MODELS in words, for sentences and help texts


def thin(models: pd.Series) -> pd.Series:
    """True where a figure rests on fewer than THIN_MODELS models (a count of 0 too: nothing stands behind it)."""
    return pd.to_numeric(models, errors="coerce").fillna(0) < THIN_MODELS


def is_thin(models: int) -> bool:
    """`thin` of one count."""
    return int(models) < THIN_MODELS


def evidence(models: pd.Series) -> pd.Series:
    """The flag column of a table (shown as "evidence"): THIN where the figure is thin, else empty."""
    return pd.Series(np.where(thin(models), THIN, ""), index=models.index, dtype="str")


def model_weights(df: pd.DataFrame, by: list[str], value: str = "value") -> pd.Series:
    """1 / (number of the same model's rows with a value in the same group); rows without a value weigh 0."""
    has = df[value].notna()
    count = has.groupby([df[c] for c in [*by, "model"]], sort=False).transform("sum")
    return (has / count.where(count > 0)).fillna(0.0)


def weighted_quantiles(
    df: pd.DataFrame, by: list[str], value: str, weight: str, quantiles: dict[str, float]
) -> pd.DataFrame:
    """Per group: the type-2 weighted quantile of `value` under `weight` for each name -> q (rows with a null value
    or zero weight left out). Groups without a weighted value are absent."""
    d = df.loc[df[value].notna() & (df[weight] > 0), [*by, value, weight]].sort_values([*by, value], kind="stable")
    if d.empty:
        return pd.DataFrame(columns=[*by, *quantiles])
    g = d.groupby(by, sort=True, observed=True)
    share = g[weight].cumsum() / g[weight].transform("sum")
    following = g[value].shift(-1)
    out = d[by].drop_duplicates().reset_index(drop=True)
    for name, q in quantiles.items():
        reached = share >= q - _TOL
        first = d[reached].groupby(by, sort=True, observed=True).head(1).index
        exact = (share.loc[first] - q).abs() <= _TOL
        nxt = following.loc[first]
        v = np.where(exact & nxt.notna(), (d.loc[first, value] + nxt) / 2.0, d.loc[first, value])
        part = d.loc[first, by].assign(**{name: v}).reset_index(drop=True)
        out = out.merge(part, on=by, how="left")
    return out


def summarise(df: pd.DataFrame, by: list[str], value: str = "value", model_weighted: bool = False) -> pd.DataFrame:
    """n (non-null), n_missing, models, median and interquartile range of `value` per group.

    Plain: linear quantiles. `model_weighted`: every model weighs the same in each group (see the module doc).
    """
    g = df.groupby(by, sort=True, observed=True)[value]
    out = pd.DataFrame(
        {
            "n": g.count(),
            "n_missing": g.size() - g.count(),
            "models": df[df[value].notna()].groupby(by, sort=True, observed=True)["model"].nunique()
            if "model" in df
            else g.count(),
        }
    )
    out["models"] = out["models"].fillna(0).astype("int64")
    if model_weighted:
        w = df.assign(_w=model_weights(df, by, value))
        q = weighted_quantiles(w, by, value, "_w", QUANTILES).set_index(by)
        out = out.join(q[list(QUANTILES)])
    else:
        out["median"] = g.median()
        out["q25"] = g.quantile(0.25)
        out["q75"] = g.quantile(0.75)
    out = out.reset_index()
    out["iqr"] = out["q75"] - out["q25"]
    return out[[*by, "n", "n_missing", "models", "median", "q25", "q75", "iqr"]]
