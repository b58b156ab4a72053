"""Base-year harmonisation on real CSV files checked by the real runner: formulas, rebuilt totals, findings.

The method formulas (ratio, offset and their linear convergence to the model's values) are the published ones as
stated in issue 12; the project's reference notes list them as common practice of the trade with no published
source cited. The worked example below is computed by hand from them (it is the derived example of those notes,
moved from base year 2015 to 2020). The test contract is tests/contracts/harmonise: North + South = World;
emissions.total = energy + land + other; energy = power + rest; reference values for energy and land.
"""

from __future__ import annotations

import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from milepost.schema.contract import Contract, load
from milepost.validate.harmonise import HarmoniseResult, harmonise, text_table
from milepost.validate.harmonise.output import write_table
from milepost.validate.runner import CheckResult, run_check

from builders import consistent_rows, line_of, write_csv

CONTRACT_DIR = Path(__file__).parent / "contracts" / "harmonise"
YEARS = (2015, 2020, 2035, 2055, 2070)
REGIONS = ("North", "South")
LEAVES = ("emissions.energy.power", "emissions.energy.rest", "emissions.land", "emissions.other", "population")
UNITS = {"population": "million"}
REFERENCE = {
    ("North", "emissions.energy"): 40.0,
    ("South", "emissions.energy"): 60.0,
    ("World", "emissions.energy"): 100.0,
    ("North", "emissions.land"): 5.0,
    ("South", "emissions.land"): -3.0,
    ("World", "emissions.land"): 2.0,
}

Leaves = dict[tuple[str, str], dict[int, float]]  # (region, leaf variable) -> year -> value


@pytest.fixture(scope="module")
def contract() -> Contract:
    return load(CONTRACT_DIR)


def base_leaves() -> Leaves:
    """Invented values: energy(North) = power + rest = 45, 50, 60, 70, 80 over YEARS (the worked example)."""
    out: Leaves = {
        ("North", "emissions.energy.power"): dict(zip(YEARS, (27.0, 30.0, 36.0, 42.0, 48.0), strict=True)),
        ("North", "emissions.energy.rest"): dict(zip(YEARS, (18.0, 20.0, 24.0, 28.0, 32.0), strict=True)),
        ("South", "emissions.energy.power"): dict(zip(YEARS, (40.0, 44.0, 40.0, 30.0, 20.0), strict=True)),
        ("South", "emissions.energy.rest"): dict(zip(YEARS, (20.0, 22.0, 20.0, 15.0, 10.0), strict=True)),
        ("North", "emissions.land"): dict(zip(YEARS, (9.0, 8.0, 6.0, 4.0, 2.0), strict=True)),
        ("South", "emissions.land"): dict(zip(YEARS, (-2.0, -4.0, -5.0, -6.0, -6.0), strict=True)),
        ("North", "emissions.other"): dict(zip(YEARS, (3.0, 3.0, 2.0, 1.0, 1.0), strict=True)),
        ("South", "emissions.other"): dict(zip(YEARS, (4.0, 4.0, 4.0, 3.0, 2.0), strict=True)),
    }
    for r in REGIONS:
        out[(r, "population")] = dict.fromkeys(YEARS, 50.0)
    return out


def with_totals(leaves: Leaves) -> dict[tuple[str, str], dict[int, float]]:
    """Energy, total and World computed from the leaves, so every sum of the submission holds exactly."""
    out = dict(leaves)
    for r in REGIONS:
        for y in YEARS:
            energy = leaves[(r, "emissions.energy.power")][y] + leaves[(r, "emissions.energy.rest")][y]
            out.setdefault((r, "emissions.energy"), {})[y] = energy
            total = energy + leaves[(r, "emissions.land")][y] + leaves[(r, "emissions.other")][y]
            out.setdefault((r, "emissions.total"), {})[y] = total
    for var in {v for _, v in out}:
        out[("World", var)] = {y: sum(out[(r, var)][y] for r in REGIONS) for y in YEARS}
    return out


