"""The contract: loading and extends, the JSON shape, GWP100 and ISO 3166 against reference packages, lint."""

from __future__ import annotations

import json
import shutil

import globalwarmingpotentials as gwp
import pycountry
import pytest

from milepost.schema.contract import CORE_DIR, ContractError, iso3_codes, load
from milepost.validate.contract_lint import lint

from conftest import BASIC_CONTRACT, DEMO_CONTRACT
from published import AR6_CH4_FOSSIL, AR6_CH4_NON_FOSSIL, GWP100


def test_core_has_the_agreed_variables(core):
    expected = {
        "emissions.ghg": "Mt CO2e/yr",
        "emissions.co2": "Mt CO2/yr",
        "emissions.co2.fossil": "Mt CO2/yr",
        "emissions.co2.land": "Mt CO2/yr",
        "emissions.ch4": "Mt CH4/yr",
        "emissions.n2o": "kt N2O/yr",
        "energy.primary": "EJ/yr",
        "energy.final": "EJ/yr",
        "population": "million",
        "gdp.ppp": "billion USD_2015/yr",
        "gdp.mer": "billion USD_2015/yr",
        "consumption": "billion USD_2015/yr",
        "price.carbon": "USD_2015/t CO2",
        "cost.abatement": "billion USD_2015/yr",
        "trade.permits": "Mt CO2e/yr",
        "emissions.fgases": "Mt CO2e/yr",
        "energy.final.other": "EJ/yr",
    }
    assert {k: core.variables[k].unit for k in expected} == expected
    assert core.variables["price.carbon"].regions == "none"
    assert core.variables["trade.permits"].regions == "zero"
    assert [p.variable for p in core.variables["energy.final"].parts] == [
        "energy.final.industry",
        "energy.final.transport",
        "energy.final.buildings",
        "energy.final.other",
    ]
    ghg = {p.variable: p for p in core.variables["emissions.ghg"].parts}
    assert ghg["emissions.fgases"].factor == 1.0 and ghg["emissions.fgases"].gwp is None
    assert core.variables["emissions.fgases"].sign == "non-negative"
    assert "F-gases" in core.variables["emissions.ghg"].description


@pytest.mark.parametrize("metric", sorted(GWP100))
def test_gwp_factors_are_the_published_ones(tmp_path, metric):
    # The published GWP100 of each set (tests/published.py gives the tables and their sources). CH4 in Mt and N2O in
    # kt against a Mt CO2e total: factors GWP and GWP/1000.
    folder = tmp_path / metric
    folder.mkdir()
    (folder / "contract.toml").write_text(f'name = "g"\nextends = "core"\ngwp = "{metric}"\n')
    parts = {p.variable: p.factor for p in load(folder).variables["emissions.ghg"].parts}
    assert parts["emissions.co2"] == 1.0
    assert parts["emissions.ch4"] == pytest.approx(GWP100[metric]["CH4"])
    assert parts["emissions.n2o"] == pytest.approx(GWP100[metric]["N2O"] / 1000)


@pytest.mark.parametrize("metric", sorted(GWP100))
def test_the_gwp_package_the_contract_reads_holds_the_published_tables(metric):
    # globalwarmingpotentials is where the contract takes its factors from; check it against the tables themselves.
    assert {gas: gwp.data[metric][gas] for gas in GWP100[metric]} == GWP100[metric]


def test_ar6_values_are_the_ones_published(core):
    # IPCC AR6 WGI Ch. 7 Table 7.SM.7: CH4 27.9, N2O 273. Table 7.15's CH4 by origin (fossil 29.8, non-fossil 27.0)
    # brackets the one CH4 factor a contract carries.
    assert core.gwp == {"CO2": 1.0, "CH4": GWP100["AR6GWP100"]["CH4"], "N2O": GWP100["AR6GWP100"]["N2O"]}
    assert AR6_CH4_NON_FOSSIL < core.gwp["CH4"] < AR6_CH4_FOSSIL


def test_unknown_gwp_set_is_a_contract_error(tmp_path):
    (tmp_path / "contract.toml").write_text('name = "x"\nextends = "core"\ngwp = "AR9GWP100"\n')
    with pytest.raises(ContractError, match="AR9GWP100"):
        load(tmp_path)


def test_unknown_unit_option_is_a_contract_error(tmp_path):
    # a misspelt option would otherwise be ignored silently, and values in kt N2O-N refused without a reason
    (tmp_path / "contract.toml").write_text('name = "x"\nextends = "core"\n[units]\nnitrogen_to_N2O = true\n')
    with pytest.raises(ContractError, match=r"nitrogen_to_N2O.*known: carbon_to_co2, nitrogen_to_n2o"):
        load(tmp_path)


def test_iso_codes_match_pycountry():
    codes = iso3_codes()
    assert len(codes) == len(pycountry.countries) == 249  # ISO 3166-1 entries in pycountry 26.2.16
    assert {"DEU", "BRA", "IND"} <= codes
    assert pycountry.countries.get(alpha_3="XKX") is None and "XKX" not in codes  # Kosovo has no ISO code


