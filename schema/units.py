"""Units of the contract: a pint registry where gas species and currency years are dimensions of their own.

Mt CO2 and Mt CH4 never convert into each other, CO2e is its own dimension (gases become CO2e only through
GWP factors in a variable's parts), carbon converts to CO2 only in the `carbon_to_co2` context, the nitrogen of
nitrous oxide (`kt N2O-N`) to N2O only in the `nitrogen_to_n2o` context, and currencies convert across price
years only through deflators the contract gives.
"""

from __future__ import annotations

import contextlib
import functools
import re
import threading
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from milepost.validate.errors import UnitError as UnitError  # re-exported: raised here, imported from here

# IUPAC/CIAAW 2021 abridged standard atomic weights: C 12.011, N 14.007, O 15.999 -> M(CO2) = 44.009,
# M(N2O) = 44.013, M(N2) = 28.014.
ATOMIC_WEIGHT_C = 12.011
ATOMIC_WEIGHT_N = 14.007
ATOMIC_WEIGHT_O = 15.999
MOLAR_MASS_CO2 = 44.009
CO2_PER_C = MOLAR_MASS_CO2 / ATOMIC_WEIGHT_C
MOLAR_MASS_N2O = 2 * ATOMIC_WEIGHT_N + ATOMIC_WEIGHT_O
N2O_PER_N = MOLAR_MASS_N2O / (2 * ATOMIC_WEIGHT_N)  # 44.013 / 28.014: the mass of N2O per mass of its nitrogen

SPECIES = {
    "CO2e": "carbon_dioxide_equivalent",
    "CO2": "carbon_dioxide",
    "CH4": "methane",
    "N2O": "nitrous_oxide",
    "N2O_N": "nitrous_oxide_nitrogen",
    "C": "carbon",
}
CARBON_CONTEXT = "carbon_to_co2"
NITROGEN_CONTEXT = "nitrogen_to_n2o"

_CURRENCY = re.compile(r"(?:US\$|USD)[ _]?((?:19|20)\d\d)")
_CO2E = re.compile(r"CO2[-_ ]?(?:equiv(?:alent)?|eq|e)\b", re.IGNORECASE)
_N2O_N = re.compile(r"\bN2O[-_]N\b")
_MASS_SPECIES = re.compile(r"\b([kMGT]?t)(CO2e|CO2|CH4|N2O_N|N2O|C)\b")
_PER_YEAR = re.compile(r"/\s*(?:year|a)\b")


def normalise(unit: str) -> str:
    """Rewrite common spellings into the contract's own: `MtCO2/yr` -> `Mt CO2/yr`, `US$2015` -> `USD_2015`,
    `kt N2O-N/yr` -> `kt N2O_N/yr`."""
    s = " ".join(str(unit).split())
    s = _CURRENCY.sub(lambda m: f"USD_{m.group(1)}", s)
    s = _CO2E.sub("CO2e", s)
    s = _MASS_SPECIES.sub(r"\1 \2", s)
    s = _N2O_N.sub("N2O_N", s)  # "N2O-N" would read as N2O minus N
    s = _PER_YEAR.sub("/yr", s)
    s = re.sub(r"\s*/\s*", "/", s)
    return s


def _group_denominators(s: str) -> str:
    # pint binds "USD_2015/t CO2" as USD_2015 * CO2 / t; a unit string means everything after "/" is below.
    if "(" in s or "/" not in s:
        return s
    head, *tails = s.split("/")
    return head + "".join(f"/({t.strip()})" for t in tails)


def _currency_years(units: tuple[str, ...]) -> set[str]:
    return {m.group(0) for u in units for m in re.finditer(r"USD_\d{4}", u)}


@dataclass(frozen=True)
class Deflator:
    """`1 source` = `factor` `target`, e.g. 1 USD_2010 = 1.1 USD_2015."""

    source: str
    target: str
    factor: float


