"""Emission drivers: Kaya factors and the additive LMDI-I decomposition against Ang's formula, limits and gaps."""

from __future__ import annotations

import math

import duckdb
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from milepost.schema.contract import Contract
from milepost.validate.store.indicators import compute_indicators
from milepost.validate.store.indicators.drivers import LMDI, LMDI_UNDEFINED, NEEDS, lmdi_effect

UNITS = {
    "population": "million",
    "gdp.ppp": "billion USD_2015/yr",
    "energy.primary": "EJ/yr",
    "emissions.co2.fossil": "Mt CO2/yr",
}
# Ang (2005) "The LMDI approach to decomposition analysis: a practical guide", Energy Policy 33:867-871, additive
# LMDI-I: effect_k = L(C_T, C_0) ln(x_k,T / x_k,0). No published example with reproducible inputs exists, so the
# example is the one derived from that formula in the project's reference values: P 7 -> 8, G/P 10 -> 12,
# E/G 6 -> 5, C/E 0.07 -> 0.06, so C 29.4 -> 28.8, L = 29.098969, effects +3.885626, +5.305369, -5.305369, -4.485626.
EXAMPLE = {
    "population": (7.0, 8.0),
    "gdp.ppp": (70.0, 96.0),  # G/P 10 -> 12
    "energy.primary": (420.0, 480.0),  # E/G 6 -> 5
    "emissions.co2.fossil": (29.4, 28.8),  # C/E 0.07 -> 0.06
}
EXPECTED = {
    "lmdi_population": 3.885626,
    "lmdi_gdp_per_capita": 5.305369,
    "lmdi_energy_intensity": -5.305369,
    "lmdi_carbon_intensity": -4.485626,
}


def _table(con: duckdb.DuckDBPyConnection) -> None:
    con.execute(
        "CREATE TABLE checked (model VARCHAR, scenario VARCHAR, region VARCHAR, variable VARCHAR, unit VARCHAR,"
        " year INTEGER, value DOUBLE)"
    )
    con.execute("CREATE TABLE checked_scenarios (model VARCHAR, scenario VARCHAR, reference VARCHAR)")


def _add(con: duckdb.DuckDBPyConnection, scenario: str, values: dict[str, tuple[float, float]]) -> None:
    rows = [
        ("M", scenario, "World", v, UNITS[v], year, x)
        for v, pair in values.items()
        for year, x in zip((2020, 2030), pair, strict=True)
    ]
    con.executemany("INSERT INTO checked VALUES (?, ?, ?, ?, ?, ?, ?)", rows)


@pytest.fixture(scope="module")
def computed(basic: Contract):
    con = duckdb.connect()
    _table(con)
    _add(con, "example", EXAMPLE)
    _add(con, "no-energy", {k: v for k, v in EXAMPLE.items() if k != "energy.primary"})
    _add(con, "negative", {**EXAMPLE, "emissions.co2.fossil": (29.4, -3.0)})
    _add(con, "to-zero", {**EXAMPLE, "emissions.co2.fossil": (29.4, 0.0)})
    _add(con, "from-zero", {**EXAMPLE, "emissions.co2.fossil": (0.0, 28.8)})
    _add(con, "no-energy-no-co2", {**EXAMPLE, "energy.primary": (420.0, 0.0), "emissions.co2.fossil": (29.4, 0.0)})
    compute_indicators(con, basic)
    rows = con.execute(
        "SELECT scenario, kind, year_from, year_to, value, unit, note FROM computed_indicators"
        " WHERE kind LIKE 'lmdi%' OR kind IN ('gdp_per_capita', 'energy_intensity', 'carbon_intensity')"
    ).fetchall()
    gaps = con.execute("SELECT scenario, region, kind, variable, note FROM computed_indicators_gaps").fetchall()
    con.close()
    return {(s, k, y0, y1): (v, u, n) for s, k, y0, y1, v, u, n in rows}, gaps


def test_lmdi_matches_the_worked_example_and_sums_to_the_change(computed) -> None:
    rows, _ = computed
    for kind, expected in EXPECTED.items():
        value, unit, note = rows[("example", kind, 2020, 2030)]
        assert value == pytest.approx(expected, abs=1e-6) and unit == "Mt CO2" and note is None
    total = sum(rows[("example", k, 2020, 2030)][0] for k in LMDI)
    assert total == pytest.approx(28.8 - 29.4, abs=1e-12)
    # milestones the inputs do not reach: an empty value with a note, not a zero
    value, _, note = rows[("example", "lmdi_population", 2020, 2050)]
    assert value is None and "not reported" in note