def test_extends_resolves_and_hash_is_stable(demo_contract):
    again = load(DEMO_CONTRACT)
    assert again.hash == demo_contract.hash and len(again.hash) == 64
    assert demo_contract.sources[0] == str(CORE_DIR.resolve())
    assert demo_contract.regions["World"].parts == ("Ardena", "Belmora", "Cendral", "Dovania", "Estrel")
    assert set(demo_contract.variables) == set(load().variables)


def test_hash_changes_with_content(tmp_path):
    shutil.copytree(BASIC_CONTRACT, tmp_path / "c")
    before = load(tmp_path / "c").hash
    p = tmp_path / "c" / "contract.toml"
    p.write_text(p.read_text().replace("2100]", "2090]"))
    assert load(tmp_path / "c").hash != before


def test_show_json_shape(demo_contract):
    d = json.loads(json.dumps(demo_contract.to_dict()))
    assert {"name", "hash", "base_year", "milestones", "years", "variables", "regions", "tolerance"} <= set(d)
    assert d["years"] == {"first": 2010, "last": 2100}
    v = next(v for v in d["variables"] if v["name"] == "emissions.co2")
    assert set(v) >= {"name", "unit", "required", "sign", "regions", "parts"}
    assert v["parts"] == [
        {"variable": "emissions.co2.fossil", "factor": 1.0, "gwp": None},
        {"variable": "emissions.co2.land", "factor": 1.0, "gwp": None},
    ]


def test_shipped_contracts_lint_clean(core, demo_contract):
    assert lint(core) == []
    assert lint(demo_contract) == []


def _broken(tmp_path, variables: str, regions: str = "", reference: str | None = None):
    (tmp_path / "contract.toml").write_text(
        'name = "broken"\n[years]\nfirst = 2010\nlast = 2100\nbase = 2020\nmilestones = [2030]\n'
    )
    (tmp_path / "variables.toml").write_text(variables)
    (tmp_path / "regions.toml").write_text(regions or '["World"]\n')
    if reference is not None:
        (tmp_path / "reference.csv").write_text(reference)
    return {f.rule for f in lint(load(tmp_path))}, lint(load(tmp_path))


def test_lint_finds_a_cycle(tmp_path):
    rules, found = _broken(
        tmp_path, '["a.x"]\nunit = "EJ/yr"\nparts = ["a.y"]\n["a.y"]\nunit = "EJ/yr"\nparts = ["a.x"]\n'
    )
    assert "contract-cycle" in rules
    assert any("a.x -> a.y -> a.x" in f.message for f in found)


def test_lint_finds_part_units_that_do_not_match(tmp_path):
    rules, _ = _broken(tmp_path, '["a"]\nunit = "EJ/yr"\nparts = ["a.b"]\n["a.b"]\nunit = "Mt CO2/yr"\n')
    assert rules == {"contract-unit"}


def test_lint_finds_unknown_units_names_and_parts(tmp_path):
    rules, _ = _broken(tmp_path, '["a"]\nunit = "furlongs of CO2"\n["B.c"]\nunit = "EJ/yr"\nparts = ["nope"]\n')
    assert rules == {"contract-unit", "contract-name", "contract-part"}


def test_lint_finds_bad_references(tmp_path):
    rules, found = _broken(
        tmp_path,
        '["a"]\nunit = "EJ/yr"\n',
        reference="region,variable,unit,year,value\n"
        "World,a,Mt CO2/yr,2020,1\nMars,a,EJ/yr,2020,1\nWorld,zz,EJ/yr,2020,1\n",
    )
    assert rules == {"contract-reference"}
    assert len(found) == 3


def test_broken_toml_is_a_contract_error(tmp_path):
    (tmp_path / "contract.toml").write_text("name = \n")
    with pytest.raises(ContractError, match="not valid TOML"):
        load(tmp_path)


def test_lint_once_remembers_only_a_passing_contract(tmp_path, monkeypatch, basic):
    from milepost.validate.contract_lint import lint_once

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    assert lint_once(basic) == []
    assert len(list((tmp_path / "cache" / "milepost").iterdir())) == 1
    (tmp_path / "bad").mkdir()
    (tmp_path / "bad" / "contract.toml").write_text('name = "bad"\nextends = "core"\n')
    (tmp_path / "bad" / "variables.toml").write_text('["population"]\nunit = "blorbs"\n')
    bad = load(tmp_path / "bad")
    assert [f.rule for f in lint_once(bad)] == ["contract-unit"]
    assert [f.rule for f in lint_once(bad)] == ["contract-unit"]  # failures are looked at again every time
    assert len(list((tmp_path / "cache" / "milepost").iterdir())) == 1


def _budget_contract(tmp_path, budgets: str):
    (tmp_path / "contract.toml").write_text(f'name = "b"\nextends = "core"\n{budgets}', encoding="utf-8")
    return lint(load(tmp_path))


