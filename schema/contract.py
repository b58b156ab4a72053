"""The submission contract: plain TOML/CSV files in a folder, resolved (with `extends`) into one frozen object.

A contract folder holds `contract.toml` (name, years, tolerances, GWP set, units, carbon budgets, how scenarios
pair for delay comparisons), `variables.toml`,
`regions.toml`, and optionally `reference.csv` (base-year reference values) and `bounds.csv` (plausibility
bounds). Only loading and resolving lives here; `milepost.validate.contract_lint` says whether it is sound.
"""

from __future__ import annotations

import csv
import hashlib
import json
import re
import tomllib
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from milepost.schema.limits import Limits
from milepost.validate.errors import ContractError as ContractError  # re-exported: raised here, imported from here

CORE_DIR = Path(__file__).parent / "core"
NAME_PATTERN = re.compile(r"^[a-z0-9_]+(\.[a-z0-9_]+)*$")
SIGNS = ("any", "non-negative")
AGGREGATIONS = ("sum", "none", "zero")
# Base-year harmonisation methods (published; usual names). A variable may also say "none": never harmonised.
HARMONISE_METHODS = ("ratio", "offset", "converging-ratio", "converging-offset")
HARMONISE_OFF = "none"
FILES = ("contract.toml", "variables.toml", "regions.toml", "reference.csv", "bounds.csv")


@dataclass(frozen=True)
class Part:
    """One addend of a variable: `factor` converts its contract unit into the total's unit."""

    variable: str
    factor: float
    gwp: str | None = None


@dataclass(frozen=True)
class Variable:
    name: str
    unit: str
    description: str = ""
    required: bool = False
    sign: str = "any"
    regions: str = "sum"
    parts: tuple[Part, ...] = ()
    harmonise: str | None = None  # method for this variable; None = the contract's default applies
    converge_year: int | None = None  # convergence year of the converging methods; None = the default


@dataclass(frozen=True)
class Region:
    name: str
    parts: tuple[str, ...] = ()
    description: str = ""


@dataclass(frozen=True)
class Tolerance:
    sum_relative: float = 0.01
    sum_absolute: float = 0.001
    base_year_relative: float = 0.10


@dataclass(frozen=True)
class Harmonise:
    """Base-year harmonisation defaults: the variables harmonised (name patterns), the method, the convergence year.

    A variable's own `harmonise` / `converge_year` in variables.toml override these; `harmonise = "none"` keeps
    a variable out even where a pattern matches it.
    """

    variables: tuple[str, ...] = ()
    method: str = "converging-ratio"
    converge_year: int = 2050


@dataclass(frozen=True)
class Allocation:
    """How the burden-sharing indicators allocate a market's cap (contract.toml `[allocation]`).

    Contraction and convergence moves each region's share linearly from its base-year share of emissions
    (grandfathering) to its share of population (equal per capita) between the base year and `convergence_year`.
    `region` is the market: its own emissions are the cap, its direct parts the traders.
    """

    convergence_year: int = 2050
    region: str = "World"


@dataclass(frozen=True)
class Reference:
    region: str
    variable: str
    unit: str
    year: int
    value: float


@dataclass(frozen=True)
class Bound:
    variable: str
    region: str | None
    year_from: int | None
    year_to: int | None
    low: float | None
    high: float | None


@dataclass(frozen=True)
class Budgets:
    """Remaining carbon budgets by warming level and likelihood, and the TCRE (contract.toml `[budgets]`).

    `remaining[i][j]` is the budget in Gt CO2 from 1 January of `from_year` for `levels[i]` (°C above
    1850-1900) at `likelihoods[j]` (%, the likelihood of limiting warming to that level). Published budgets
    already set aside the warming from non-CO2 emissions, so they are compared with CO2 only.
    """

    source: str
    region: str
    from_year: int
    likelihoods: tuple[float, ...]
    levels: tuple[float, ...]
    remaining: tuple[tuple[float, ...], ...]
    tcre: float  # °C per 1000 Gt CO2, central estimate
    tcre_likely: tuple[float, float]  # likely range (low, high)

    def budget(self, level: float, likelihood: float) -> float:
        """The remaining budget (Gt CO2) of one warming level at one likelihood; KeyError if not in the table."""
        if level not in self.levels or likelihood not in self.likelihoods:
            raise KeyError(f"no budget for {level:g} °C at {likelihood:g} %")
        return self.remaining[self.levels.index(level)][self.likelihoods.index(likelihood)]


