"""Band statistics with every model weighted equally, against numpy's quantiles of a repeated sample."""

from __future__ import annotations

from math import lcm

import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from milepost.dashboard import stats


def repeated_quantile(values: np.ndarray, weights: np.ndarray, q: float) -> float:
    """numpy.quantile(method='averaged_inverted_cdf', Hyndman and Fan type 2) of the sample with each value
    repeated in proportion to its (rational) weight: the reference for a weighted type-2 quantile."""
    denominators = [round(1 / w) for w in weights]
    k = lcm(*denominators)
    return float(np.quantile(np.repeat(values, [k // d for d in denominators]), q, method="averaged_inverted_cdf"))


def test_two_models_weigh_the_same_whatever_their_scenario_counts() -> None:
    # model A: 9 scenarios at 1.0; model B: 1 scenario at 3.0. Unweighted, A sets the median; weighted, each
    # model counts once and the median is the mean of the two (cumulative weight exactly one half at A).
    df = pd.DataFrame({"g": 0, "model": ["A"] * 9 + ["B"], "value": [1.0] * 9 + [3.0]})
    plain = stats.summarise(df, ["g"])
    balanced = stats.summarise(df, ["g"], model_weighted=True)
    assert plain["median"].iloc[0] == 1.0
    assert balanced["median"].iloc[0] == 2.0
    assert (balanced["n"].iloc[0], balanced["models"].iloc[0]) == (10, 2)


def test_equal_weights_give_the_usual_median() -> None:
    df = pd.DataFrame({"g": 0, "model": list("ABCD"), "value": [4.0, 1.0, 3.0, 2.0]})
    assert stats.summarise(df, ["g"], model_weighted=True)["median"].iloc[0] == np.median([1, 2, 3, 4])


@given(
    st.lists(
        st.tuples(st.sampled_from("ABCD"), st.integers(-50, 50).map(float), st.integers(0, 2)), min_size=1, max_size=30
    )
)
def test_weighted_quantiles_match_numpy_on_the_repeated_sample(rows: list[tuple[str, float, int]]) -> None:
    df = pd.DataFrame(rows, columns=["model", "value", "g"])
    df.loc[df.index[::7], "value"] = np.nan  # values missing in some rows weigh nothing
    got = stats.summarise(df, ["g"], model_weighted=True).set_index("g")
    for g, part in df.dropna(subset=["value"]).groupby("g"):
        w = stats.model_weights(part, ["g"]).to_numpy()
        for col, q in stats.QUANTILES.items():
            assert got.loc[g, col] == pytest.approx(repeated_quantile(part["value"].to_numpy(), w, q))


def test_model_weights_sum_to_one_per_model_and_group() -> None:
    df = pd.DataFrame({"g": [0, 0, 0, 1, 1], "model": ["A", "A", "B", "A", "A"], "value": [1.0, np.nan, 2.0, 3.0, 4.0]})
    w = stats.model_weights(df, ["g"])
    assert w.tolist() == [1.0, 0.0, 1.0, 0.5, 0.5]