def long_rows(
    series: dict[tuple[str, str], dict[int, float]], drop: frozenset[tuple[str, str, int]] = frozenset()
) -> list:
    return [
        {
            "model": "M1",
            "scenario": "S1",
            "region": r,
            "variable": v,
            "unit": UNITS.get(v, "Mt CO2/yr"),
            "year": y,
            "value": repr(x),
        }
        for (r, v), by_year in sorted(series.items())
        for y, x in sorted(by_year.items())
        if (r, v, y) not in drop
    ]


@contextmanager
def run(
    folder: Path, rows: list[dict], contract: Contract, **options: object
) -> Iterator[tuple[CheckResult, HarmoniseResult]]:
    path = write_csv(folder / "submission.csv", rows)
    checked = run_check([path], contract)
    try:
        yield checked, harmonise(checked.con, contract, **options)  # type: ignore[arg-type]
    finally:
        checked.con.close()


def values(h: HarmoniseResult) -> dict[tuple[str, str, int], float]:
    rows = h.con.execute("SELECT region::VARCHAR, variable::VARCHAR, year, value FROM harmonised").fetchall()
    return {(r, v, y): x for r, v, y, x in rows}


def methods(h: HarmoniseResult) -> dict[tuple[str, str], dict]:
    cur = h.con.execute("SELECT * FROM harmonise_methods")
    names = [d[0] for d in cur.description]
    return {(row[2], row[3]): dict(zip(names, row, strict=True)) for row in cur.fetchall()}


# ------------------------------------------------------------------ the worked example, by hand

# energy(North): m = 45 (2015), 50 (2020 = t0), 60 (2035), 70 (2055 = tc), 80 (2070); h = 40, so h/m0 = 0.8 and
# h - m0 = -10. The weight at 2035 is w = 1 - (2035 - 2020) / (2055 - 2020) = 1 - 15/35 = 4/7.
#   converging ratio  2035: 60 * (4/7 * (0.8 - 1) + 1) = 60 * 6.2/7 = 372/7;  2055 on: the model's 70, 80
#   converging offset 2035: 60 + 4/7 * (-10) = 380/7;                        2055 on: the model's 70, 80
#   ratio             every year times 0.8: 36, 40, 48, 56, 64
#   offset            every year minus 10:  35, 40, 50, 60, 70
# Before the base year the full adjustment applies (w = 1): 45 * 0.8 = 36, 45 - 10 = 35.
WORKED = {
    "converging-ratio": (36.0, 40.0, 372 / 7, 70.0, 80.0),
    "converging-offset": (35.0, 40.0, 380 / 7, 70.0, 80.0),
    "ratio": (36.0, 40.0, 48.0, 56.0, 64.0),
    "offset": (35.0, 40.0, 50.0, 60.0, 70.0),
}


@pytest.mark.parametrize("method", list(WORKED))
def test_worked_example_computed_by_hand(tmp_path, contract, method):
    with run(tmp_path, long_rows(with_totals(base_leaves())), contract, method=method) as (_, h):
        got = values(h)
        assert [got[("North", "emissions.energy", y)] for y in YEARS] == pytest.approx(WORKED[method], rel=1e-12)
        m = methods(h)[("North", "emissions.energy")]
        assert m["method"] == method
        if "ratio" in method:
            assert (m["factor"], m["offset_value"]) == (pytest.approx(0.8), None)
        else:
            assert (m["factor"], m["offset_value"]) == (None, pytest.approx(-10.0))
        assert m["convergence_year"] == (2055 if method.startswith("converging") else None)


def test_contract_defaults_and_a_variable_of_its_own(tmp_path, contract):
    # land uses its own converging-offset with tc = 2040: land(North) m0 = 8, h = 5, offset -3, and at 2035
    # w = 1 - 15/20 = 1/4: 6 + (1/4) * (-3) = 5.25; from 2040 on the model's values (4 in 2055, 2 in 2070).
    with run(tmp_path, long_rows(with_totals(base_leaves())), contract) as (_, h):
        got = values(h)
        assert [got[("North", "emissions.land", y)] for y in YEARS] == pytest.approx([6.0, 5.0, 5.25, 4.0, 2.0])
        m = methods(h)
        assert m[("North", "emissions.land")]["method"] == "converging-offset"
        assert m[("North", "emissions.land")]["convergence_year"] == 2040
        assert m[("North", "emissions.energy")]["method"] == "converging-ratio"
        assert m[("World", "population")]["method"] == "unchanged"  # a reference, but not a harmonised variable
        assert got[("World", "population", 2020)] == 100.0