@dataclass(frozen=True)
class Pairing:
    """How scenarios pair for delay comparisons (contract.toml `[pairs]`).

    Scenarios of one model whose attributes `match` are equal form a group; `order` (an attribute, compared as
    a number where it is one) orders the group, and every later scenario pairs with the earliest.
    """

    match: tuple[str, ...]
    order: str


@dataclass(frozen=True)
class Contract:
    name: str
    description: str
    sources: tuple[str, ...]
    first_year: int
    last_year: int
    base_year: int
    milestones: tuple[int, ...]
    required_regions: tuple[str, ...]
    variables: dict[str, Variable]
    regions: dict[str, Region]
    countries: bool
    tolerance: Tolerance
    gwp_set: str
    gwp: dict[str, float]
    discount_rate: float
    carbon_to_co2: bool
    nitrogen_to_n2o: bool
    deflators: tuple[tuple[str, str, float], ...]
    severity: dict[str, str]
    reference: tuple[Reference, ...]
    bounds: tuple[Bound, ...]
    harmonise: Harmonise = Harmonise()
    budgets: Budgets | None = None
    pairs: Pairing | None = None
    allocation: Allocation = Allocation()
    limits: Limits = field(default=Limits(), compare=False)
    # the [limits] keys the contract (or one it extends) sets: they enter the hash, the defaults do not
    limits_set: tuple[str, ...] = field(default=(), compare=False)
    # [costs] reference_required: every scenario that is nobody's reference must name one (rule missing-reference)
    reference_required: bool = False
    problems: tuple[str, ...] = field(default=(), compare=False)
    hash: str = ""
    units: Any = field(default=None, compare=False, repr=False)

    def to_dict(self) -> dict[str, Any]:
        """The resolved contract as plain data (the shape of `milepost contract show --format json`)."""
        return {
            "name": self.name,
            "hash": self.hash,
            "description": self.description,
            "sources": list(self.sources),
            "base_year": self.base_year,
            "milestones": list(self.milestones),
            "years": {"first": self.first_year, "last": self.last_year},
            "required_regions": list(self.required_regions),
            "variables": [
                {
                    "name": v.name,
                    "unit": v.unit,
                    "description": v.description,
                    "required": v.required,
                    "sign": v.sign,
                    "regions": v.regions,
                    "parts": [{"variable": p.variable, "factor": p.factor, "gwp": p.gwp} for p in v.parts],
                    "harmonise": v.harmonise,
                    "converge_year": v.converge_year,
                }
                for v in self.variables.values()
            ],
            "regions": [{"name": r.name, "parts": list(r.parts)} for r in self.regions.values()],
            "countries": self.countries,
            "tolerance": asdict(self.tolerance),
            "gwp": {"set": self.gwp_set, "values": self.gwp},
            "discount_rate": self.discount_rate,
            "units": {
                "carbon_to_co2": self.carbon_to_co2,
                "nitrogen_to_n2o": self.nitrogen_to_n2o,
                "deflators": [list(d) for d in self.deflators],
            },
            "severity": self.severity,
            "reference": [asdict(r) for r in self.reference],
            "bounds": [asdict(b) for b in self.bounds],
            "harmonise": {**asdict(self.harmonise), "variables": list(self.harmonise.variables)},
            "budgets": asdict(self.budgets) if self.budgets else None,
            "pairs": asdict(self.pairs) if self.pairs else None,
            "allocation": asdict(self.allocation),
            "limits": asdict(self.limits),
            # only when set, so the hash of every contract written before the setting existed stays the same
            **({"costs": {"reference_required": True}} if self.reference_required else {}),
        }

    def references_in_contract_units(self) -> tuple[Reference, ...]:
        """The reference values converted into their variable's contract unit (the unit the checked data and the
        database use), in file order. References of unknown variables or in units that do not convert are left out:
        `milepost contract lint` reports them."""
        from milepost.schema.units import UnitError, scale_factor

        out = []
        for r in self.reference:
            v = self.variables.get(r.variable)
            if v is None:
                continue
            try:
                factor = scale_factor(r.unit, v.unit)
                if factor is None:
                    factor = self.units.factor(r.unit, v.unit)
            except UnitError:
                continue
            out.append(Reference(r.region, r.variable, v.unit, r.year, r.value * factor))
        return tuple(out)

    def is_region(self, name: str) -> bool:
        """True if `name` is a region of the contract, a part of one (e.g. an ISO code in a country group), or,
        when countries are allowed, any ISO 3166-1 alpha-3 code."""
        return name in self.region_names() or (self.countries and name in iso3_codes())

    def region_names(self) -> frozenset[str]:
        """Every region the contract names: its regions and their parts."""
        return frozenset(self.regions) | {p for r in self.regions.values() for p in r.parts}

    def leaf_parts(self, region: str) -> tuple[str, ...]:
        """The direct parts of a region (its sum-of-regions addends)."""
        return self.regions[region].parts if region in self.regions else ()


