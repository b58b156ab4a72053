"""Seeded generator of the invented demo intercomparison: four models, a flawed fifth one and one revision.

Everything here is invented: models, scenarios, regions and numbers. The numbers come from a small stylised
model (reference growth; abatement embodied in capital that turns over slowly, is built at the abatement that is
cost-effective at the carbon price of its day and can be scrapped early at a convex cost; costs fall with
experience; GDP losses that grow with the depth of abatement) so that the ensemble behaves plausibly, not from
any real model or data set. Delayed scenarios reach the same long-term outcome as their immediate sibling (the
same cumulative CO2 to net zero, so the same carbon-budget class, and the same 2100 level), so they must cut
faster after 2030 and pay more for it. See example_db/README.md.
Run `python -m milepost.example_db.generate OUT_DIR` to write the files.
"""

from __future__ import annotations

import argparse
import io
import re
import sys
import time
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd

from milepost.schema.contract import Contract, load

CONTRACT_DIR = Path(__file__).parent / "contract"
SEED = 4817
YEARS = np.arange(2020, 2101, 5)
BASE_YEAR = 2020
WORLD = "World"
REGIONS = ("Ardena", "Belmora", "Cendral", "Dovania", "Estrel")
ALL_REGIONS = (WORLD, *REGIONS)
MODELS = ("Ferrow", "Halvik", "Ormund", "Pellin")
XLSX_MODEL = "Pellin"
REVISED_MODEL = "Halvik"
REVISED_SCENARIOS = ("act-firm", "wait-firm")
FLAWED_MODEL = "Vossel"
COLUMNS = ("model", "scenario", "region", "variable", "unit", "year", "value")
SCENARIO_COLUMNS = ("model", "scenario", "reference", "family", "ambition", "policy_start")
# Values are kept as integers of 1e-4 units until written, so sums of parts and of regions hold exactly.
QUANTUM = 10_000
REFERENCE_NAME = "drift"
POLICY_START = 2025
DELAYED_START = 2035

# --- invented base-year (2020) values per region: Ardena, Belmora, Cendral, Dovania, Estrel -------------------
POP0 = np.array([1100.0, 3300.0, 900.0, 1700.0, 800.0])  # million
GDP0 = np.array([52000.0, 20000.0, 7000.0, 3000.0, 6000.0])  # billion USD_2015/yr at market rates
PPP_RATIO0 = np.array([1.1, 2.1, 1.7, 2.6, 1.8])  # PPP / MER GDP, converging to 1
CONS_SHARE = np.array([0.62, 0.45, 0.50, 0.70, 0.58])  # consumption / GDP
PE0 = np.array([190.0, 230.0, 70.0, 45.0, 65.0])  # EJ/yr
FUELS = ("coal", "oil", "gas", "nuclear", "biomass", "hydro", "wind", "solar", "other")
FUEL_SHARE0 = np.array(
    [  # regions x fuels, rows sum to 1
        [0.14, 0.36, 0.27, 0.09, 0.05, 0.03, 0.03, 0.015, 0.015],
        [0.45, 0.22, 0.08, 0.03, 0.08, 0.05, 0.04, 0.03, 0.02],
        [0.10, 0.38, 0.40, 0.02, 0.04, 0.04, 0.01, 0.005, 0.005],
        [0.15, 0.30, 0.08, 0.00, 0.38, 0.05, 0.01, 0.02, 0.01],
        [0.20, 0.38, 0.22, 0.04, 0.06, 0.05, 0.025, 0.015, 0.01],
    ]
)
# Slow shift of the reference mix by 2100 (sums to zero, so shares stay shares).
FUEL_SHIFT = np.array([-0.05, -0.05, 0.01, 0.0, -0.01, 0.0, 0.04, 0.05, 0.01])
# Where energy no longer supplied by fossil fuels comes from in policy scenarios (sums to 1).
LOW_CARBON_SHARE = np.array([0.0, 0.0, 0.0, 0.14, 0.08, 0.05, 0.34, 0.36, 0.03])
EMISSION_FACTOR = np.array([94.0, 66.0, 56.0])  # Mt CO2 per EJ of coal, oil, gas (net of non-energy use)
SECTORS = ("power", "industry", "transport", "buildings", "other")
FUEL_TO_SECTOR = np.array(
    [  # fossil fuels x sectors, rows sum to 1
        [0.70, 0.25, 0.00, 0.03, 0.02],
        [0.04, 0.15, 0.66, 0.10, 0.05],
        [0.42, 0.25, 0.03, 0.27, 0.03],
    ]
)
PROCESS0 = np.array([350.0, 1400.0, 200.0, 200.0, 250.0])  # Mt CO2/yr, industrial processes (sector "other")
LAND0 = np.array([-300.0, 600.0, 800.0, 1600.0, 800.0])  # Mt CO2/yr
CH40 = np.array([60.0, 110.0, 70.0, 70.0, 40.0])  # Mt CH4/yr
N2O0 = np.array([1800.0, 3500.0, 1500.0, 2200.0, 1000.0])  # kt N2O/yr
FGAS0 = np.array([420.0, 520.0, 160.0, 170.0, 130.0])  # Mt CO2e/yr of F-gases (GWP100-weighted)
FE_RATIO = np.array([0.68, 0.66, 0.70, 0.85, 0.70])  # final / primary energy
FE_SECTORS = ("industry", "transport", "buildings", "other")
FE_SHARE = np.array(
    [  # regions x FE_SECTORS, rows sum to 1
        [0.28, 0.33, 0.32, 0.07],
        [0.46, 0.18, 0.28, 0.08],
        [0.35, 0.30, 0.28, 0.07],
        [0.18, 0.18, 0.55, 0.09],
        [0.30, 0.33, 0.30, 0.07],
    ]
)
FE_CUT_WEIGHT = np.array([1.0, 1.1, 0.9, 0.8])  # transport demand responds a little more than buildings
# Population and per-capita GDP growth (fraction/yr) in 2020 and 2100, interpolated linearly in between.
POP_GROWTH = np.array([[0.003, -0.003], [0.007, -0.006], [0.010, 0.000], [0.020, -0.004], [0.008, -0.002]])
GDPPC_GROWTH = np.array([[0.014, 0.010], [0.040, 0.015], [0.025, 0.015], [0.035, 0.025], [0.022, 0.013]])
SINK_MAX = np.array([800.0, 900.0, 1200.0, 2000.0, 700.0])  # Mt CO2/yr of extra land sink at high prices
BECCS_MAX = np.array([1500.0, 2500.0, 1000.0, 1200.0, 800.0])  # Mt CO2/yr of bioenergy with capture
BECCS_MT_PER_EJ = 85.0