class Units:
    """A unit registry for one contract: parsing, compatibility and conversion factors."""

    def __init__(
        self,
        deflators: tuple[Deflator, ...] = (),
        carbon_to_co2: bool = False,
        shapes: tuple[str, ...] = ("Mt CO2/yr", "t CO2", "USD_2015/t CO2", "kt N2O/yr"),
        nitrogen_to_n2o: bool = False,
    ) -> None:
        """`shapes`: units (usually the contract's) whose carbon (or N2O-N) counterparts may convert when
        carbon_to_co2 (or nitrogen_to_n2o) is on."""
        import pint

        self.pint = pint
        self.carbon_to_co2 = carbon_to_co2
        self.nitrogen_to_n2o = nitrogen_to_n2o
        # pint's registry is typed for its own unit graph; ours is built from strings at run time.
        reg: Any = pint.UnitRegistry(on_redefinition="ignore", preprocessors=[_group_denominators], cache_folder=None)
        for symbol, name in SPECIES.items():
            reg.define(f"{name} = [{name}] = {symbol}")
        # pint's `Tt` is tex (g/km), a yarn unit; in emissions it is always teratonnes (tex stays `tex`)
        for definition in (
            "kilotonne = 1e3 * tonne = kt",
            "teratonne = 1e12 * tonne = Tt",
            "billion = 1e9",
            "million = 1e6",
            "thousand = 1e3",
        ):
            reg.define(definition)
        self._currencies: set[str] = set()
        for d in deflators:
            self._ensure_currency(reg, d.target)
            reg.define(f"{d.source} = {d.factor!r} * {d.target}")
            self._currencies.add(d.source)
        self.reg = reg
        # (context, species of the contract unit, species reported instead, mass of the second per mass of the first)
        options = (
            (carbon_to_co2, CARBON_CONTEXT, "carbon_dioxide", "carbon", 1 / CO2_PER_C, "C/CO2"),
            (nitrogen_to_n2o, NITROGEN_CONTEXT, "nitrous_oxide", "nitrous_oxide_nitrogen", 1 / N2O_PER_N, "N2O_N/N2O"),
        )
        self._shapes = shapes
        self._options = {o[1]: o[2:] for o in options}
        self._added: set[str] = set()
        for enabled, name, *_ in options:
            if enabled:
                self._add_context(name)
        self._context: tuple[str, ...] = tuple(o[1] for o in options if o[0])

    def _add_context(self, name: str) -> None:
        if name not in self._added:
            target, other, ratio, ratio_unit = self._options[name]
            quantity = self.reg.Quantity(ratio, ratio_unit)
            self.reg.add_context(self._species_context(name, self._shapes, target, other, quantity))
            self._added.add(name)

    def _species_context(self, name: str, shapes: tuple[str, ...], target: str, other: str, ratio: Any) -> Any:
        """A pint context converting every unit shape in `shapes` that holds species `target` into the same shape
        with species `other`, and back. pint fixes a context's graph when it is added, so every unit shape is given
        its pair up front. `ratio` carries units (e.g. C per CO2) so that the transformed quantity lands in the
        target dimension."""
        ctx = self.pint.Context(name)
        a, b = f"[{target}]", f"[{other}]"
        seen: set[Any] = set()
        for u in shapes:
            self._prepare(u)
            dim: Any = self.reg.parse_units(normalise(u)).dimensionality  # pint's stubs type exponents as Number
            k = int(dim.get(a, 0))
            if k and dim not in seen:
                seen.add(dim)
                src, dst = dim, dim.remove([a]).add(b, k)
                ctx.add_transformation(src, dst, _times(ratio**k))
                ctx.add_transformation(dst, src, _times(1 / ratio**k))
        return ctx

    def _ensure_currency(self, reg: Any, code: str) -> None:
        if code not in self._currencies:
            reg.define(f"{code} = [currency_{code}]")
            self._currencies.add(code)

    def _prepare(self, *units: str) -> None:
        for code in sorted(_currency_years(units)):
            self._ensure_currency(self.reg, code)

    def parse(self, unit: str) -> Any:
        """The pint unit of a (normalised) unit string; raises UnitError if it is unknown or malformed."""
        s = normalise(unit)
        try:
            self._prepare(s)
            return self.reg.parse_units(s)
        except Exception as e:  # pint lets tokenizer and arithmetic errors through (`Mt CO2/(`, `1/0`)
            raise UnitError(f"unknown unit {unit!r}: {type(e).__name__}: {e}") from None

    @functools.lru_cache(maxsize=4096)  # noqa: B019 - one registry per contract, kept for the process
    def factor(self, source: str, target: str) -> float:
        """Multiply values in `source` by this to get `target`; raises UnitError if they do not convert."""
        # Tonne prefixes first, as the check does, without pint.
        quick = scale_factor(source, target)
        return quick if quick is not None else self._factor(source, target, self._context)

    def factor_if(self, option: str, source: str, target: str) -> float:
        """The factor were the contract option `option` (CARBON_CONTEXT or NITROGEN_CONTEXT) on as well; raises
        UnitError if the units do not convert even then."""
        if option not in self._options:
            raise ValueError(f"unknown unit option {option!r}")
        # The option's context joins this registry on first use, inactive unless named: a registry of its own
        # would cost 0.13 s more (measured).
        try:
            self._add_context(option)
        except Exception as e:  # a contract unit pint cannot parse (the contract lint reports it)
            raise UnitError(f"{option}: {type(e).__name__}: {e}") from None
        return self._factor(source, target, tuple(dict.fromkeys((*self._context, option))))

    def _factor(self, source: str, target: str, contexts: tuple[str, ...]) -> float:
        src, dst = self.parse(source), self.parse(target)
        try:
            return float(self.reg.Quantity(1.0, src).to(dst, *contexts).magnitude)
        except self.pint.errors.DimensionalityError:
            raise UnitError(f"{source!r} does not convert to {target!r}") from None
        except (self.pint.errors.PintError, ArithmeticError) as e:
            raise UnitError(f"{source!r} does not convert to {target!r}: {type(e).__name__}: {e}") from None

    def compatible(self, source: str, target: str) -> bool:
        """True if `source` converts into `target` under this contract."""
        try:
            self.factor(source, target)
        except UnitError:
            return False
        return True

    def dimensionality(self, unit: str) -> dict[str, float]:
        """The dimensions of a unit, e.g. {'[carbon_dioxide]': 1, '[mass]': 1, '[time]': -1}."""
        return dict(self.parse(unit).dimensionality)

    def as_co2e(self, unit: str, gas: str) -> str:
        """The unit string with the gas symbol replaced by CO2e: `kt N2O/yr` -> `kt CO2e/yr`."""
        return as_co2e(unit, gas)