def test_budgets_and_pairs_in_the_json_shape(demo_contract):
    d = json.loads(json.dumps(demo_contract.to_dict()))
    assert d["budgets"]["levels"] == [1.5, 1.7, 2.0] and d["budgets"]["likelihoods"] == [17, 33, 50, 67, 83]
    assert d["pairs"] == {"match": ["ambition"], "order": "policy_start"}
    assert load().pairs is None


@pytest.mark.parametrize(
    ("budgets", "message"),
    [
        ("[budgets]\nfrom_year = 2015\n", "1 January 2015"),
        ('[budgets]\nregion = "Mars"\n', "'Mars'"),
        ('[budgets.remaining]\n"1.5" = [900, 650, 500, 400, 300]\n"2.0" = [800, 1700, 1350, 1150, 900]\n', "rise"),
        ('[budgets.remaining]\n"1.5" = [900, 650, 500, 400]\n', "4 budgets for 5 likelihoods"),
        ('[budgets.remaining]\n"1.5" = [300, 400, 500, 650, 900]\n', "grow with the likelihood"),
        ("[budgets]\ntcre = 0.9\n", "likely range"),
        ("[budgets]\nlikelihoods = [83, 67, 50, 33, 17]\n", "rise strictly"),
    ],
)
def test_lint_finds_inconsistent_budgets(tmp_path, budgets, message):
    found = _budget_contract(tmp_path, budgets)
    assert [f.rule for f in found] and {f.rule for f in found} == {"contract-budget"}
    assert any(message in f.message for f in found), [f.message for f in found]


def test_bad_budget_and_pairs_shapes_are_contract_errors(tmp_path):
    for text, match in (
        ('[budgets.remaining]\n"warm" = [1, 2, 3, 4, 5]\n', "not a warming level"),
        ("[budgets]\nspeed = 3\n", "unknown keys speed"),
        ('[pairs]\nmatch = ["ambition"]\n', "needs `order`"),
        ('[pairs]\nmatch = "ambition"\norder = "start"\n', "list of scenario attribute"),
    ):
        (tmp_path / "contract.toml").write_text(f'name = "b"\nextends = "core"\n{text}', encoding="utf-8")
        with pytest.raises(ContractError, match=match):
            load(tmp_path)


def test_allocation_defaults_and_the_demo_convergence_year(demo_contract):
    assert load().allocation.convergence_year == 2050 and load().allocation.region == "World"
    assert demo_contract.allocation.convergence_year == 2060
    assert json.loads(json.dumps(demo_contract.to_dict()))["allocation"] == {
        "convergence_year": 2060,
        "region": "World",
    }


@pytest.mark.parametrize(
    ("allocation", "message"),
    [
        ("[allocation]\nconvergence_year = 2020\n", "after the base year"),
        ('[allocation]\nregion = "Mars"\n', "'Mars' is not a region"),
    ],
)
def test_lint_finds_unusable_allocation_settings(tmp_path, allocation, message):
    found = _budget_contract(tmp_path, allocation)
    assert {f.rule for f in found} == {"contract-allocation"}
    assert any(message in f.message for f in found), [f.message for f in found]


def test_bad_allocation_shapes_are_contract_errors(tmp_path):
    for text, match in (
        ("[allocation]\nconvergence_year = 2050.5\n", "whole year"),
        ("[allocation]\nshare = 3\n", "unknown keys share"),
    ):
        (tmp_path / "contract.toml").write_text(f'name = "b"\nextends = "core"\n{text}', encoding="utf-8")
        with pytest.raises(ContractError, match=match):
            load(tmp_path)


def test_lint_warns_when_the_allocation_market_has_no_parts(tmp_path, core, demo_contract):
    from typer.testing import CliRunner

    from milepost.example_db.generate import CONTRACT_DIR
    from milepost.validate.cli import app
    from milepost.validate.contract_lint import advice

    assert advice(demo_contract) == []  # World is the sum of five regions: they trade
    assert [f.rule for f in advice(core)] == ["allocation-no-parts"]  # core's World has no parts
    # a market named on a region without parts: no burden rows would be computed; said, and the lint passes
    folder = tmp_path / "c"
    shutil.copytree(CONTRACT_DIR, folder)
    toml = folder / "contract.toml"
    text = toml.read_text(encoding="utf-8")
    toml.write_text(text.replace("[allocation]\n", '[allocation]\nregion = "Ardena"\n', 1), encoding="utf-8")
    found = advice(load(folder))
    assert [(f.rule, f.severity) for f in found] == [("allocation-no-parts", "warning")]
    assert "'Ardena' has no parts" in found[0].message
    assert lint(load(folder)) == []  # a warning, never an error that stops ingest
    r = CliRunner().invoke(app, ["contract", "lint", str(folder)])
    assert r.exit_code == 0, r.output
    assert "warning allocation-no-parts: [allocation] region 'Ardena' has no parts" in r.stdout
    assert "PASSED" in r.stdout