# Abatement groups: cost scale c (USD_2015/t CO2e at which 63 % of the potential is used), potential, and the
# share of the group's capital (plants, vehicles, buildings, practices) replaced anyway in a five-year step.
GROUPS = ("coal", "oil", "gas", "ccs", "process", "land", "sink", "beccs", "ch4", "n2o", "fgas")
GROUP_COST = np.array([60.0, 250.0, 150.0, 300.0, 120.0, 40.0, 150.0, 300.0, 60.0, 100.0, 50.0])
GROUP_POTENTIAL = np.array([0.97, 0.85, 0.85, 0.60, 0.80, 1.0, 1.0, 1.0, 0.60, 0.40, 0.85])
GROUP_TURNOVER = np.array([0.2, 0.4, 0.3, 0.2, 0.2, 0.7, 0.4, 0.2, 0.55, 0.4, 0.35])
# Retiring capital before its time costs SCRAP_COST * c * s^2 per t CO2e of base for a share s scrapped in a step.
SCRAP_COST = 20.0
# Learning by doing: a group's cost scale falls as (1 + E / EXPERIENCE0)^-LEARNING with its experience E (abated
# fraction x years, per region); 0.36 is a cost fall of 1 - 2^-0.36 = 22 % per doubling of experience.
LEARNING = 0.2
EXPERIENCE0 = 1.0
# GDP loss (fraction of GDP) = the model's factor x LOSS_AT_FULL_DEPTH x depth^LOSS_POWER, depth = abated share.
LOSS_AT_FULL_DEPTH = 0.04
LOSS_POWER = 2.0

# The scenario protocol: name, family, ambition and carbon price in 2025 (USD_2015/t CO2, before the model's own
# scaling). Prices grow 5 %/yr to 2050 and 2 %/yr after. A delayed scenario follows the reference to 2030 and then
# pursues the outcome of its immediate sibling (same model and ambition): from 2035 it pays a multiple of the
# sibling's price, solved per run so that World CO2 summed to net zero equals the sibling's (the same budget
# class); after 2050 the premium fades, at a pace solved per run so that 2100 ends at the sibling's GHG level.
# Delayed variants exist for the three goals a start in 2035 can still reach (the strongest cannot: the no-policy
# emissions to 2035 alone exceed its budget).
PROTOCOL = (
    (REFERENCE_NAME, "reference", "", 0.0),
    ("act-mild", "immediate", "mild", 14.0),
    ("act-modest", "immediate", "modest", 20.0),
    ("act-firm", "immediate", "firm", 40.0),
    ("act-bold", "immediate", "bold", 60.0),
    ("act-deep", "immediate", "deep", 90.0),
    ("act-max", "immediate", "max", 140.0),
    ("wait-firm", "delayed", "firm", 40.0),
    ("wait-bold", "delayed", "bold", 60.0),
    ("wait-deep", "delayed", "deep", 90.0),
)
DELAY_PREMIUM_MAX = 10.0  # search range of the delay premium (price multiple, from 1)
DELAY_ROUNDS = 4  # premium and fade are solved in turn this many times (each moves the other's target a little)
DELAY_FADE_RANGE = (0.5, 500.0)  # search range of the e-folding time (years) of the premium after 2050
PRICE_GROWTH = (0.05, 0.02)
PRICE_CAP = 4000.0
# Reference-component indices for the per-model calibration noise.
NOISE = ("pop", "gdp", "ppp", "cons", "pe", *FUELS, "fe_ind", "fe_trans", "fe_bldg", "process", "land", "ch4", "n2o")
# Components added later draw their noise after all of NOISE, so the earlier components keep their numbers.
LATER_NOISE = ("fgas", "fe_other")


@dataclass(frozen=True)
class DemoFiles:
    """The files of the demo intercomparison, by role."""

    out_dir: Path
    submissions: dict[str, list[Path]]  # model -> [data file, scenarios file] (one XLSX holds both)
    flawed: list[Path]
    revision: list[Path]
    seconds: float = field(default=0.0, compare=False)

    def all_paths(self) -> list[Path]:
        """Every file written, in a stable order."""
        return [*(p for ps in self.submissions.values() for p in ps), *self.flawed, *self.revision]


@dataclass(frozen=True)
class Runs:
    """A batch of (model, scenario) runs: price paths and the scenario attributes."""

    model: np.ndarray  # int index into the model parameters, shape [N]
    scenario: tuple[str, ...]
    family: tuple[str, ...]
    ambition: tuple[str, ...]
    start: np.ndarray  # first policy year, 0 for the reference, shape [N]
    price: np.ndarray  # USD_2015/t CO2, shape [N, T]


@dataclass(frozen=True)
class Models:
    """Per-model parameters (arrays over models) and calibrated reference paths [M, R, T]."""

    names: tuple[str, ...]
    price_scale: np.ndarray
    cost_scale: np.ndarray
    turnover_scale: np.ndarray
    beccs_scale: np.ndarray
    sink_scale: np.ndarray
    gdp_loss: np.ndarray
    demand_share: np.ndarray
    ref: dict[str, np.ndarray]


def contract() -> Contract:
    """The resolved demo contract."""
    return load(CONTRACT_DIR)


def ghg_factors(con: Contract) -> dict[str, float]:
    """Resolved factors of the parts of emissions.ghg (GWP100 times unit factor), by part variable."""
    return {p.variable: p.factor for p in con.variables["emissions.ghg"].parts}


