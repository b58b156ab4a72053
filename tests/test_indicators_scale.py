"""Indicators at intercomparison scale: 3,000 invented scenarios x 6 regions x 32 variables x 17 years."""

from __future__ import annotations

import duckdb
import numpy as np
import pytest

from milepost.validate.bench.indicators import make_data
from milepost.validate.store.indicators import KINDS, burden, compute_indicators, plan


@pytest.mark.slow
def test_full_scale_is_correct(core):
    con = duckdb.connect()
    try:
        con.execute("SET enable_progress_bar = false")
        make_data(con, core, scenarios=3000, regions=6)
        n = compute_indicators(con, core)  # its speed is measured by `make bench` (validate/bench/indicators.py)
        p = plan(core)
        per_kind = {k: sum(1 for row in p.periods if row[0] == k) or 1 for k in p.kinds()}
        per_kind["budget_level"] = len(core.budgets.likelihoods)
        # the carbon-budget kinds are written for World (region 0 of the invented data) only
        regions = {k: 1 if KINDS[k].scaling == "budget" else 6 for k in p.kinds()}
        # burden sharing and cost shares need a market region with parts; the core contract's World has none
        regions.update(dict.fromkeys([*burden.NEEDS, "cost_share"], 0))
        assert n == 3000 * sum(regions[k] * per_kind[k] for k, *_ in p.selection)
        for model, scenario, region in (("M0", "S1", "World"), ("M7", "S299", "R5")):
            pts = con.execute(
                "SELECT year, value FROM checked WHERE model = ? AND scenario = ? AND region = ?"
                " AND variable = 'emissions.co2' ORDER BY year",
                [model, scenario, region],
            ).fetchall()
            got = dict(
                ((k, y0, y1), v)
                for k, y0, y1, v in con.execute(
                    "SELECT kind, year_from, year_to, value FROM computed_indicators WHERE model = ? AND scenario = ?"
                    " AND region = ? AND variable = 'emissions.co2'",
                    [model, scenario, region],
                ).fetchall()
            )
            xp, fp = [y for y, _ in pts], [v for _, v in pts]
            years = np.arange(2020, 2101)
            # reference: numpy.interp at every whole year, summed with both ends included (Mt -> Gt: / 1000)
            assert got[("value", 2050, 2050)] == pytest.approx(np.interp(2050, xp, fp))
            assert got[("cumulative", 2020, 2100)] == pytest.approx(np.interp(years, xp, fp).sum() / 1e3)
            # cumulative_net_zero: numpy's annual interpolation summed from 2020 to the first year <= 0, included
            annual = np.interp(years, xp, fp)
            below = np.flatnonzero(annual <= 0)
            end = int(below[0]) if len(below) else len(years) - 1
            nz = [(k, v) for (k, y0, y1), v in got.items() if k == "cumulative_net_zero" and y1 == years[end]]
            assert nz and nz[0][1] == pytest.approx(annual[: end + 1].sum() / 1e3)
    finally:
        con.close()