def iso3_codes() -> frozenset[str]:
    """All current ISO 3166-1 alpha-3 codes, from pycountry's bundled ISO data."""
    import pycountry

    return frozenset(c.alpha_3 for c in pycountry.countries)


def _read_toml(path: Path) -> dict[str, Any]:
    if not path.exists():
        return {}
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as e:
        raise ContractError(f"{path}: not valid TOML: {e}") from None


def _read_csv(path: Path, columns: tuple[str, ...]) -> list[dict[str, str]]:
    if not path.exists():
        return []
    try:
        with path.open(encoding="utf-8-sig", newline="") as f:
            rows = list(csv.DictReader(f))
    except UnicodeDecodeError as e:
        raise ContractError(f"{path}: not UTF-8 text (byte {e.start}); save it as UTF-8") from None
    except csv.Error as e:
        raise ContractError(f"{path}: not a readable CSV file: {e}") from None
    if rows and not set(columns) <= set(rows[0]):
        missing = sorted(set(columns) - set(rows[0]))
        raise ContractError(f"{path}: missing columns {', '.join(missing)} (expected {', '.join(columns)})")
    for i, row in enumerate(rows, start=2):
        if any(row.get(c) is None for c in columns) or None in row:
            raise ContractError(f"{path}:{i}: the line has {'too few' if None not in row else 'too many'} cells")
    return rows


def _resolve_extends(value: str, here: Path) -> Path:
    if value == "core":
        return CORE_DIR
    p = (here / value).resolve()
    if not (p / "contract.toml").exists():
        raise ContractError(f"{here / 'contract.toml'}: extends {value!r}, but {p} has no contract.toml")
    return p


def _merged_layers(path: Path, seen: tuple[Path, ...] = ()) -> list[Path]:
    path = path.resolve()
    if path in seen:
        raise ContractError(f"{path}: contracts extend each other in a loop")
    if not (path / "contract.toml").exists():
        raise ContractError(f"{path}: not a contract folder (no contract.toml)")
    head = _read_toml(path / "contract.toml")
    parent = head.get("extends")
    layers = _merged_layers(_resolve_extends(parent, path), (*seen, path)) if parent else []
    return [*layers, path]