def test_totals_are_rebuilt_and_parts_without_reference_left_out(tmp_path, contract):
    with run(tmp_path, long_rows(with_totals(base_leaves())), contract) as (_, h):
        got = values(h)
        m = methods(h)
        for y in YEARS:
            north, south = got[("North", "emissions.energy", y)], got[("South", "emissions.energy", y)]
            assert got[("World", "emissions.energy", y)] == pytest.approx(north + south, rel=1e-12)
            for r in REGIONS:
                parts = sum(got[(r, v, y)] for v in ("emissions.energy", "emissions.land", "emissions.other"))
                assert got[(r, "emissions.total", y)] == pytest.approx(parts, rel=1e-12)
        assert got[("World", "emissions.energy", 2020)] == pytest.approx(100.0)  # the sum of two references
        assert m[("World", "emissions.energy")]["method"] == "from-regions"
        assert m[("North", "emissions.total")]["method"] == "from-parts"
        assert m[("North", "emissions.other")]["method"] == "unchanged"
        assert got[("North", "emissions.other", 2035)] == 2.0
        for r in (*REGIONS, "World"):
            for part in ("emissions.energy.power", "emissions.energy.rest"):
                assert m[(r, part)]["method"] == "left-out"
                assert (r, part, 2020) not in got
        left = [f for f in h.findings if f.rule == "harmonise-parts-left-out"]
        assert {(f.region, f.variable) for f in left} == {(r, "emissions.energy") for r in (*REGIONS, "World")}
        assert all("emissions.energy.power, emissions.energy.rest" in f.message for f in left)
        partial = {(f.region, f.variable): f for f in h.findings if f.rule == "harmonise-partial-total"}
        assert set(partial) == {(r, "emissions.total") for r in (*REGIONS, "World")}
        assert "(emissions.other)" in partial[("North", "emissions.total")].message


def test_the_harmonised_file_passes_the_contracts_checks(tmp_path, contract):
    with run(tmp_path, long_rows(with_totals(base_leaves())), contract) as (raw, h):
        # the raw base years are far from the references (that is why one harmonises), and nothing else is wrong
        assert {r for r, _, _ in raw.rule_counts} == {"base-year-deviation"}
        out = tmp_path / "harmonised.csv"
        assert write_table(h.con, "harmonised", out) == h.rows
    again = run_check([out], contract)
    try:
        assert again.rule_counts == [], again.findings[:3]
    finally:
        again.con.close()


def test_a_series_without_base_year_value_gets_a_finding_not_a_crash(tmp_path, contract):
    rows = long_rows(with_totals(base_leaves()), drop=frozenset({("North", "emissions.energy", 2020)}))
    with run(tmp_path, rows, contract) as (_, h):
        (f,) = [f for f in h.findings if f.rule == "harmonise-no-base-year"]
        assert (f.region, f.variable, f.year, f.expected, f.severity) == (
            "North",
            "emissions.energy",
            2020,
            "40",
            "warning",
        )
        assert f.line == line_of(rows, region="North", variable="emissions.energy")
        got, m = values(h), methods(h)
        assert not any(k[:2] == ("North", "emissions.energy") for k in got)
        assert m[("North", "emissions.energy")]["method"] == "left-out"
        # World cannot be summed from its regions any more, so it is harmonised from its own reference ...
        assert m[("World", "emissions.energy")]["method"] == "converging-ratio"
        assert got[("World", "emissions.energy", 2020)] == pytest.approx(100.0)
        # ... and the total of North, which needs the missing part, is left out and reported
        assert m[("North", "emissions.total")]["method"] == "left-out"
        assert any(g.rule == "harmonise-partial-total" and g.region == "North" for g in h.findings)


