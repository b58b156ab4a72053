"""Units family: wrong-unit and converted-unit (values converted with the factor given)."""

from __future__ import annotations

import pytest

from builders import consistent_rows, write_csv
from conftest import rules_at


def _one(rows, variable):
    return next(i for i, r in enumerate(rows) if r["variable"] == variable and r["region"] == "World")


def test_wrong_unit_names_the_contract_unit(tmp_path, basic, check):
    rows = consistent_rows(basic)
    i = _one(rows, "emissions.ch4")
    rows[i]["unit"] = "EJ/yr"
    result = check(write_csv(tmp_path / "w.csv", rows), basic)
    (f,) = rules_at(result, "wrong-unit")
    assert (f.line, f.value, f.expected) == (i + 2, "EJ/yr", "Mt CH4/yr")


def test_species_never_convert_into_each_other(tmp_path, basic, check):
    rows = consistent_rows(basic)
    i = _one(rows, "emissions.ch4")
    rows[i]["unit"] = "Mt CO2/yr"
    (f,) = rules_at(check(write_csv(tmp_path / "s.csv", rows), basic), "wrong-unit")
    assert f.line == i + 2


def test_converted_unit_converts_the_value(tmp_path, basic, check):
    rows = consistent_rows(basic)
    idx = [i for i, r in enumerate(rows) if r["variable"] == "emissions.co2.land"]
    for i in idx:
        rows[i]["unit"], rows[i]["value"] = "Gt CO2/yr", rows[i]["value"] / 1000
    result = check(write_csv(tmp_path / "c.csv", rows), basic)
    (f,) = rules_at(result, "converted-unit")
    assert (f.severity, f.line, f.value, f.expected) == ("warning", idx[0] + 2, "Gt CO2/yr", "Mt CO2/yr")
    assert "factor 1000" in f.message and f"{len(idx)} rows" in f.message
    # Converted values add up again: no sum finding.
    assert rules_at(result, "sum-of-parts") == [] and result.counts["error"] == 0


@pytest.mark.parametrize("spelling", ["MtCO2/yr", "Mt CO2 / yr", "Mt CO2/year"])
def test_spelling_is_a_note(tmp_path, basic, check, spelling):
    rows = consistent_rows(basic)
    i = _one(rows, "emissions.co2.land")
    rows[i]["unit"] = spelling
    (f,) = rules_at(check(write_csv(tmp_path / "n.csv", rows), basic), "converted-unit")
    assert (f.severity, f.line) == ("note", i + 2)
    assert "read as Mt CO2/yr" in f.message


def test_currency_year_does_not_convert_without_deflator(tmp_path, basic, check):
    rows = consistent_rows(basic)
    i = _one(rows, "gdp.mer")
    rows[i]["unit"] = "billion USD_2010/yr"
    (f,) = rules_at(check(write_csv(tmp_path / "d.csv", rows), basic), "wrong-unit")
    assert f.expected == "billion USD_2015/yr"


def test_n2o_nitrogen_converts_where_the_contract_allows_it(tmp_path, basic, check):
    from milepost.schema.contract import load
    from milepost.schema.units import N2O_PER_N

    from conftest import BASIC_CONTRACT

    rows = consistent_rows(basic)
    idx = [i for i, r in enumerate(rows) if r["variable"] == "emissions.n2o"]
    for i in idx:
        rows[i]["unit"], rows[i]["value"] = "kt N2O-N/yr", rows[i]["value"] / N2O_PER_N
    path = write_csv(tmp_path / "n.csv", rows)
    # without the option the nitrogen mass is a different quantity: wrong-unit on every such row
    refused = check(path, basic)
    assert len(rules_at(refused, "wrong-unit")) == len(idx)
    # the hint names the contract option that would accept it
    assert rules_at(refused, "wrong-unit")[0].hint == (
        "Report emissions.n2o in kt N2O/yr; or, for the contract to accept it, set `nitrogen_to_n2o = true` under "
        "[units] in contract.toml (converts the nitrogen in N2O (N2O-N) into N2O)."
    )
    folder = tmp_path / "contract"
    folder.mkdir()
    (folder / "contract.toml").write_text(
        f'name = "with-n2o-n"\nextends = "{BASIC_CONTRACT}"\n\n[units]\nnitrogen_to_n2o = true\n', encoding="utf-8"
    )
    allowed = load(folder)
    assert allowed.nitrogen_to_n2o and allowed.to_dict()["units"]["nitrogen_to_n2o"] is True
    result = check(path, allowed)
    (f,) = rules_at(result, "converted-unit")
    assert (f.severity, f.value, f.expected) == ("warning", "kt N2O-N/yr", "kt N2O/yr")
    assert "factor 1.57111" in f.message  # 44.013/28.014, IUPAC standard atomic weights (see test_units)
    # converted back into kt N2O, the values add up into emissions.ghg again
    assert result.counts["error"] == 0


def test_carbon_mass_is_refused_with_a_hint_at_the_option_that_allows_it(tmp_path, basic, check):
    rows = consistent_rows(basic)
    i = next(i for i, r in enumerate(rows) if r["variable"] == "emissions.co2")
    j = next(k for k, r in enumerate(rows) if r["variable"] == "emissions.co2" and k != i)
    rows[i]["unit"] = "Mt C/yr"
    rows[j]["unit"] = "EJ/yr"  # another quantity altogether: no option makes it convert
    found = {f.line: f for f in rules_at(check(write_csv(tmp_path / "c.csv", rows), basic), "wrong-unit")}
    assert "set `carbon_to_co2 = true` under [units] in contract.toml" in found[i + 2].hint
    assert found[j + 2].hint == "Report emissions.co2 in Mt CO2/yr."
