"""Reference family: base-year-deviation against the contract's reference values."""

from __future__ import annotations

import pytest

from milepost.schema.contract import load

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT, rules_at

CORE = (BASIC_CONTRACT.parents[2] / "schema" / "core").as_posix()


@pytest.fixture
def with_reference(tmp_path, basic):
    rows = consistent_rows(basic)
    co2 = next(r for r in rows if r["variable"] == "emissions.co2" and r["region"] == "World" and r["year"] == 2020)
    folder = tmp_path / "ref"
    folder.mkdir()
    (folder / "contract.toml").write_text(f'name = "ref"\nextends = "{BASIC_CONTRACT.as_posix()}"\n')
    # Reference given in Gt CO2/yr: the checker converts it into the contract unit (Mt CO2/yr) first.
    (folder / "reference.csv").write_text(
        f"region,variable,unit,year,value\nWorld,emissions.co2,Gt CO2/yr,2020,{co2['value'] / 1000 * 1.25}\n"
    )
    return load(folder), rows, co2


def test_base_year_deviation_gives_reference_and_percent(tmp_path, with_reference, check):
    contract, rows, co2 = with_reference
    (f,) = rules_at(check(write_csv(tmp_path / "b.csv", rows), contract), "base-year-deviation")
    assert f.line == rows.index(co2) + 2
    assert float(f.expected) == pytest.approx(co2["value"] * 1.25, rel=1e-5)
    assert "-20.0 %" in f.message  # value / reference - 1 = 1 / 1.25 - 1


def test_within_tolerance_passes(tmp_path, with_reference, check):
    contract, rows, co2 = with_reference
    co2["value"] *= 1.2  # now 4 % below the reference: inside ±10 % (a sum finding may follow; not this rule)
    assert rules_at(check(write_csv(tmp_path / "w.csv", rows), contract), "base-year-deviation") == []
