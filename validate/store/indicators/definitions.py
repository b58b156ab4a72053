"""Indicator definitions (schema/indicators.toml): read them and resolve them against one contract.

Resolving gives the rows of the two small configuration tables the SQL joins against: the selection (kind,
variable, unit, factor) and the periods (kind, year_from, year_to). This is the only Python iteration in the
indicator layer, and it runs over contract variables and milestones, never over data rows.
"""

from __future__ import annotations

import fnmatch
import itertools
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import milepost.schema
from milepost.schema.contract import Contract
from milepost.validate.errors import IndicatorSpecError as IndicatorSpecError  # re-exported
from milepost.validate.store.indicators.base import BUDGET_UNIT, SCALINGS, Kind

DEFAULT_PATH = Path(milepost.schema.__file__).parent / "indicators.toml"
PERIOD_SHAPES = ("points", "milestones", "pairs", "from_base", "reported", "net_zero")
KEYS = ("variables", "exclude", "periods", "unit")
_GAS_UNIT = re.compile(r"^[kMGT]?t (\S+)/yr$")


@dataclass(frozen=True)
class Definition:
    """One table of indicators.toml."""

    kind: str
    variables: tuple[str, ...]
    exclude: tuple[str, ...]
    periods: str
    unit: str


@dataclass(frozen=True)
class Plan:
    """Definitions resolved for one contract.

    selection  (kind, variable, unit, factor) rows
    periods    (kind, year_from, year_to) rows (none for `reported` kinds)
    skipped    (kind, variable, reason) for variables a pattern matched but whose unit does not fit the kind
    """

    selection: tuple[tuple[str, str, str, float], ...]
    periods: tuple[tuple[str, int, int], ...]
    skipped: tuple[tuple[str, str, str], ...]

    def kinds(self) -> tuple[str, ...]:
        """Kinds with at least one selected variable, in selection order."""
        return tuple(dict.fromkeys(row[0] for row in self.selection))


def load_definitions(path: str | Path | None = None) -> tuple[Definition, ...]:
    """Read indicators.toml (default: the one in milepost.schema) into definitions; checks shape, not kinds."""
    p = Path(path) if path is not None else DEFAULT_PATH
    try:
        raw = tomllib.loads(p.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError, UnicodeDecodeError) as e:
        raise IndicatorSpecError(f"{p}: cannot read indicator definitions: {e}") from None
    out = []
    for kind, spec in raw.items():
        if not isinstance(spec, dict):
            raise IndicatorSpecError(f"{p}: [{kind}] must be a table")
        unknown = sorted(set(spec) - set(KEYS))
        if unknown:
            raise IndicatorSpecError(f"{p}: [{kind}] has unknown keys {', '.join(unknown)} (known: {', '.join(KEYS)})")
        for key in ("variables", "periods", "unit"):
            if key not in spec:
                raise IndicatorSpecError(f"{p}: [{kind}] needs `{key}`")
        out.append(
            Definition(
                kind=kind,
                variables=_patterns(spec["variables"], p, kind, "variables"),
                exclude=_patterns(spec.get("exclude", []), p, kind, "exclude"),
                periods=_text(spec["periods"], p, kind, "periods"),
                unit=_text(spec["unit"], p, kind, "unit"),
            )
        )
    return tuple(out)


def _patterns(value: Any, path: Path, kind: str, key: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise IndicatorSpecError(f"{path}: [{kind}] {key} must be a list of glob patterns")
    return tuple(value)


def _text(value: Any, path: Path, kind: str, key: str) -> str:
    if not isinstance(value, str):
        raise IndicatorSpecError(f"{path}: [{kind}] {key} must be a string")
    return value


def periods_for(shape: str, base_year: int, milestones: tuple[int, ...]) -> tuple[tuple[int, int], ...]:
    """The (year_from, year_to) periods of a period shape; single years have year_from = year_to.

    `pairs` is base -> first milestone, each consecutive pair of milestones, and base -> each milestone, once each.
    Milestones at or before the base year start no period from the base.
    """
    ms = sorted(set(milestones))
    later = [m for m in ms if m > base_year]
    if shape == "points":
        return tuple((y, y) for y in sorted({base_year, *ms}))
    if shape == "milestones":
        return tuple((m, m) for m in ms)
    if shape == "from_base":
        return tuple((base_year, m) for m in later)
    if shape == "pairs":
        chain = [base_year, *later]
        pairs = {(base_year, m) for m in later} | set(itertools.pairwise(chain))
        return tuple(sorted(pairs))
    if shape in ("reported", "net_zero"):  # each series has its own period
        return ()
    raise IndicatorSpecError(f"unknown period shape {shape!r} (known: {', '.join(PERIOD_SHAPES)})")


def render_unit(template: str, unit: str) -> str:
    """Fill {unit}, {stock} and {gas} in a unit template; raises KeyError naming what does not fit `unit`."""
    from milepost.schema.units import normalise

    norm = normalise(unit)
    fields = {"unit": unit}
    if norm.endswith("/yr"):
        fields["stock"] = norm[: -len("/yr")]
    gas = _GAS_UNIT.match(norm)
    if gas:
        fields["gas"] = gas.group(1)
    try:
        return template.format(**fields)
    except KeyError as e:
        raise KeyError(f"unit {unit!r} gives no {{{e.args[0]}}} for {template!r}") from None


def resolve(contract: Contract, definitions: tuple[Definition, ...], kinds: Mapping[str, Kind]) -> Plan:
    """The selection and period rows of `definitions` for `contract`; raises IndicatorSpecError if inconsistent."""
    from milepost.schema.units import UnitError, Units

    units = contract.units if contract.units is not None else Units()
    selection: list[tuple[str, str, str, float]] = []
    periods: list[tuple[str, int, int]] = []
    skipped: list[tuple[str, str, str]] = []
    for d in definitions:
        kind = kinds.get(d.kind)
        if kind is None:
            raise IndicatorSpecError(f"[{d.kind}] is not an indicator kind (known: {', '.join(sorted(kinds))})")
        if kind.scaling not in SCALINGS:
            raise IndicatorSpecError(f"kind {d.kind} declares unknown scaling {kind.scaling!r}")
        if d.periods not in kind.periods:
            raise IndicatorSpecError(
                f"[{d.kind}] periods = {d.periods!r}: this kind accepts {', '.join(repr(s) for s in kind.periods)}"
            )
        periods.extend((d.kind, y0, y1) for y0, y1 in periods_for(d.periods, contract.base_year, contract.milestones))
        for name, var in contract.variables.items():
            if not any(fnmatch.fnmatchcase(name, pat) for pat in d.variables):
                continue
            if any(fnmatch.fnmatchcase(name, pat) for pat in d.exclude):
                continue
            try:
                unit = render_unit(d.unit, var.unit)
                if kind.scaling == "label" or (kind.scaling == "level" and unit == var.unit):
                    factor = 1.0
                elif kind.scaling == "level":
                    factor = units.factor(var.unit, unit)
                elif kind.scaling == "budget":
                    factor = units.factor(var.unit, f"{BUDGET_UNIT}/yr")
                else:
                    factor = units.factor(var.unit, f"{unit}/yr")
            except (KeyError, UnitError) as e:
                skipped.append((d.kind, name, str(e.args[0]) if e.args else str(e)))
                continue
            selection.append((d.kind, name, unit, factor))
    return Plan(tuple(selection), tuple(periods), tuple(skipped))