def _number(value: Any, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ContractError(f"{where}: expected a number, got {value!r}")
    return float(value)


def _optional_text(value: Any, where: str) -> str | None:
    if value is None:
        return None
    if not isinstance(value, str):
        raise ContractError(f"{where}: expected a text, got {value!r}")
    return value


def _table(value: Any, where: str) -> dict[str, Any]:
    if not isinstance(value, dict):
        raise ContractError(f"{where} must be a table, got {value!r}")
    return value


def _list(value: Any, where: str) -> list[Any]:
    if not isinstance(value, list):
        raise ContractError(f"{where} must be a list, got {value!r}")
    return value


def _year(value: Any, where: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise ContractError(f"{where}: expected a whole year, got {value!r}")
    return value


def _section(table: Any, name: str, known: Any, where: str) -> dict[str, Any]:
    """A `[name]` table of contract.toml whose keys are all in `known` (its shape only; lint judges the values)."""
    if not isinstance(table, dict):
        raise ContractError(f"{where}: [{name}] must be a table")
    unknown = sorted(set(table) - set(known))
    if unknown:
        raise ContractError(
            f"{where}: [{name}] has unknown keys {', '.join(unknown)} (known: {', '.join(sorted(known))})"
        )
    return table


def _harmonise_settings(table: Any, where: str) -> Harmonise:
    """The [harmonise] table of contract.toml: types are checked here, the values by contract lint."""
    table = _section(table, "harmonise", Harmonise.__dataclass_fields__, where)
    default = Harmonise()
    patterns = table.get("variables", list(default.variables))
    if not isinstance(patterns, list) or not all(isinstance(p, str) for p in patterns):
        raise ContractError(f"{where}: [harmonise] variables must be a list of names or patterns")
    method = _optional_text(table.get("method"), f"{where}: [harmonise] method")
    # TOML has no null: a key left out is the only way to ask for the default
    year = _year(table.get("converge_year", default.converge_year), f"{where}: [harmonise] converge_year")
    return Harmonise(tuple(patterns), method if method is not None else default.method, year)


def _allocation(table: Any, where: str) -> Allocation:
    """The [allocation] table of contract.toml: types are checked here, the values by contract lint."""
    table = _section(table, "allocation", Allocation.__dataclass_fields__, where)
    default = Allocation()
    year = _year(table.get("convergence_year", default.convergence_year), f"{where}: [allocation] convergence_year")
    region = _optional_text(table.get("region"), f"{where}: [allocation] region")
    return Allocation(year, region if region is not None else default.region)


def _optional_number(text: str | None, where: str) -> float | None:
    if text is None or text.strip() == "":
        return None
    try:
        return float(text)
    except ValueError:
        raise ContractError(f"{where}: expected a number, got {text!r}") from None


def _gwp_values(metric: str) -> dict[str, float]:
    import globalwarmingpotentials as gwp

    if metric not in gwp.data:
        known = ", ".join(sorted(gwp.data))
        raise ContractError(f"gwp = {metric!r} is not a published set known to globalwarmingpotentials ({known})")
    table = gwp.data[metric]
    return {"CO2": 1.0, "CH4": float(table["CH4"]), "N2O": float(table["N2O"])}


def _budgets(raw: Any, where: str) -> Budgets | None:
    """`[budgets]` of contract.toml as a Budgets record (shape only; contract_lint checks that it is sound)."""
    if raw is None:
        return None
    known = {"source", "region", "from_year", "likelihoods", "remaining", "tcre", "tcre_likely"}
    raw = _section(raw, "budgets", known, where)
    remaining = raw.get("remaining", {})
    if not isinstance(remaining, dict) or not remaining:
        raise ContractError(f'{where}: [budgets.remaining] must map warming levels ("1.5") to lists of Gt CO2')
    likelihoods = tuple(_number(x, f"{where} [budgets] likelihoods") for x in raw.get("likelihoods", ()))
    levels: list[tuple[float, tuple[float, ...]]] = []
    for key, values in remaining.items():
        try:
            level = float(key)
        except ValueError:
            raise ContractError(f"{where}: [budgets.remaining] key {key!r} is not a warming level in °C") from None
        if not isinstance(values, list):
            raise ContractError(f"{where}: [budgets.remaining] {key} must be a list of Gt CO2, one per likelihood")
        levels.append((level, tuple(_number(v, f"{where} [budgets.remaining] {key}") for v in values)))
    levels.sort()
    likely = raw.get("tcre_likely", ())
    if not isinstance(likely, list) or len(likely) != 2:
        raise ContractError(f"{where}: [budgets] tcre_likely must be [low, high] in °C per 1000 Gt CO2")
    return Budgets(
        source=str(raw.get("source", "")),
        region=str(raw.get("region", "World")),
        from_year=int(_number(raw.get("from_year"), f"{where} [budgets] from_year")),
        likelihoods=likelihoods,
        levels=tuple(lv for lv, _ in levels),
        remaining=tuple(v for _, v in levels),
        tcre=_number(raw.get("tcre"), f"{where} [budgets] tcre"),
        tcre_likely=(_number(likely[0], f"{where} [budgets] tcre_likely"), _number(likely[1], f"{where} tcre_likely")),
    )


def _costs_reference_required(raw: Any, where: str) -> bool:
    """`[costs] reference_required` of contract.toml (default false)."""
    raw = _section(raw, "costs", {"reference_required"}, where)
    value = raw.get("reference_required", False)
    if not isinstance(value, bool):
        raise ContractError(f"{where}: [costs] reference_required must be true or false, not {value!r}")
    return value


def _pairing(raw: Any, where: str) -> Pairing | None:
    """`[pairs]` of contract.toml: `match` (attribute names) and `order` (one attribute name)."""
    if raw is None:
        return None
    if not isinstance(raw, dict) or set(raw) - {"match", "order"}:
        raise ContractError(f"{where}: [pairs] takes `match` (a list of scenario attributes) and `order` (one)")
    match = raw.get("match", [])
    order = raw.get("order")
    if not isinstance(match, list) or not all(isinstance(m, str) and m for m in match):
        raise ContractError(f"{where}: [pairs] match must be a list of scenario attribute names")
    if not isinstance(order, str) or not order:
        raise ContractError(f"{where}: [pairs] needs `order`, the scenario attribute that orders a group")
    return Pairing(tuple(match), order)


def load(path: str | Path | None = None) -> Contract:
    """Read a contract folder (default: the core contract), follow `extends`, and resolve it."""
    root = Path(path) if path is not None else CORE_DIR
    layers = _merged_layers(root)
    head: dict[str, Any] = {}
    variables: dict[str, dict[str, Any]] = {}
    regions: dict[str, dict[str, Any]] = {}
    countries = False
    reference: dict[tuple[str, str, int], Reference] = {}
    bounds: list[Bound] = []
    for layer in layers:
        top = _read_toml(layer / "contract.toml")
        for key, value in top.items():
            if isinstance(value, dict) and isinstance(head.get(key), dict):
                head[key] = {**head[key], **value}
            else:
                head[key] = value
        for name, spec in _read_toml(layer / "variables.toml").items():
            if not isinstance(spec, dict):
                raise ContractError(f"{layer / 'variables.toml'}: [{name}] must be a table")
            variables[name] = {**spec, "_file": str(layer / "variables.toml")}
        reg = _read_toml(layer / "regions.toml")
        countries = bool(reg.pop("countries", countries))
        for name, spec in reg.items():
            if not isinstance(spec, dict):
                raise ContractError(f"{layer / 'regions.toml'}: [{name}] must be a table")
            regions[name] = spec
        ref_path = layer / "reference.csv"
        for i, row in enumerate(_read_csv(ref_path, ("region", "variable", "unit", "year", "value")), start=2):
            where = f"{ref_path}:{i}"
            try:
                year = int(row["year"])
            except ValueError:
                raise ContractError(f"{where}: year {row['year']!r} is not a whole number") from None
            value = _optional_number(row["value"], where)
            if value is None:
                raise ContractError(f"{where}: value is empty")
            r = Reference(row["region"].strip(), row["variable"].strip(), row["unit"].strip(), year, value)
            reference[(r.region, r.variable, r.year)] = r
        bnd_path = layer / "bounds.csv"
        for i, row in enumerate(_read_csv(bnd_path, ("variable", "low", "high")), start=2):
            where = f"{bnd_path}:{i}"
            yf, yt = _optional_number(row.get("year_from"), where), _optional_number(row.get("year_to"), where)
            bounds.append(
                Bound(
                    variable=row["variable"].strip(),
                    region=(row.get("region") or "").strip() or None,
                    year_from=int(yf) if yf is not None else None,
                    year_to=int(yt) if yt is not None else None,
                    low=_optional_number(row["low"], where),
                    high=_optional_number(row["high"], where),
                )
            )
    return _resolve(head, variables, regions, countries, reference, bounds, layers)


def _resolve(
    head: dict[str, Any],
    variables: dict[str, dict[str, Any]],
    regions: dict[str, dict[str, Any]],
    countries: bool,
    reference: dict[tuple[str, str, int], Reference],
    bounds: list[Bound],
    layers: list[Path],
) -> Contract:
    from milepost.schema.units import Deflator, LazyUnits, UnitError, as_co2e, scale_factor

    where = str(layers[-1] / "contract.toml")
    years = _table(head.get("years", {}), f"{where}: [years]")
    missing = [k for k in ("first", "last", "base") if k not in years]
    if missing:
        raise ContractError(f"{where}: [years] needs whole numbers first, last, base (missing {', '.join(missing)})")
    first, last, base = (_year(years[k], f"{where}: [years] {k}") for k in ("first", "last", "base"))
    if not isinstance(years.get("milestones", []), list):
        raise ContractError(f"{where}: [years] milestones must be a list of whole years")
    milestones = tuple(_year(y, f"{where}: [years] milestones") for y in years.get("milestones", ()))
    tol = _table(head.get("tolerance", {}), f"{where}: [tolerance]")
    tolerance = Tolerance(
        **{k: _number(v, f"{where} [tolerance] {k}") for k, v in tol.items() if k in Tolerance.__dataclass_fields__}
    )
    unknown_tol = sorted(set(tol) - set(Tolerance.__dataclass_fields__))
    if unknown_tol:
        raise ContractError(f"{where}: [tolerance] has unknown keys {', '.join(unknown_tol)}")
    units_cfg = _table(head.get("units", {}), f"{where}: [units]")
    unknown_units = sorted(set(units_cfg) - {"carbon_to_co2", "nitrogen_to_n2o", "deflators"})
    if unknown_units:
        raise ContractError(
            f"{where}: [units] has unknown keys {', '.join(unknown_units)} (known: carbon_to_co2, nitrogen_to_n2o, "
            "deflators)"
        )
    raw_deflators = units_cfg.get("deflators", [])
    if not isinstance(raw_deflators, list) or not all(
        isinstance(d, dict) and {"from", "to", "factor"} <= set(d) for d in raw_deflators
    ):
        raise ContractError(f"{where}: [[units.deflators]] entries need from, to and factor")
    deflators = tuple(
        (str(d["from"]), str(d["to"]), _number(d["factor"], f"{where} [[units.deflators]]")) for d in raw_deflators
    )
    carbon = bool(units_cfg.get("carbon_to_co2", False))
    nitrogen = bool(units_cfg.get("nitrogen_to_n2o", False))
    gwp_set = str(head.get("gwp", "AR6GWP100"))
    gwp = _gwp_values(gwp_set)
    shapes = tuple(
        sorted(
            {str(spec.get("unit", "")) for spec in variables.values() if re.search(r"CO2|N2O", str(spec.get("unit")))}
        )
    )
    units = LazyUnits(
        deflators=tuple(Deflator(*d) for d in deflators), carbon_to_co2=carbon, nitrogen_to_n2o=nitrogen, shapes=shapes
    )

    problems: list[str] = []
    resolved: dict[str, Variable] = {}
    for name, spec in variables.items():
        vfile = spec.get("_file", "variables.toml")
        if "unit" not in spec:
            raise ContractError(f"{vfile}: [{name}] has no unit")
        parts = []
        if not isinstance(spec.get("parts", []), list):
            raise ContractError(f"{vfile}: [{name}] parts must be a list of names or {{variable = ..., factor = ...}}")
        if not isinstance(spec["unit"], str):
            raise ContractError(f"{vfile}: [{name}] unit must be a text, got {spec['unit']!r}")
        for p in spec.get("parts", ()):
            if isinstance(p, str):
                p = {"variable": p}
            if not isinstance(p, dict) or "variable" not in p:
                raise ContractError(f"{vfile}: [{name}] parts must be names or {{variable = ..., factor = ...}}")
            gas = p.get("gwp")
            factor = _number(p.get("factor", 1.0), f"{vfile}: [{name}] part {p['variable']} factor")
            if gas is not None:
                if gas not in gwp:
                    problems.append(f"{vfile}: [{name}] part {p['variable']}: no GWP for gas {gas!r} in {gwp_set}")
                else:
                    part_spec = variables.get(p["variable"], {})
                    try:
                        co2e = as_co2e(part_spec.get("unit", ""), gas)
                        unit_factor = scale_factor(co2e, spec["unit"])
                        if unit_factor is None:
                            unit_factor = units.factor(co2e, spec["unit"])
                        factor *= gwp[gas] * unit_factor
                    except UnitError as e:
                        problems.append(f"{vfile}: [{name}] part {p['variable']}: {e}")
            parts.append(Part(str(p["variable"]), factor, gas))
        resolved[name] = Variable(
            name=name,
            unit=str(spec["unit"]),
            description=str(spec.get("description", "")),
            required=bool(spec.get("required", False)),
            sign=str(spec.get("sign", "any")),
            regions=str(spec.get("regions", "sum")),
            parts=tuple(parts),
            harmonise=_optional_text(spec.get("harmonise"), f"{vfile}: [{name}] harmonise"),
            converge_year=(
                _year(spec["converge_year"], f"{vfile}: [{name}] converge_year") if "converge_year" in spec else None
            ),
        )
    for name, spec in regions.items():
        if not isinstance(spec.get("parts", []), list):
            raise ContractError(f"regions.toml: [{name}] parts must be a list of region names, got {spec['parts']!r}")
    resolved_regions = {
        name: Region(name, tuple(str(x) for x in spec.get("parts", ())), str(spec.get("description", "")))
        for name, spec in regions.items()
    }
    severity = {str(k): str(v) for k, v in _table(head.get("severity", {}), f"{where}: [severity]").items()}
    contract = Contract(
        name=str(head.get("name", layers[-1].name)),
        description=str(head.get("description", "")),
        sources=tuple(str(p) for p in layers),
        first_year=first,
        last_year=last,
        base_year=base,
        milestones=milestones,
        required_regions=tuple(
            str(r) for r in _list(years.get("required_regions", ["World"]), f"{where}: [years] required_regions")
        ),
        variables=resolved,
        regions=resolved_regions,
        countries=countries,
        tolerance=tolerance,
        gwp_set=gwp_set,
        gwp=gwp,
        discount_rate=_number(head.get("discount_rate", 5.0), f"{where} discount_rate"),
        carbon_to_co2=carbon,
        nitrogen_to_n2o=nitrogen,
        deflators=deflators,
        severity=severity,
        reference=tuple(reference.values()),
        bounds=tuple(bounds),
        harmonise=_harmonise_settings(head.get("harmonise", {}), where),
        budgets=_budgets(head.get("budgets"), where),
        pairs=_pairing(head.get("pairs"), where),
        allocation=_allocation(head.get("allocation", {}), where),
        limits=Limits.from_table(head.get("limits"), where),
        limits_set=tuple(sorted(head.get("limits") or ())),
        reference_required=_costs_reference_required(head.get("costs", {}), where),
        problems=tuple(problems),
        units=units,
    )
    payload = {k: v for k, v in contract.to_dict().items() if k not in ("hash", "sources", "limits")}
    # Only the limits the contract sets: a database then records under which limits a submission was checked,
    # and the hash of every contract without a [limits] table stays what it was before limits existed.
    if contract.limits_set:
        payload["limits"] = {k: getattr(contract.limits, k) for k in contract.limits_set}
    # likewise [allocation] only where it differs from the defaults, so that contracts hashed before it existed
    # keep their hash (ingest recognises a repeated submission by files and contract hash)
    if contract.allocation == Allocation():
        payload.pop("allocation", None)
    digest = hashlib.sha256(json.dumps(payload, sort_keys=True, separators=(",", ":")).encode()).hexdigest()
    object.__setattr__(contract, "hash", digest)
    return contract