def test_zero_base_under_a_ratio_method_uses_the_offset(tmp_path, contract):
    leaves = base_leaves()
    leaves[("South", "emissions.energy.power")][2020] = 0.0
    leaves[("South", "emissions.energy.rest")][2020] = 0.0
    with run(tmp_path, long_rows(with_totals(leaves)), contract) as (_, h):
        (f,) = [f for f in h.findings if f.rule == "harmonise-zero-base"]
        assert (f.region, f.variable, f.value, f.expected) == ("South", "emissions.energy", "0", "60")
        assert "converging-offset was used instead of converging-ratio" in f.message
        m = methods(h)[("South", "emissions.energy")]
        assert (m["method"], m["requested"], m["offset_value"]) == ("converging-offset", "converging-ratio", 60.0)
        got = values(h)
        # w(2035) = 4/7: 60 (the model) + 4/7 * 60; from 2055 on the model's own 45 and 30
        assert [got[("South", "emissions.energy", y)] for y in YEARS] == pytest.approx(
            [60 + 60, 60, 60 + 4 / 7 * 60, 45, 30]
        )


def test_model_and_reference_of_different_sign_are_harmonised_by_offset(tmp_path, contract):
    leaves = base_leaves()
    leaves[("South", "emissions.land")][2020] = 4.0  # the reference is -3
    with run(tmp_path, long_rows(with_totals(leaves)), contract, method="ratio") as (_, h):
        (f,) = [f for f in h.findings if f.rule == "harmonise-sign-differs"]
        assert (f.region, f.variable, f.value, f.expected) == ("South", "emissions.land", "4", "-3")
        assert "offset was used instead of ratio" in f.message
        got = values(h)
        # offset -3 - 4 = -7 in every year
        assert [got[("South", "emissions.land", y)] for y in YEARS] == pytest.approx([-9, -3, -12, -13, -13])
        assert methods(h)[("South", "emissions.land")]["method"] == "offset"


def test_median_factor_in_the_report_matches_numpy(demo, demo_contract):
    """The report's median factor per variable and model against numpy.median of h / m(t0) from the raw file."""
    import numpy as np

    checked = run_check(demo[1].submissions["Ormund"], demo_contract)
    try:
        h = harmonise(checked.con, demo_contract)
        ref = {(r.region, r.variable): r.value for r in demo_contract.reference if r.year == 2020}
        raw = checked.con.execute(
            "SELECT region::VARCHAR, variable::VARCHAR, value FROM checked WHERE year = 2020 AND region <> 'World'"
        ).fetchall()
        for variable in ("emissions.co2", "emissions.ch4", "emissions.n2o"):
            factors = [ref[(r, v)] / x for r, v, x in raw if v == variable]
            (line,) = [c for c in h.counts if c.variable == variable and c.method == "converging-ratio"]
            assert line.series == len(factors) == 50  # ten scenarios, five regions; World is summed
            assert line.median_factor == pytest.approx(float(np.median(factors)), rel=1e-12)
    finally:
        checked.con.close()


# ------------------------------------------------------------------ properties

finite = st.floats(min_value=-500, max_value=500, allow_nan=False).map(lambda x: round(x, 3))
positive = st.floats(min_value=0.5, max_value=500, allow_nan=False).map(lambda x: round(x, 3))
METHODS = st.sampled_from(list(WORKED))
# Each example checks and harmonises a real file (about 0.4 s): a dozen per property keeps the suite quick.
FEW = settings(max_examples=12)


@st.composite
def submissions(draw: st.DrawFn, energy_base: st.SearchStrategy[float] = finite) -> Leaves:
    """Random leaves; the two energy parts of each region sum to a base-year value drawn from `energy_base`."""
    leaves = base_leaves()
    for r in REGIONS:
        for v in LEAVES[:4]:
            leaves[(r, v)] = {y: draw(finite) for y in YEARS}
        m0 = draw(energy_base)
        share = draw(st.floats(min_value=0, max_value=1))
        leaves[(r, "emissions.energy.power")][2020] = round(m0 * share, 3)
        leaves[(r, "emissions.energy.rest")][2020] = round(m0 - round(m0 * share, 3), 3)
    return leaves