def _ramp(growth: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """Cumulative log growth [M, R, T] for growth rates going linearly from g0 (2020) to g1 (2100)."""
    tau = (YEARS - BASE_YEAR).astype(float)
    g0, g1 = growth[:, 0], growth[:, 1]
    out = g0[None, :, None] * tau + (g1 - g0)[None, :, None] * tau**2 / 160.0
    return out * scale[:, None, None]


def _models(names: tuple[str, ...], rng: np.random.Generator) -> Models:
    """Draw per-model parameters and build each model's calibrated no-policy paths."""
    m = len(names)
    u = lambda lo, hi: rng.uniform(lo, hi, m)  # noqa: E731 - a one-line helper used only here
    pop_scale, gdp_scale, aeei = u(0.85, 1.15), u(0.85, 1.15), u(0.010, 0.016)
    params = dict(
        price_scale=u(0.85, 1.3),
        cost_scale=u(0.7, 1.4),
        turnover_scale=u(0.85, 1.25),
        beccs_scale=u(0.4, 1.4),
        sink_scale=u(0.6, 1.3),
        gdp_loss=u(0.8, 1.3),
        demand_share=u(0.35, 0.55),
    )
    # Calibration: each model's 2020 values differ from the reference data by up to 4 %; the paths then wander
    # by a small random walk that starts at zero, so the base year stays inside the contract's tolerance.
    calib = 1.0 + rng.uniform(-0.04, 0.04, (len(NOISE), m, len(REGIONS), 1))
    steps = rng.normal(0.0, 0.006, (len(NOISE), m, len(REGIONS), len(YEARS) - 1))
    walk = np.concatenate([np.zeros((len(NOISE), m, len(REGIONS), 1)), np.cumsum(steps, axis=-1)], axis=-1)
    noise = dict(zip(NOISE, calib * (1.0 + walk), strict=True))
    later = 1.0 + rng.uniform(-0.04, 0.04, (len(LATER_NOISE), m, len(REGIONS), 1))
    later_steps = rng.normal(0.0, 0.006, (len(LATER_NOISE), m, len(REGIONS), len(YEARS) - 1))
    later_walk = np.concatenate([np.zeros((len(LATER_NOISE), m, len(REGIONS), 1)), np.cumsum(later_steps, axis=-1)], -1)
    noise.update(zip(LATER_NOISE, later * (1.0 + later_walk), strict=True))

    tau = (YEARS - BASE_YEAR).astype(float)[None, None, :]
    pop_rel = np.exp(_ramp(POP_GROWTH, pop_scale))
    gdp_rel = pop_rel * np.exp(_ramp(GDPPC_GROWTH, gdp_scale))
    ratio = 1.0 + (PPP_RATIO0[None, :, None] - 1.0) * np.exp(-tau / 60.0)
    ppp_rel = gdp_rel * ratio / PPP_RATIO0[None, :, None]
    pe = PE0[None, :, None] * ppp_rel * np.exp(-aeei[:, None, None] * tau) * noise["pe"]
    ramp = 1.0 - np.exp(-tau / 40.0)
    ref = {
        "population": POP0[None, :, None] * pop_rel * noise["pop"],
        "gdp.mer": GDP0[None, :, None] * gdp_rel * noise["gdp"],
        "ppp_ratio": ratio * noise["ppp"],
        "cons_share": CONS_SHARE[None, :, None] * (1.0 + 0.03 * ramp) * noise["cons"],
        "pe": pe,
        "process": PROCESS0[None, :, None] * ppp_rel**0.5 * np.exp(-0.005 * tau) * noise["process"],
        "land": LAND0[None, :, None] * np.exp(-tau / 50.0) * noise["land"],
        "ch4": CH40[None, :, None] * pop_rel**0.5 * ppp_rel**0.15 * noise["ch4"],
        "n2o": N2O0[None, :, None] * pop_rel**0.4 * ppp_rel**0.2 * noise["n2o"],
        "fgas": FGAS0[None, :, None] * ppp_rel**0.6 * noise["fgas"],
    }
    for i, fuel in enumerate(FUELS):
        share = FUEL_SHARE0[None, :, i, None] + FUEL_SHIFT[i] * ramp
        ref[f"fuel.{fuel}"] = pe * share * noise[fuel]
    for i, sector in enumerate(("ind", "trans", "bldg", "other")):
        ref[f"fe.{sector}"] = pe * FE_RATIO[None, :, None] * FE_SHARE[None, :, i, None] * noise[f"fe_{sector}"]
    return Models(names=names, ref=ref, **params)


def _price(level: np.ndarray, start: np.ndarray, premium: np.ndarray, g1: np.ndarray, g2: np.ndarray) -> np.ndarray:
    """Carbon-price paths [N, T]: `level` in 2025 growing at g1 to 2050 and g2 after, zero before `start`."""
    t = YEARS[None, :].astype(float)
    path = level[:, None] * (1.0 + g1[:, None]) ** (np.minimum(t, 2050) - POLICY_START)
    path = path * (1.0 + g2[:, None]) ** np.maximum(t - 2050, 0.0)
    on = (start[:, None] > 0) & (t >= start[:, None])
    return np.minimum(np.where(on, path * premium[:, None], 0.0), PRICE_CAP)


def _protocol_runs(
    models: Models,
    ghg_factor: dict[str, float],
    protocol: tuple[tuple[str, str, str, float], ...] = PROTOCOL,
    only: tuple[str, ...] | None = None,
    price_factor: float = 1.0,
) -> Runs:
    """Every model x every protocol scenario (or only the models named in `only`), delayed runs matched to their
    immediate siblings."""
    idx = [i for i, name in enumerate(models.names) if only is None or name in only]
    model = np.repeat(np.array(idx, dtype=int), len(protocol))
    name, family, ambition, level = zip(*protocol, strict=True)
    n = len(idx)
    fam = np.array(family * n)
    start = np.where(fam == "reference", 0, np.where(fam == "delayed", DELAYED_START, POLICY_START))
    lev = np.array(level * n) * models.price_scale[model] * price_factor
    g1, g2 = np.full(len(model), PRICE_GROWTH[0]), np.full(len(model), PRICE_GROWTH[1])
    runs = Runs(model, name * n, family * n, ambition * n, start, _price(lev, start, np.ones(len(model)), g1, g2))
    return _match_siblings(models, runs, ghg_factor)


def _subset(runs: Runs, idx: np.ndarray) -> Runs:
    """The runs at positions `idx`."""
    pick = lambda xs: tuple(xs[i] for i in idx)  # noqa: E731 - a one-line helper used only here
    return Runs(
        runs.model[idx], pick(runs.scenario), pick(runs.family), pick(runs.ambition), runs.start[idx], runs.price[idx]
    )


def _delay_price(price: np.ndarray, premium: np.ndarray, fade: np.ndarray) -> np.ndarray:
    """`price` [N, T] times a premium that holds to 2050 and fades after with e-folding time `fade`, capped."""
    decay = np.exp(-np.maximum(YEARS[None, :] - 2050, 0) / fade[:, None])
    return np.minimum(price * (1.0 + (premium[:, None] - 1.0) * decay), PRICE_CAP)


def _regional_ghg(leaves: dict[str, np.ndarray], ghg_factor: dict[str, float]) -> np.ndarray:
    """Regional GHG [N, R, T] in Mt CO2e from the emission leaves."""
    return (
        sum(leaves[f"emissions.co2.fossil.{s}"] for s in SECTORS)
        + leaves["emissions.co2.land"]
        + leaves["emissions.ch4"] * ghg_factor["emissions.ch4"]
        + leaves["emissions.n2o"] * ghg_factor["emissions.n2o"]
        + leaves["emissions.fgases"] * ghg_factor["emissions.fgases"]
    )


def _world_co2_to_net_zero(leaves: dict[str, np.ndarray]) -> np.ndarray:
    """World CO2 summed over the whole years from 2020 to its net-zero year, both included (or to 2100), in Gt:
    the `cumulative_net_zero` indicator, computed here on the annual linear interpolation of the five-year points."""
    co2 = (sum(leaves[f"emissions.co2.fossil.{s}"] for s in SECTORS) + leaves["emissions.co2.land"]).sum(axis=1)
    years = np.arange(BASE_YEAR, int(YEARS[-1]) + 1)
    step = np.searchsorted(YEARS, years, side="right").clip(1, len(YEARS) - 1)
    w = (years - YEARS[step - 1]) / (YEARS[step] - YEARS[step - 1])
    annual = co2[:, step - 1] * (1.0 - w) + co2[:, step] * w
    below = annual <= 0
    end = np.where(below.any(axis=1), below.argmax(axis=1), len(years) - 1)
    return np.where(np.arange(len(years))[None, :] <= end[:, None], annual, 0.0).sum(axis=1) / 1000.0


def _match_siblings(models: Models, runs: Runs, ghg_factor: dict[str, float], iterations: int = 30) -> Runs:
    """Solve each delayed run's price premium and its fading so that it reaches the same long-term outcome as the
    immediate run of the same model and ambition: the same World CO2 summed to net zero (so the same carbon-budget
    class) and the same World GHG in 2100. Runs without such a sibling are kept as they are.

    Two bisections on a logarithm, all runs at once, taken in turn a few times: the premium (from the delayed start
    to 2050) for the cumulative CO2, then the e-folding time of its fading after 2050 for the 2100 level. Starting
    later with the same budget means emitting less afterwards: the premium is what makes the catch-up steep.
    """
    key = list(zip(runs.model.tolist(), runs.ambition, strict=True))
    sibling = {k: i for i, (k, f) in enumerate(zip(key, runs.family, strict=True)) if f == "immediate"}
    delayed = np.array([i for i, f in enumerate(runs.family) if f == "delayed" and key[i] in sibling], dtype=int)
    if not len(delayed):
        return runs
    y2100 = int(np.searchsorted(YEARS, 2100))

    def outcome(r: Runs) -> tuple[np.ndarray, np.ndarray]:
        leaves = _simulate(models, r, ghg_factor)
        return _world_co2_to_net_zero(leaves), _regional_ghg(leaves, ghg_factor).sum(axis=1)[:, y2100]

    goal = outcome(_subset(runs, np.array([sibling[key[i]] for i in delayed])))
    sub = _subset(runs, delayed)
    premium, fade = np.full(len(delayed), 2.0), np.full(len(delayed), 20.0)
    for _ in range(DELAY_ROUNDS):
        for j, (low, high) in enumerate(((1.0, DELAY_PREMIUM_MAX), DELAY_FADE_RANGE)):
            lo, hi = np.full(len(delayed), np.log(low)), np.full(len(delayed), np.log(high))
            for _ in range(iterations):
                mid = 0.5 * (lo + hi)
                trial = (np.exp(mid), fade) if j == 0 else (premium, np.exp(mid))
                above = outcome(replace(sub, price=_delay_price(sub.price, *trial)))[j] > goal[j]
                lo, hi = np.where(above, mid, lo), np.where(above, hi, mid)
            if j == 0:
                premium = np.exp(0.5 * (lo + hi))
            else:
                fade = np.exp(0.5 * (lo + hi))
    price = runs.price.copy()
    price[delayed] = _delay_price(sub.price, premium, fade)
    return replace(runs, price=price)


def _mac_area(goal: np.ndarray, potential: np.ndarray) -> np.ndarray:
    """Area under the abatement curve a = potential * (1 - exp(-x)) up to price x (in units of c), per unit base."""
    u = np.exp(-goal)
    return potential * (1.0 - u - u * goal)


def _vintage_step(
    a: np.ndarray,
    cost: np.ndarray,
    price: np.ndarray,
    scale: np.ndarray,
    base_scale: np.ndarray,
    potential: np.ndarray,
    turnover: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """One five-year step of the capital stock of every group: (abated fraction, cost in USD_2015 per t of base).

    New capital (the replaced share, plus whatever is scrapped early) is built at the abatement that is
    cost-effective at the current price and cost scale, and keeps its abatement and its cost for life. So a late,
    steep transition builds capital far deeper than average, and because the cost curve is convex, the same
    average abatement then costs more. The scrapped share s is where the yearly gain of rebuilding,
    price x (new - old abatement) - (new - old cost), meets the marginal scrapping cost 2 SCRAP_COST c s.
    """
    goal = price / scale
    new, new_cost = potential * (1.0 - np.exp(-goal)), scale * _mac_area(goal, potential)
    gain = price * (new - a) - (new_cost - cost)
    scrap = np.clip(gain / (2.0 * SCRAP_COST * base_scale), 0.0, 1.0 - turnover)
    share = turnover + scrap
    return (
        (1.0 - share) * a + share * new,
        (1.0 - share) * cost + share * new_cost + SCRAP_COST * base_scale * scrap**2,
    )


def _simulate(
    models: Models,
    runs: Runs,
    ghg_factor: dict[str, float],
    adjust: Callable[[dict[str, np.ndarray]], None] | None = None,
) -> dict[str, np.ndarray]:
    """Leaf variables of every run as float arrays [N, R, T] (regions only; World comes later).

    `ghg_factor` maps each gas variable to its GWP100 factor into Mt CO2e, as the contract resolves it.
    """
    mi = runs.model
    ref = {k: v[mi] for k, v in models.ref.items()}
    price = runs.price[:, None, :]
    scale0 = (GROUP_COST[:, None] * models.cost_scale[None, mi])[:, :, None]  # cost scale c, [G, N, 1]
    potential = GROUP_POTENTIAL[:, None, None]
    turnover = (GROUP_TURNOVER[:, None] * models.turnover_scale[None, mi])[:, :, None]
    frac = np.zeros((len(GROUPS), len(mi), len(REGIONS), len(YEARS)))  # abated fraction per group
    unit_cost = np.zeros_like(frac)  # USD_2015 per t of the group's base
    experience = np.zeros(frac.shape[:-1])
    for t in range(1, len(YEARS)):  # the capital stock is a recursion in time; everything else is vectorised
        scale = scale0 * (1.0 + experience / EXPERIENCE0) ** -LEARNING
        frac[..., t], unit_cost[..., t] = _vintage_step(
            frac[..., t - 1], unit_cost[..., t - 1], price[None, :, :, t], scale, scale0, potential, turnover
        )
        experience = experience + 5.0 * frac[..., t]
    a = dict(zip(GROUPS, frac, strict=True))

    fossil_ref = [ref[f"fuel.{f}"] for f in FUELS[:3]]
    fossil = [q * (1.0 - a[f]) for q, f in zip(fossil_ref, FUELS[:3], strict=True)]
    lost = sum(q * a[f] for q, f in zip(fossil_ref, FUELS[:3], strict=True))
    demand = models.demand_share[mi][:, None, None]
    beccs = BECCS_MAX[None, :, None] * models.beccs_scale[mi][:, None, None] * a["beccs"]
    out: dict[str, np.ndarray] = {}
    for i, fuel in enumerate(FUELS):
        if i < 3:
            out[f"energy.primary.{fuel}"] = fossil[i]
        else:
            out[f"energy.primary.{fuel}"] = ref[f"fuel.{fuel}"] + (1.0 - demand) * lost * LOW_CARBON_SHARE[i]
    out["energy.primary.biomass"] = out["energy.primary.biomass"] + beccs / BECCS_MT_PER_EJ
    pe_ref = sum(ref[f"fuel.{f}"] for f in FUELS)
    cut = 0.9 * demand * lost / pe_ref
    for i, (sector, name) in enumerate(zip(("ind", "trans", "bldg", "other"), FE_SECTORS, strict=True)):
        out[f"energy.final.{name}"] = ref[f"fe.{sector}"] * (1.0 - cut * FE_CUT_WEIGHT[i])

    fuel_co2 = [q * ef for q, ef in zip(fossil, EMISSION_FACTOR, strict=True)]
    sector_co2 = [sum(fuel_co2[f] * FUEL_TO_SECTOR[f, s] for f in range(3)) for s in range(len(SECTORS))]
    captured_base = sector_co2[0] + sector_co2[1]
    sector_co2[0] = sector_co2[0] * (1.0 - a["ccs"]) - beccs
    sector_co2[1] = sector_co2[1] * (1.0 - a["ccs"])
    sector_co2[4] = sector_co2[4] + ref["process"] * (1.0 - a["process"])
    for s, co2 in zip(SECTORS, sector_co2, strict=True):
        out[f"emissions.co2.fossil.{s}"] = co2
    land_base = np.maximum(ref["land"], 0.0)
    sink = SINK_MAX[None, :, None] * models.sink_scale[mi][:, None, None]
    out["emissions.co2.land"] = ref["land"] - land_base * a["land"] - sink * a["sink"]
    out["emissions.ch4"] = ref["ch4"] * (1.0 - a["ch4"])
    out["emissions.n2o"] = ref["n2o"] * (1.0 - a["n2o"])
    out["emissions.fgases"] = ref["fgas"] * (1.0 - a["fgas"])

    # Costs: what the capital in place costs over the reference (see _vintage_step), billion USD/yr.
    bases = {
        "coal": fossil_ref[0] * EMISSION_FACTOR[0],
        "oil": fossil_ref[1] * EMISSION_FACTOR[1],
        "gas": fossil_ref[2] * EMISSION_FACTOR[2],
        "ccs": captured_base,
        "process": ref["process"],
        "land": land_base,
        "sink": sink,
        "beccs": BECCS_MAX[None, :, None] * models.beccs_scale[mi][:, None, None],
        "ch4": ref["ch4"] * ghg_factor["emissions.ch4"],
        "n2o": ref["n2o"] * ghg_factor["emissions.n2o"],
        "fgas": ref["fgas"] * ghg_factor["emissions.fgases"],
    }
    cost = sum(bases[k] * unit_cost[i] for i, k in enumerate(GROUPS)) / 1000.0  # Mt x USD/t -> billion USD
    out["cost.abatement"] = cost

    # GDP loss grows with the depth of abatement (abated Mt CO2e over the no-policy emissions it acts on), not with
    # the abatement bill alone: a transformed economy loses more than the direct cost, and deeper and later cuts
    # weigh more, so losses rise with stringency and through the century.
    emitted = sum(bases[k] for k in ("coal", "oil", "gas", "process", "land", "ch4", "n2o"))
    depth = sum(bases[k] * a[k] for k in GROUPS) / emitted
    loss = np.minimum(models.gdp_loss[mi][:, None, None] * LOSS_AT_FULL_DEPTH * depth**LOSS_POWER, 0.2)
    out["population"] = ref["population"]
    out["gdp.mer"] = ref["gdp.mer"] * (1.0 - loss)
    out["gdp.ppp"] = ref["gdp.mer"] * ref["ppp_ratio"] * (1.0 - loss)
    out["consumption"] = ref["gdp.mer"] * ref["cons_share"] * (1.0 - 1.2 * loss)
    out["price.carbon"] = np.broadcast_to(price, land_base.shape).copy()
    if adjust is not None:
        adjust(out)

    # Permits: allowances move part of the way from each region's own emissions to a per-capita share.
    ghg = _regional_ghg(out, ghg_factor)
    pop_share = out["population"] / out["population"].sum(axis=1, keepdims=True)
    years = YEARS[None, None, :]
    start = runs.start[:, None, None]
    converge = np.where(start > 0, 0.4 * np.clip((years - start + 5) / 20.0, 0.0, 1.0), 0.0)
    out["trade.permits"] = converge * (pop_share * ghg.sum(axis=1, keepdims=True) - ghg)
    return out


def _assemble(leaves: dict[str, np.ndarray], con: Contract) -> np.ndarray:
    """Integer array [N, 6, V, T] in 1e-4 units, World first, variables in contract order, all identities exact."""
    names = list(con.variables)
    n, r, t = next(iter(leaves.values())).shape
    ints: dict[str, np.ndarray] = {}
    for name, arr in leaves.items():
        ints[name] = np.rint(arr * QUANTUM).astype(np.int64)
    # Permits must net to zero exactly: the last region takes minus the sum of the others.
    tp = ints["trade.permits"]
    tp[:, -1, :] = -tp[:, :-1, :].sum(axis=1)

    def resolve(name: str) -> np.ndarray:
        if name not in ints:
            parts = con.variables[name].parts
            if not parts:
                raise KeyError(f"the generator has no values for contract variable {name!r}")
            total = sum(p.factor * resolve(p.variable).astype(float) for p in parts)
            exact = all(p.factor == 1.0 for p in parts)
            exact_sum = np.sum([resolve(p.variable) for p in parts], axis=0)
            ints[name] = exact_sum if exact else np.rint(total).astype(np.int64)
        return ints[name]

    cube = np.empty((n, r + 1, len(names), t), dtype=np.int64)
    for j, name in enumerate(names):
        regional = resolve(name)
        cube[:, 1:, j, :] = regional
        how = con.variables[name].regions
        if how == "sum":
            cube[:, 0, j, :] = regional.sum(axis=1)
        elif how == "zero":
            cube[:, 0, j, :] = 0
        else:  # an intensive variable: World reports the same (uniform) price
            cube[:, 0, j, :] = regional[:, 0, :]
    return cube


def _long(cube: np.ndarray, runs: Runs, models: Models, con: Contract) -> pd.DataFrame:
    """The long table (one row per model, scenario, region, variable, year) in the order of the cube."""
    n, r, v, t = cube.shape
    per_run = r * v * t
    names = list(con.variables)
    units = np.array([con.variables[x].unit for x in names], dtype=object)
    model_names = np.array(models.names, dtype=object)[runs.model]
    return pd.DataFrame(
        {
            "model": np.repeat(model_names, per_run),
            "scenario": np.repeat(np.array(runs.scenario, dtype=object), per_run),
            "region": np.tile(np.repeat(np.array(ALL_REGIONS, dtype=object), v * t), n),
            "variable": np.tile(np.repeat(np.array(names, dtype=object), t), n * r),
            "unit": np.tile(np.repeat(units, t), n * r),
            "year": np.tile(YEARS.astype(np.int64), n * r * v),
            "value": cube.reshape(-1) / QUANTUM,
        }
    )


def _scenario_table(runs: Runs, models: Models) -> pd.DataFrame:
    """One row per run: the scenario attributes a submission declares."""
    model_names = np.array(models.names, dtype=object)[runs.model]
    fam = np.array(runs.family, dtype=object)
    return pd.DataFrame(
        {
            "model": model_names,
            "scenario": np.array(runs.scenario, dtype=object),
            # numpy's stubs refuse None as a choice of where(); with object arrays it is what pandas wants
            "reference": np.where(fam == "reference", None, REFERENCE_NAME),  # type: ignore[call-overload]
            "family": fam,
            "ambition": np.where(  # type: ignore[call-overload]
                np.array(runs.ambition, dtype=object) == "", None, np.array(runs.ambition)
            ),
            "policy_start": pd.Series(runs.start, dtype="Int64").where(runs.start > 0),
        }
    )


def _ensemble(
    names: tuple[str, ...] = MODELS,
    only: tuple[str, ...] | None = None,
    price_factor: float = 1.0,
    adjust: Callable[[dict[str, np.ndarray]], None] | None = None,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    con = contract()
    models = _models(names, np.random.default_rng(SEED))
    factors = ghg_factors(con)
    runs = _protocol_runs(models, factors, only=only, price_factor=price_factor)
    cube = _assemble(_simulate(models, runs, factors, adjust), con)
    return _long(cube, runs, models, con), _scenario_table(runs, models)


def ensemble_frame() -> pd.DataFrame:
    """The clean demo ensemble (four models, all scenarios) as one long table."""
    return _ensemble()[0]


def scenario_frame() -> pd.DataFrame:
    """The scenario attributes of the clean demo ensemble."""
    return _ensemble()[1]


# --- files ---------------------------------------------------------------------------------------------------


def _write_csv(df: pd.DataFrame, path: Path) -> Path:
    df.to_csv(path, index=False, lineterminator="\n")
    return path


_FIXED_STAMP = "2020-01-01T00:00:00Z"


def _write_xlsx(data: pd.DataFrame, scenarios: pd.DataFrame, path: Path) -> Path:
    """Both sheets into one workbook, then fix the zip timestamps so the bytes do not depend on the clock."""
    buf = io.BytesIO()
    with pd.ExcelWriter(buf, engine="openpyxl") as writer:
        data.to_excel(writer, sheet_name="data", index=False)
        scenarios.to_excel(writer, sheet_name="scenarios", index=False)
    stamp = re.compile(rb"(<dcterms:(?:created|modified)[^>]*>)[^<]*(</dcterms:)")
    with zipfile.ZipFile(io.BytesIO(buf.getvalue())) as src, zipfile.ZipFile(path, "w") as dst:
        for info in src.infolist():
            payload = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                payload = stamp.sub(rb"\g<1>" + _FIXED_STAMP.encode() + rb"\g<2>", payload)
            fixed = zipfile.ZipInfo(info.filename, date_time=(2020, 1, 1, 0, 0, 0))
            fixed.compress_type = zipfile.ZIP_DEFLATED
            dst.writestr(fixed, payload)
    return path


def _flaw_leaves(out: dict[str, np.ndarray]) -> None:
    """Flaws that keep every sum consistent: a negative CH4 value and a base-year population far off."""
    dov, cen, y2060 = REGIONS.index("Dovania"), REGIONS.index("Cendral"), int(np.flatnonzero(YEARS == 2060)[0])
    out["emissions.ch4"][0, dov, y2060] = -4.0
    out["population"][:, cen, :] *= 1.25


def flawed_frames() -> tuple[pd.DataFrame, pd.DataFrame]:
    """The flawed fifth model: two scenarios with a handful of deliberate, clearly separate mistakes."""
    protocol = tuple(p for p in PROTOCOL if p[0] in (REFERENCE_NAME, "act-firm"))
    con = contract()
    models = _models((FLAWED_MODEL,), np.random.default_rng(SEED + 1))
    runs = _protocol_runs(models, ghg_factors(con), protocol=protocol)
    data = _long(_assemble(_simulate(models, runs, ghg_factors(con), _flaw_leaves), con), runs, models, con)
    scen = data["scenario"]
    # A typo in a variable name (the real name is then missing for that scenario).
    data.loc[(scen == "act-firm") & (data["variable"] == "consumption"), "variable"] = "consumtion"
    # An energy unit on an emissions variable.
    data.loc[(scen == "act-firm") & (data["region"] == "Estrel") & (data["variable"] == "emissions.ch4"), "unit"] = (
        "EJ/yr"
    )
    # A sector that no longer adds up to its total (also at World, where the sector was summed over regions).
    hit = (scen == REFERENCE_NAME) & (data["year"] == 2050) & (data["variable"] == "emissions.co2.fossil.transport")
    data.loc[hit & data["region"].isin(["Belmora", WORLD]), "value"] += 1500.0
    # A World value that is not the sum of its regions.
    hit = (scen == REFERENCE_NAME) & (data["year"] == 2050) & (data["variable"] == "population")
    data.loc[hit & (data["region"] == WORLD), "value"] = (
        data.loc[hit & (data["region"] == WORLD), "value"] * 1.05
    ).round(4)
    return data, _scenario_table(runs, models)


def revision_frames() -> tuple[pd.DataFrame, pd.DataFrame]:
    """A second version of two of REVISED_MODEL's scenarios: the team re-ran them with a 15 % higher price."""
    data, scenarios = _ensemble(only=(REVISED_MODEL,), price_factor=1.15)
    keep_d, keep_s = data["scenario"].isin(REVISED_SCENARIOS), scenarios["scenario"].isin(REVISED_SCENARIOS)
    return data[keep_d].reset_index(drop=True), scenarios[keep_s].reset_index(drop=True)


def write_demo(out_dir: Path) -> DemoFiles:
    """Write every demo submission into `out_dir` (created if needed) and say which file plays which role."""
    t0 = time.perf_counter()
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    data, scenarios = _ensemble()
    submissions: dict[str, list[Path]] = {}
    for model in MODELS:
        d = data[data["model"] == model].reset_index(drop=True)
        s = scenarios[scenarios["model"] == model].reset_index(drop=True)
        stem = model.lower()
        if model == XLSX_MODEL:
            submissions[model] = [_write_xlsx(d, s, out_dir / f"{stem}.xlsx")]
        else:
            submissions[model] = [
                _write_csv(d, out_dir / f"{stem}.csv"),
                _write_csv(s, out_dir / f"{stem}-scenarios.csv"),
            ]
    fd, fs = flawed_frames()
    stem = FLAWED_MODEL.lower()
    flawed = [_write_csv(fd, out_dir / f"{stem}.csv"), _write_csv(fs, out_dir / f"{stem}-scenarios.csv")]
    rd, rs = revision_frames()
    stem = f"{REVISED_MODEL.lower()}-v2"
    revision = [_write_csv(rd, out_dir / f"{stem}.csv"), _write_csv(rs, out_dir / f"{stem}-scenarios.csv")]
    return DemoFiles(out_dir, submissions, flawed, revision, seconds=time.perf_counter() - t0)


# --- contract tables ------------------------------------------------------------------------------------------

REFERENCE_VARIABLES = (
    "emissions.co2",
    "emissions.ch4",
    "emissions.n2o",
    "emissions.fgases",
    "emissions.ghg",
    "energy.primary",
    "population",
    "gdp.mer",
)


def reference_frame() -> pd.DataFrame:
    """Base-year reference values (the invented 'historical' data the models calibrate to), regions and World."""
    con = contract()
    fuel = PE0[:, None] * FUEL_SHARE0
    fossil = (fuel[:, :3] * EMISSION_FACTOR).sum(axis=1) + PROCESS0
    co2 = fossil + LAND0
    factor = ghg_factors(con)
    ch4_f, n2o_f = factor["emissions.ch4"], factor["emissions.n2o"]
    values = {
        "emissions.co2": co2,
        "emissions.ch4": CH40,
        "emissions.n2o": N2O0,
        "emissions.fgases": FGAS0,
        "emissions.ghg": co2 + ch4_f * CH40 + n2o_f * N2O0 + factor["emissions.fgases"] * FGAS0,
        "energy.primary": PE0,
        "population": POP0,
        "gdp.mer": GDP0,
    }
    rows = []
    for var in REFERENCE_VARIABLES:
        vals = np.round(values[var], 1)
        for region, value in zip(ALL_REGIONS, [round(float(vals.sum()), 1), *map(float, vals)], strict=True):
            rows.append((region, var, con.variables[var].unit, BASE_YEAR, value))
    return pd.DataFrame(rows, columns=["region", "variable", "unit", "year", "value"])


BOUNDS = (  # variable, region, year_from, year_to, low, high  (None = any)
    ("price.carbon", None, None, None, 0.0, 5000.0),
    ("population", WORLD, None, None, 0.0, 15000.0),
    ("energy.primary", WORLD, None, None, 0.0, 2000.0),
    ("emissions.co2", WORLD, None, None, -40000.0, 100000.0),
    ("emissions.co2", WORLD, 2020, 2030, 10000.0, 60000.0),
    ("emissions.ch4", WORLD, None, None, 0.0, 1500.0),
    ("emissions.n2o", WORLD, None, None, 0.0, 40000.0),
    ("emissions.fgases", WORLD, None, None, 0.0, 5000.0),
    ("emissions.co2.land", None, None, None, -10000.0, 10000.0),
    ("gdp.mer", WORLD, None, None, 0.0, 2000000.0),
)


def bounds_frame() -> pd.DataFrame:
    """A few plausibility bounds for the demo contract."""
    df = pd.DataFrame(list(BOUNDS), columns=["variable", "region", "year_from", "year_to", "low", "high"])
    for col in ("year_from", "year_to"):
        df[col] = df[col].astype("Int64")
    return df


def write_contract_tables(contract_dir: Path = CONTRACT_DIR) -> tuple[Path, Path]:
    """(Re)write reference.csv and bounds.csv of the demo contract."""
    ref = _write_csv(reference_frame(), Path(contract_dir) / "reference.csv")
    bnd = _write_csv(bounds_frame(), Path(contract_dir) / "bounds.csv")
    return ref, bnd


# --- benchmark inputs -----------------------------------------------------------------------------------------


def write_synthetic(path: Path, rows: int, seed: int = 0) -> Path:
    """A large long-format CSV of exactly `rows` rows with valid names, units and years (values do not add up)."""
    import duckdb

    from milepost.validate.sql import literal, literal_list

    con_ = contract()
    names = list(con_.variables)
    ref = reference_frame()
    world = ref[ref["region"] == WORLD].set_index("variable")["value"]
    scale = {"price.carbon": 200.0, "cost.abatement": 1000.0, "trade.permits": 500.0}
    for part in names:
        scale.setdefault(part, float(world.get(part, 0.0)) or 50.0)
    per_scenario = len(ALL_REGIONS) * len(names) * len(YEARS)
    years = "[" + ", ".join(str(int(y)) for y in YEARS) + "]"
    units = literal_list([con_.variables[x].unit for x in names])
    query = f"""
        COPY (
          SELECT 'Synthex' AS model,
                 'syn-' || lpad((i // {per_scenario})::VARCHAR, 6, '0') AS scenario,
                 {literal_list(ALL_REGIONS)}[(i // {len(names) * len(YEARS)}) % {len(ALL_REGIONS)} + 1] AS region,
                 {literal_list(names)}[(i // {len(YEARS)}) % {len(names)} + 1] AS variable,
                 {units}[(i // {len(YEARS)}) % {len(names)} + 1] AS unit,
                 {years}[i % {len(YEARS)} + 1] AS year,
                 round({"[" + ", ".join(repr(scale[x]) for x in names) + "]"}[(i // {len(YEARS)}) % {len(names)} + 1]
                       * (0.2 + 0.8 * (hash(i, {int(seed)}) % 1000000) / 1000000.0), 4) AS value
          FROM range({int(rows)}) r(i)
          ORDER BY i
        ) TO {literal(str(Path(path)))} (HEADER, DELIMITER ',')
    """  # noqa: S608 - demo constants; names and path via validate.sql
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    with duckdb.connect() as db:
        db.execute(query)
    return Path(path)


def _many_runs(models: Models, n_scenarios: int, rng: np.random.Generator) -> Runs:
    """About n_scenarios runs spread over the models: one reference each plus sampled price paths."""
    m = len(models.names)
    per_model = max(n_scenarios // m, 2)
    k = per_model - 1
    model = np.repeat(np.arange(m), per_model)
    is_ref = np.tile(np.r_[True, np.zeros(k, dtype=bool)], m)
    delayed = rng.random(m * per_model) < 0.4
    start = np.where(is_ref, 0, np.where(delayed, rng.choice([2035, 2040], m * per_model), POLICY_START))
    level = np.exp(rng.uniform(np.log(3.0), np.log(300.0), m * per_model)) * models.price_scale[model]
    premium = np.where(delayed, rng.uniform(1.2, 2.0, m * per_model), 1.0)
    g1, g2 = rng.uniform(0.03, 0.07, m * per_model), rng.uniform(0.01, 0.03, m * per_model)
    family = np.where(is_ref, "reference", np.where(delayed, "delayed", "immediate"))
    label = np.array(["mild", "firm", "bold", "deep", "max"])[np.digitize(level, [15.0, 40.0, 80.0, 150.0])]
    counter = np.tile(np.arange(per_model), m)
    names = np.where(
        is_ref, REFERENCE_NAME, np.char.add(np.where(delayed, "wait-", "act-"), np.char.zfill(counter.astype(str), 4))
    )
    return Runs(
        model,
        tuple(names.tolist()),
        tuple(family.tolist()),
        tuple(np.where(is_ref, "", label).tolist()),
        start,
        _price(level, start, premium, g1, g2),
    )


def write_many_scenarios(out_dir: Path, n_scenarios: int = 3000, fmt: str = "parquet") -> list[Path]:
    """A consistent ensemble of about `n_scenarios` scenarios over the four demo models, one data file
    (Parquet, or CSV with fmt="csv") and one scenarios CSV per model; returns the paths."""
    import pyarrow as pa
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    if fmt not in ("parquet", "csv"):
        raise ValueError(f"fmt must be 'parquet' or 'csv', not {fmt!r}")
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    con_ = contract()
    models = _models(MODELS, np.random.default_rng(SEED))
    runs = _many_runs(models, n_scenarios, np.random.default_rng([SEED, n_scenarios]))
    cube = _assemble(_simulate(models, runs, ghg_factors(con_)), con_)
    scen = _scenario_table(runs, models)
    names = list(con_.variables)
    _, r, v, t = cube.shape
    paths: list[Path] = []
    for mi, model in enumerate(MODELS):
        sel = np.flatnonzero(runs.model == mi)
        k = len(sel)

        def dict_col(codes: np.ndarray, values: list[str]) -> pa.Array:
            return pa.DictionaryArray.from_arrays(pa.array(codes, pa.int32()), pa.array(values)).cast(pa.string())

        scen_names = [runs.scenario[i] for i in sel]
        table = pa.table(
            {
                "model": dict_col(np.zeros(k * r * v * t, dtype=np.int32), [model]),
                "scenario": dict_col(np.repeat(np.arange(k, dtype=np.int32), r * v * t), scen_names),
                "region": dict_col(np.tile(np.repeat(np.arange(r, dtype=np.int32), v * t), k), list(ALL_REGIONS)),
                "variable": dict_col(np.tile(np.repeat(np.arange(v, dtype=np.int32), t), k * r), names),
                "unit": dict_col(
                    np.tile(np.repeat(np.arange(v, dtype=np.int32), t), k * r), [con_.variables[x].unit for x in names]
                ),
                "year": pa.array(np.tile(YEARS.astype(np.int64), k * r * v)),
                "value": pa.array(cube[sel].reshape(-1) / QUANTUM),
            }
        )
        stem = f"many-{model.lower()}"
        if fmt == "parquet":
            data_path = out_dir / f"{stem}.parquet"
            pq.write_table(table, data_path, compression="zstd")
        else:
            data_path = out_dir / f"{stem}.csv"
            pacsv.write_csv(table, data_path, pacsv.WriteOptions(quoting_style="needed"))
        paths += [data_path, _write_csv(scen[scen["model"] == model], out_dir / f"{stem}-scenarios.csv")]
    return paths


def main(argv: list[str] | None = None) -> int:
    """Command line: write the demo files into OUT_DIR (and optionally the benchmark inputs)."""
    parser = argparse.ArgumentParser(prog="python -m milepost.example_db.generate", description=__doc__)
    parser.add_argument("out_dir", type=Path)
    parser.add_argument("--contract-tables", action="store_true", help="also rewrite reference.csv and bounds.csv")
    parser.add_argument("--synthetic-rows", type=int, default=0, help="also write synthetic.csv with this many rows")
    parser.add_argument("--many-scenarios", type=int, default=0, help="also write an ensemble of this many scenarios")
    args = parser.parse_args(argv)
    files = write_demo(args.out_dir)
    for path in files.all_paths():
        print(f"{path}  {path.stat().st_size:,} bytes")
    print(f"demo written in {files.seconds:.1f} s")
    if args.contract_tables:
        for path in write_contract_tables():
            print(path)
    if args.synthetic_rows:
        t0 = time.perf_counter()
        path = write_synthetic(args.out_dir / "synthetic.csv", args.synthetic_rows)
        print(f"{path}  {path.stat().st_size:,} bytes  ({time.perf_counter() - t0:.1f} s)")
    if args.many_scenarios:
        t0 = time.perf_counter()
        for path in write_many_scenarios(args.out_dir / "many", args.many_scenarios):
            print(f"{path}  {path.stat().st_size:,} bytes")
        print(f"many-scenario ensemble written in {time.perf_counter() - t0:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
