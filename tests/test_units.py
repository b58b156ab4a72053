"""Units against outside references: IUPAC atomic weights, SI energy, the IEA tonne of oil equivalent."""

from __future__ import annotations

import periodictable
import pytest

from milepost.schema.units import CO2_PER_C, N2O_PER_N, Deflator, LazyUnits, UnitError, Units, normalise, scale_factor


@pytest.fixture(scope="module")
def units():
    return Units()


@pytest.fixture(scope="module")
def carbon_units():
    return Units(carbon_to_co2=True, shapes=("Mt CO2/yr", "USD_2015/t CO2"))


def test_co2_per_carbon_is_the_iupac_molar_mass_ratio(carbon_units):
    # IUPAC/CIAAW 2021 standard atomic weights via periodictable: C 12.011, CO2 44.009 -> 3.66406.
    ratio = periodictable.formula("CO2").mass / periodictable.C.mass
    assert pytest.approx(ratio, rel=1e-6) == CO2_PER_C
    assert pytest.approx(3.66406, abs=1e-5) == CO2_PER_C
    assert carbon_units.factor("Mt C/yr", "Mt CO2/yr") == pytest.approx(ratio, rel=1e-6)
    assert carbon_units.factor("Gt C/yr", "Mt CO2/yr") == pytest.approx(1000 * ratio, rel=1e-6)
    assert carbon_units.factor("USD_2015/t C", "USD_2015/t CO2") == pytest.approx(1 / ratio, rel=1e-6)


def test_carbon_converts_only_where_the_contract_allows(units):
    with pytest.raises(UnitError):
        units.factor("Mt C/yr", "Mt CO2/yr")


@pytest.fixture(scope="module")
def nitrogen_units():
    return Units(nitrogen_to_n2o=True, shapes=("kt N2O/yr", "Mt CO2/yr"))


def test_n2o_per_nitrogen_is_the_iupac_molar_mass_ratio(nitrogen_units):
    # IUPAC/CIAAW 2021 standard atomic weights via periodictable: N 14.007, O 15.999 -> M(N2O) 44.013, M(N2) 28.014;
    # a mass of N2O-N (the nitrogen in N2O) is a mass of N2O times 28.014/44.013, so kt N2O-N x 1.57111 = kt N2O.
    ratio = periodictable.formula("N2O").mass / periodictable.formula("N2").mass
    assert periodictable.N.mass == pytest.approx(14.007) and periodictable.O.mass == pytest.approx(15.999)
    assert pytest.approx(ratio, rel=1e-9) == N2O_PER_N
    assert pytest.approx(44.013 / 28.014, rel=1e-12) == N2O_PER_N
    assert nitrogen_units.factor("kt N2O-N/yr", "kt N2O/yr") == pytest.approx(ratio, rel=1e-9)
    assert nitrogen_units.factor("Mt N2O-N/yr", "kt N2O/yr") == pytest.approx(1000 * ratio, rel=1e-9)
    assert nitrogen_units.factor("kt N2O/yr", "kt N2O-N/yr") == pytest.approx(1 / ratio, rel=1e-9)
    # the nitrogen option converts nitrogen only: carbon and the other gases stay apart
    assert not nitrogen_units.compatible("Mt C/yr", "Mt CO2/yr")
    assert not nitrogen_units.compatible("kt N2O-N/yr", "Mt CO2/yr")


def test_n2o_nitrogen_converts_only_where_the_contract_allows(units):
    assert not units.compatible("kt N2O-N/yr", "kt N2O/yr")
    both = Units(carbon_to_co2=True, nitrogen_to_n2o=True, shapes=("kt N2O/yr", "Mt CO2/yr"))
    assert both.factor("kt N2O-N/yr", "kt N2O/yr") == pytest.approx(N2O_PER_N)
    assert both.factor("Mt C/yr", "Mt CO2/yr") == pytest.approx(CO2_PER_C)


def test_energy_units(units):
    # SI: 1 Wh = 3600 J, so 1 EJ = 277.78 TWh; IEA: 1 toe = 41.868 GJ (10^7 kcal_IT), so 1 Mtoe = 41.868 PJ.
    assert units.factor("EJ/yr", "TWh/yr") == pytest.approx(1e18 / 3.6e15)
    assert units.factor("Mtoe/yr", "PJ/yr") == pytest.approx(41.868)
    assert units.factor("PJ/yr", "EJ/yr") == pytest.approx(1e-3)


@pytest.mark.parametrize(
    ("a", "b"),
    [
        ("Mt CH4/yr", "Mt CO2/yr"),
        ("Mt CO2/yr", "Mt CO2e/yr"),
        ("kt N2O/yr", "Mt CH4/yr"),
        ("EJ/yr", "Mt CO2/yr"),
        ("billion USD_2010/yr", "billion USD_2015/yr"),
    ],
)
def test_dimensions_that_never_convert(units, a, b):
    assert not units.compatible(a, b)


