"""Names family: unknown-region and unknown-variable, with did-you-mean hints."""

from __future__ import annotations

import pytest

from milepost.validate.checks.names import suggest

from builders import consistent_rows, write_csv
from conftest import rules_at


@pytest.mark.parametrize(
    ("bad", "hint"),
    [
        ("emisions.co2", "emissions.co2"),
        ("Emissions.CO2", "emissions.co2"),
        ("energy_primary_coal", "energy.primary.coal"),
    ],
)
def test_unknown_variable_with_hint(tmp_path, basic, check, bad, hint):
    rows = consistent_rows(basic)
    rows[20]["variable"] = bad
    (f,) = rules_at(check(write_csv(tmp_path / "v.csv", rows), basic), "unknown-variable")
    assert (f.line, f.value, f.expected) == (22, bad, hint)
    assert f.hint == f"Did you mean {hint}?"


def test_unknown_variable_without_close_match(tmp_path, basic, check):
    rows = consistent_rows(basic)
    rows[1]["variable"] = "zzz.qqq"
    (f,) = rules_at(check(write_csv(tmp_path / "v.csv", rows), basic), "unknown-variable")
    assert f.line == 3 and "contract show" in f.hint


@pytest.mark.parametrize(("bad", "hint"), [("Ardenna", "Ardena"), ("world", "World"), ("Belmora ", "Belmora")])
def test_unknown_region_with_hint(tmp_path, basic, check, bad, hint):
    rows = consistent_rows(basic)
    i = next(i for i, r in enumerate(rows) if r["region"] == hint.strip())
    rows[i]["region"] = bad
    found = rules_at(check(write_csv(tmp_path / "r.csv", rows), basic), "unknown-region")
    assert [(f.line, f.value) for f in found] == [(i + 2, bad)]
    assert found[0].hint == f"Did you mean {hint}?"


def test_iso_codes_are_regions_only_where_the_contract_allows(tmp_path, basic, core, check):
    rows = [r for r in consistent_rows(core) if r["variable"] == "population"]
    rows.append(dict(rows[0], region="FRA"))
    assert rules_at(check(write_csv(tmp_path / "a.csv", rows), core), "unknown-region") == []
    found = rules_at(check(write_csv(tmp_path / "b.csv", rows), basic), "unknown-region")
    assert [f.value for f in found] == ["FRA"]


def test_suggest_prefers_case_and_separator_fixes():
    assert suggest("GDP.PPP", ["gdp.ppp", "gdp.mer"]) == "gdp.ppp"
    assert suggest("popultion", ["population", "price.carbon"]) == "population"
    assert suggest("xyz", ["population"]) is None


def test_country_groups_sum_their_iso_codes(tmp_path, check):
    # A region made of ISO 3166-1 alpha-3 codes (pycountry knows NOR and SWE) accepts exactly those codes.
    from milepost.schema.contract import load
    from milepost.validate.contract_lint import lint

    folder = tmp_path / "groups"
    folder.mkdir()
    (folder / "contract.toml").write_text('name = "groups"\nextends = "core"\n')
    (folder / "regions.toml").write_text(
        'countries = false\n["World"]\nparts = ["Northland"]\n["Northland"]\nparts = ["NOR", "SWE"]\n'
    )
    contract = load(folder)
    assert lint(contract) == []
    rows = consistent_rows(contract)
    assert {r["region"] for r in rows} == {"World", "Northland", "NOR", "SWE"}
    assert check(write_csv(tmp_path / "ok.csv", rows), contract).findings == []
    bad = [dict(r, region="FIN") if r["region"] == "SWE" else r for r in rows]
    found = rules_at(check(write_csv(tmp_path / "bad.csv", bad), contract), "unknown-region")
    assert {f.value for f in found} == {"FIN"}


def test_several_unknown_names_each_get_their_own_hint(tmp_path, basic, check):
    # the hints are set in one statement for all names: each must land on its own name, quotes included
    bad = {"emisions.co2": "emissions.co2", "Energy_Primary_Coal": "energy.primary.coal", "populat'ion": "population"}
    rows = consistent_rows(basic)
    for i, name in zip((3, 9, 27), bad, strict=True):
        rows[i]["variable"] = name
    rows[40]["variable"] = "zzz.qqq"
    found = rules_at(check(write_csv(tmp_path / "v.csv", rows), basic), "unknown-variable")
    assert {f.value: f.expected for f in found} == bad | {"zzz.qqq": "a contract variable"}
    assert all(f.hint == f"Did you mean {bad[f.value]}?" for f in found if f.value in bad)
