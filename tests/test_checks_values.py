"""Values family: sign (non-negative variables) and out-of-bounds (plausibility, warning)."""

from __future__ import annotations

import shutil

import pytest

from milepost.schema.contract import load

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT, rules_at


def _at(rows, **key):
    return next(i for i, r in enumerate(rows) if all(r[k] == v for k, v in key.items()))


def test_negative_methane_breaks_the_sign_rule(tmp_path, basic, check):
    rows = consistent_rows(basic)
    i = _at(rows, variable="emissions.ch4", region="Estrel", year=2030)
    rows[i]["value"] = -4.0
    (f,) = rules_at(check(write_csv(tmp_path / "s.csv", rows), basic), "sign")
    assert (f.line, f.value, f.expected) == (i + 2, "-4", ">= 0")


def test_net_land_co2_may_be_negative(tmp_path, basic, check):
    rows = consistent_rows(basic)
    for r in rows:
        if r["variable"] == "emissions.co2.land":
            r["value"] = -r["value"]
    rows = [r for r in rows if r["variable"] not in ("emissions.co2", "emissions.ghg")]
    assert rules_at(check(write_csv(tmp_path / "l.csv", rows), basic), "sign") == []


@pytest.fixture
def bounded(tmp_path):
    folder = tmp_path / "bounded"
    shutil.copytree(BASIC_CONTRACT, folder)
    (folder / "bounds.csv").write_text(
        "variable,region,year_from,year_to,low,high\nprice.carbon,,2030,2050,0,1000\npopulation,World,,,1000,\n"
    )
    return load(folder)


def test_out_of_bounds_is_a_warning_with_the_range(tmp_path, bounded, check):
    rows = consistent_rows(bounded)
    i = _at(rows, variable="price.carbon", region="Belmora", year=2050)
    rows[i]["value"] = 1500.0
    j = _at(rows, variable="price.carbon", region="Belmora", year=2100)
    rows[j]["value"] = 1500.0  # outside the bound's years: fine
    result = check(write_csv(tmp_path / "b.csv", rows), bounded)
    found = [f for f in rules_at(result, "out-of-bounds") if f.variable == "price.carbon"]
    assert [(f.line, f.severity, f.value, f.expected) for f in found] == [(i + 2, "warning", "1500", "0 … 1000")]