def test_kaya_factors_in_their_units(computed) -> None:
    rows, _ = computed
    assert rows[("example", "gdp_per_capita", 2030, 2030)][:2] == (pytest.approx(12.0), "thousand USD_2015/person")
    assert rows[("example", "energy_intensity", 2020, 2020)][:2] == (pytest.approx(6000.0), "MJ/USD_2015")
    assert rows[("example", "carbon_intensity", 2030, 2030)][:2] == (pytest.approx(0.06), "g CO2/MJ")


def test_zero_values_take_the_analytical_limits(computed) -> None:
    rows, _ = computed

    def effects(scenario: str) -> dict[str, float]:
        return {k: rows[(scenario, k, 2020, 2030)][0] for k in LMDI}

    # The analytical limits (Wood & Lenzen 2006, Energy Policy 34:1326-1331): checked here against the plain
    # formula on a vanishing value, computed independently with numpy.
    def numeric(c0: float, c1: float, e1: float = 480.0) -> dict[str, float]:
        p, g, e = np.array([7.0, 8.0]), np.array([70.0, 96.0]), np.array([420.0, e1])
        c = np.array([c0, c1])
        weight = (c[1] - c[0]) / (np.log(c[1]) - np.log(c[0]))
        factors = [p, g / p, e / g, c / e]
        return {k: float(weight * np.log(x[1] / x[0])) for k, x in zip(LMDI, factors, strict=True)}

    tiny = 1e-300
    for scenario, limit, change in (("to-zero", numeric(29.4, tiny), -29.4), ("from-zero", numeric(tiny, 28.8), 28.8)):
        got = effects(scenario)
        for k in LMDI:
            assert got[k] == pytest.approx(limit[k], abs=0.05)  # the limit is approached as 1/ln(1/tiny)
        assert sum(got.values()) == change
    assert effects("to-zero")["lmdi_carbon_intensity"] == -29.4
    assert effects("from-zero")["lmdi_carbon_intensity"] == 28.8
    # no energy and no CO2 at the end: the energy intensity falls to zero and carries the change
    got = effects("no-energy-no-co2")
    assert got == {**dict.fromkeys(LMDI, 0.0), "lmdi_energy_intensity": -29.4}


def test_negative_co2_has_no_decomposition_and_says_why(computed) -> None:
    rows, _ = computed
    value, _, note = rows[("negative", "lmdi_carbon_intensity", 2020, 2030)]
    assert value is None and "negative" in note


def test_a_missing_input_is_a_gap_not_a_zero(computed) -> None:
    rows, gaps = computed
    kinds = {k for (s, k, _, _) in rows if s == "no-energy"}
    assert kinds == {"gdp_per_capita"}
    mine = {(k, v): n for s, r, k, v, n in gaps if s == "no-energy" and k in NEEDS}
    assert set(mine) == {(k, "emissions.co2.fossil") for k in LMDI} | {
        ("energy_intensity", "energy.primary"),
        ("carbon_intensity", "emissions.co2.fossil"),
    }
    assert all("no energy.primary is reported" in n for n in mine.values())
    assert not [g for g in gaps if g[0] == "example" and g[2] in NEEDS]


positive = st.floats(min_value=1e-3, max_value=1e6, allow_nan=False, allow_infinity=False)


@given(st.lists(st.tuples(*[positive] * 8), min_size=1, max_size=20))
def test_effects_sum_to_the_total_change(values: list[tuple[float, ...]]) -> None:
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE t (p0 DOUBLE, g0 DOUBLE, e0 DOUBLE, c0 DOUBLE, p1 DOUBLE, g1 DOUBLE, e1 DOUBLE, c1 DOUBLE,"
        " year_to INTEGER)"
    )
    con.executemany("INSERT INTO t VALUES (?, ?, ?, ?, ?, ?, ?, ?, 2030)", values)
    effects = ", ".join(f"{lmdi_effect(f)} AS {k}" for k, f in LMDI.items())
    got = con.execute(f"SELECT c0, c1, {effects}, {LMDI_UNDEFINED} AS note FROM t").fetchall()
    con.close()
    for c0, c1, *parts, note in got:
        assert note is None
        assert math.fsum(parts) == pytest.approx(c1 - c0, rel=1e-9, abs=1e-9 * max(c0, c1))
        # the multiplicative form: exp(effect / L) multiplies up to C1 / C0 (Ang 2005)
        if abs(c1 - c0) > 1e-9 * max(c0, c1):
            weight = (c1 - c0) / math.log(c1 / c0)
            assert math.prod(math.exp(e / weight) for e in parts) == pytest.approx(c1 / c0, rel=1e-9)