def test_deflator_makes_currency_years_convert():
    from milepost.schema.units import Deflator

    u = Units((Deflator("USD_2010", "USD_2015", 1.08),))
    assert u.factor("billion USD_2010/yr", "billion USD_2015/yr") == pytest.approx(1.08)


@pytest.mark.parametrize(
    ("raw", "norm"),
    [
        ("MtCO2/yr", "Mt CO2/yr"),
        ("Mt CO2 / yr", "Mt CO2/yr"),
        ("GtCO2e/yr", "Gt CO2e/yr"),
        ("Mt CO2-equiv/yr", "Mt CO2e/yr"),
        ("US$2015/t CO2", "USD_2015/t CO2"),
        ("kt N2O/year", "kt N2O/yr"),
        ("kt N2O-N/yr", "kt N2O_N/yr"),
        ("ktN2O-N/yr", "kt N2O_N/yr"),
    ],
)
def test_common_spellings_normalise(units, raw, norm):
    assert normalise(raw) == norm
    assert units.factor(raw, norm) == pytest.approx(1.0)


def test_scale_prefixes(units):
    assert units.factor("Gt CO2/yr", "Mt CO2/yr") == pytest.approx(1000)
    assert units.factor("kt CH4/yr", "Mt CH4/yr") == pytest.approx(1e-3)
    assert units.factor("billion USD_2015/yr", "USD_2015/yr") == pytest.approx(1e9)


def test_unknown_unit_is_a_unit_error(units):
    with pytest.raises(UnitError):
        units.parse("Mt BC/yr")


@pytest.mark.parametrize("gas", ["CO2", "CH4", "N2O", "CO2e"])
@pytest.mark.parametrize("source", ["t", "kt", "Mt", "Gt"])
@pytest.mark.parametrize("target", ["kt", "Mt"])
def test_tonne_prefix_shortcut_agrees_with_pint(units, gas, source, target):
    # The check converts tonne prefixes without pint; pint's own conversion is the reference.
    s, t = f"{source} {gas}/yr", f"{target} {gas}/yr"
    assert scale_factor(s, t) == pytest.approx(units._factor(s, t, ()), rel=1e-12)


def test_teratonnes_are_si_prefixed_tonnes(units):
    # SI Brochure (BIPM, 9th edition, table 7): T = 1e12, so Tt = 1e12 t = 1e3 Gt. pint alone reads `Tt` as tex
    # (g/km); the registry defines it as teratonnes, so the contract lint (pint) and the check (the shortcut) agree.
    assert units.factor("Tt CO2/yr", "Gt CO2/yr") == pytest.approx(1e3)
    assert units._factor("Tt CO2/yr", "Gt CO2/yr", ()) == pytest.approx(1e3)
    assert units.parse("Tt CO2/yr").dimensionality == units.parse("Mt CO2/yr").dimensionality
    assert units.parse("tex").dimensionality == units.parse("g/km").dimensionality  # tex keeps its own name


def test_an_option_that_is_off_is_asked_without_turning_it_on(units):
    # The hint "set carbon_to_co2 = true" asks the same registry under the option; the option stays off for factor().
    shaped = Units(shapes=("Mt CO2/yr",))
    assert shaped.factor_if("carbon_to_co2", "Mt C/yr", "Mt CO2/yr") == pytest.approx(CO2_PER_C, rel=1e-9)
    with pytest.raises(UnitError):
        shaped.factor("Mt C/yr", "Mt CO2/yr")
    with pytest.raises(UnitError):
        shaped.factor_if("nitrogen_to_n2o", "Mt C/yr", "Mt CO2/yr")


def test_a_registry_warmed_in_the_background_is_the_one_used_and_its_failure_reaches_the_caller():
    # The check starts building pint's registry in a thread while DuckDB works; the caller's first use waits for
    # that one registry, and a registry that cannot be built raises there, not silently in the thread.
    lazy = LazyUnits()
    lazy.warm_in_background()
    assert lazy.factor("Mt CH4/yr", "kt CH4/yr") == pytest.approx(1e3)
    assert lazy.factor("EJ/yr", "PJ/yr") == pytest.approx(1e3)  # pint's SI prefixes
    assert lazy._units is lazy._built()
    broken = LazyUnits(deflators=(Deflator("USD_2010", "1/0 ((", 1.0),))
    broken.warm_in_background()
    with pytest.raises(TypeError):  # what pint 0.25 raises for a definition it cannot parse
        broken.factor("EJ/yr", "PJ/yr")
