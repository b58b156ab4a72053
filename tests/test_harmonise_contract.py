"""The contract's harmonisation settings: loading, which variables get which method, and contract lint."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from milepost.schema.contract import ContractError, load
from milepost.validate.contract_lint import lint
from milepost.validate.errors import UsageError
from milepost.validate.harmonise import choices

HEAD = 'name = "h"\n[years]\nfirst = 2010\nlast = 2100\nbase = 2020\nmilestones = [2030]\n'
VARIABLES = (
    '["emissions.a"]\nunit = "Mt CO2/yr"\n'
    '["emissions.b"]\nunit = "Mt CO2/yr"\nharmonise = "offset"\n'
    '["emissions.c"]\nunit = "Mt CO2/yr"\nharmonise = "none"\n'
    '["emissions.d"]\nunit = "Mt CO2/yr"\nconverge_year = 2070\n'
    '["energy.x"]\nunit = "EJ/yr"\n'
    '["energy.y"]\nunit = "EJ/yr"\nharmonise = "converging-offset"\n'
)


def contract_dir(tmp_path: Path, harmonise: str = "", variables: str = VARIABLES) -> Path:
    (tmp_path / "contract.toml").write_text(HEAD + harmonise)
    (tmp_path / "variables.toml").write_text(variables)
    (tmp_path / "regions.toml").write_text('["World"]\n')
    return tmp_path


def test_core_harmonises_emissions_by_converging_ratio_and_land_by_offset(core):
    got = {c.variable: (c.method, c.converge_year) for c in choices(core)}
    assert set(got) == {v for v in core.variables if v.startswith("emissions.")}
    assert got["emissions.co2"] == ("converging-ratio", 2050)
    assert got["emissions.co2.land"] == ("converging-offset", 2050)


def test_patterns_own_methods_none_and_overrides(tmp_path):
    c = load(contract_dir(tmp_path, '[harmonise]\nvariables = ["emissions.*"]\nconverge_year = 2060\n'))
    got = {x.variable: (x.method, x.converge_year) for x in choices(c)}
    assert got == {
        "emissions.a": ("converging-ratio", 2060),
        "emissions.b": ("offset", 2060),
        "emissions.d": ("converging-ratio", 2070),
        "energy.y": ("converging-offset", 2060),  # an explicit method includes a variable no pattern names
    }
    forced = {x.variable: (x.method, x.converge_year) for x in choices(c, "ratio", 2040)}
    assert set(forced) == set(got)  # the options change how, never which
    assert set(forced.values()) == {("ratio", 2040)}
    assert lint(c) == []


def test_command_line_values_are_refused_when_the_formulas_cannot_use_them(tmp_path):
    c = load(contract_dir(tmp_path))
    with pytest.raises(UsageError, match="must come after the base year 2020"):
        choices(c, "converging-ratio", 2020)
    with pytest.raises(UsageError, match="not one of ratio, offset"):
        choices(c, "average")


def test_lint_reports_unknown_methods_years_and_patterns(tmp_path):
    variables = VARIABLES + '["emissions.e"]\nunit = "Mt CO2/yr"\nharmonise = "scale"\nconverge_year = 2010\n'
    c = load(
        contract_dir(tmp_path, '[harmonise]\nvariables = ["emissions.*", "landuse.*"]\nmethod = "mean"\n', variables)
    )
    messages = sorted(f.message for f in lint(c) if f.rule == "contract-harmonise")
    assert messages == [
        "[harmonise] method 'mean' is not one of ratio, offset, converging-ratio, converging-offset",
        "[harmonise] variables: 'landuse.*' matches no variable",
        "emissions.e: harmonise 'scale' is not one of ratio, offset, converging-ratio, converging-offset, none",
    ]


def test_lint_reports_a_convergence_year_only_where_a_converging_method_uses_it(tmp_path):
    c = load(contract_dir(tmp_path, '[harmonise]\nvariables = ["emissions.a"]\nconverge_year = 2020\n'))
    assert [f.message for f in lint(c)] == ["[harmonise] converge_year 2020 is not after the base year 2020"]
    unused = load(
        contract_dir(tmp_path, "[harmonise]\nvariables = []\nconverge_year = 2020\n", '["a"]\nunit = "EJ/yr"\n')
    )
    assert lint(unused) == []


@pytest.mark.parametrize(
    ("harmonise", "message"),
    [
        ("[harmonise]\nvariables = 'emissions.*'\n", "variables must be a list"),
        ("[harmonise]\nconverge_year = 2050.5\n", "expected a whole year"),
        ("[harmonise]\nmethod = 3\n", "expected a text"),
        ("[harmonise]\nspeed = 1\n", "unknown keys speed"),
    ],
)
def test_wrong_types_are_contract_errors(tmp_path, harmonise, message):
    with pytest.raises(ContractError, match=message):
        load(contract_dir(tmp_path, harmonise))


def test_settings_change_the_contract_hash(tmp_path):
    before = load(contract_dir(tmp_path)).hash
    after = load(contract_dir(tmp_path, '[harmonise]\nmethod = "offset"\n')).hash
    assert before != after


@pytest.mark.parametrize("bad", ["true", "2050.5", '"2050"'])
@pytest.mark.parametrize(
    ("harmonise", "variable", "where"),
    [
        ("[harmonise]\nconverge_year = {}\n", "", "[harmonise] converge_year"),
        ("[allocation]\nconvergence_year = {}\n", "", "[allocation] convergence_year"),
        ("", "converge_year = {}\n", "[emissions.z] converge_year"),
    ],
)
def test_every_year_setting_takes_only_a_whole_year(tmp_path, bad, harmonise, variable, where):
    variables = VARIABLES + '["emissions.z"]\nunit = "Mt CO2/yr"\n' + variable.format(bad)
    with pytest.raises(ContractError, match=rf"{re.escape(where)}: expected a whole year, got "):
        load(contract_dir(tmp_path, harmonise.format(bad), variables))


def test_year_settings_left_out_take_their_defaults(tmp_path):
    c = load(contract_dir(tmp_path))
    assert (c.harmonise.converge_year, c.allocation.convergence_year) == (2050, 2050)
    assert c.variables["emissions.a"].converge_year is None and c.variables["emissions.d"].converge_year == 2070