@contextmanager
def harmonised_example(leaves: Leaves, **options: object) -> Iterator[tuple[dict, dict, dict]]:
    contract = load(CONTRACT_DIR)
    series = with_totals(leaves)
    with tempfile.TemporaryDirectory() as folder, run(Path(folder), long_rows(series), contract, **options) as (_, h):
        yield series, values(h), methods(h)


@FEW
@given(submissions(), METHODS)
def test_property_harmonised_equals_the_reference_at_the_base_year(leaves, method):
    with harmonised_example(leaves, method=method) as (_, got, m):
        for (region, variable), h in REFERENCE.items():
            if m[(region, variable)]["method"] != "left-out":
                assert got[(region, variable, 2020)] == pytest.approx(h, rel=1e-9, abs=1e-9)


@FEW
@given(submissions(), st.sampled_from(["converging-ratio", "converging-offset"]), st.sampled_from([2035, 2055]))
def test_property_converging_methods_give_the_model_value_from_the_convergence_year(leaves, method, tc):
    with harmonised_example(leaves, method=method, converge_year=tc) as (raw, got, m):
        for key, row in m.items():
            if row["method"] == method:
                for y in YEARS:
                    if y >= tc:
                        assert got[(*key, y)] == raw[key][y]


@FEW
@given(submissions(energy_base=positive), st.sampled_from(["ratio", "converging-ratio"]))
def test_property_ratio_keeps_the_years_of_zero_crossings(leaves, method):
    def signs(xs: list[float]) -> list[int]:
        return [(x > 0) - (x < 0) for x in xs]

    def crossings(xs: list[float]) -> list[int]:
        s = signs(xs)
        return [YEARS[i + 1] for i in range(len(s) - 1) if s[i] != s[i + 1]]

    with harmonised_example(leaves, method=method) as (raw, got, m):
        for r in REGIONS:
            assert m[(r, "emissions.energy")]["method"] == method  # positive base and reference: a ratio applies
            before = [raw[(r, "emissions.energy")][y] for y in YEARS]
            after = [got[(r, "emissions.energy", y)] for y in YEARS]
            assert crossings(after) == crossings(before)
            assert signs(after) == signs(before)


@FEW
@given(submissions(), METHODS)
def test_property_totals_equal_the_sum_of_their_parts(leaves, method):
    with harmonised_example(leaves, method=method) as (_, got, _m):
        for y in YEARS:
            for v in ("emissions.energy", "emissions.land", "emissions.total", "emissions.other"):
                if ("World", v, y) in got:
                    parts = [got[(r, v, y)] for r in REGIONS]
                    assert got[("World", v, y)] == pytest.approx(sum(parts), rel=1e-9, abs=1e-9)
            for r in (*REGIONS, "World"):
                parts = [got.get((r, v, y)) for v in ("emissions.energy", "emissions.land", "emissions.other")]
                if (r, "emissions.total", y) in got and None not in parts:
                    assert got[(r, "emissions.total", y)] == pytest.approx(sum(parts), rel=1e-9, abs=1e-9)


def test_without_reference_values_everything_is_unchanged(tmp_path, basic):
    with run(tmp_path, consistent_rows(basic), basic) as (checked, h):
        assert h.rows == checked.usable_rows and h.harmonised_series == 0 and h.findings == []
        same = h.con.execute(
            "SELECT count(*) FROM harmonised h JOIN checked c USING (model, scenario, region, variable, year) "
            "WHERE h.value = c.value"
        ).fetchall()[0][0]
        assert same == checked.usable_rows
        assert text_table(h.counts) == [
            "No series was harmonised: no harmonised variable has a reference value for the base year."
        ]


def test_a_file_without_usable_rows_harmonises_to_nothing(tmp_path, contract):
    rows = long_rows(with_totals(base_leaves()))
    for r in rows:
        r["value"] = "n/a"
    with run(tmp_path, rows, contract) as (checked, h):
        assert checked.usable_rows == 0
        assert (h.rows, h.series, h.findings) == (0, 0, [])