def _times(factor: Any) -> Callable[..., Any]:
    """A pint context transformation that multiplies by `factor` (a quantity carrying the units between species)."""

    def transform(ureg: Any, value: Any, **kwargs: Any) -> Any:
        return value * factor

    return transform


def as_co2e(unit: str, gas: str) -> str:
    """The unit string with the gas symbol replaced by CO2e: `kt N2O/yr` -> `kt CO2e/yr`."""
    s = normalise(unit)
    out = re.sub(rf"\b{re.escape(gas)}\b", "CO2e", s)
    if out == s and gas != "CO2e":
        raise UnitError(f"unit {unit!r} does not name the gas {gas}")
    return out


_MASS_PREFIX = {"": 1.0, "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12}
_TONNES = re.compile(r"^([kMGT]?)t (.+)$")


def scale_factor(source: str, target: str) -> float | None:
    """The factor between two spellings that differ at most in the tonne prefix (`kt X/yr` vs `Mt X/yr`), found
    without pint; None when the units differ in any other way (then ask `Units.factor`)."""
    a, b = normalise(source), normalise(target)
    if a == b:
        return 1.0
    ma, mb = _TONNES.match(a), _TONNES.match(b)
    if ma and mb and ma.group(2) == mb.group(2):
        return _MASS_PREFIX[ma.group(1)] / _MASS_PREFIX[mb.group(1)]
    return None


class LazyUnits:
    """A `Units` built on first use: importing pint costs half a second, and a submission reported in the
    contract's own units never needs it. `warm_in_background` starts building it where a caller knows it will be
    needed, so the import overlaps work that does not hold the GIL (DuckDB queries)."""

    def __init__(self, **kwargs: Any) -> None:
        self._kwargs = kwargs
        self._units: Units | None = None
        self._lock = threading.Lock()

    def _built(self) -> Units:
        with self._lock:  # one registry, however many threads ask at once
            if self._units is None:
                self._units = Units(**self._kwargs)
            return self._units

    def warm_in_background(self) -> None:
        """Build the registry in a daemon thread; a failure there is left for the first real use to raise."""
        if self._units is None:
            threading.Thread(target=self._warm, name="pint-registry", daemon=True).start()

    def _warm(self) -> None:
        with contextlib.suppress(Exception):  # the first real use builds it again and raises in its own thread
            self._built()

    def __getattr__(self, name: str) -> Any:
        units = self._units if self._units is not None else self._built()
        return getattr(units, name)
