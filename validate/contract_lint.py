"""Lint of a resolved contract: cycles in parts, unit dimensions of parts vs totals, unknown units, bad references."""

from __future__ import annotations

import fnmatch
import hashlib
import itertools
import math
import os
from dataclasses import asdict
from pathlib import Path
from typing import Any

from milepost.schema.contract import (
    AGGREGATIONS,
    HARMONISE_METHODS,
    HARMONISE_OFF,
    NAME_PATTERN,
    SIGNS,
    Contract,
    iso3_codes,
)
from milepost.schema.units import UnitError
from milepost.validate.findings import RULES, SEVERITIES, Finding


def _f(rule: str, message: str, hint: str | None = None, **where: Any) -> Finding:
    return Finding(
        rule,
        "error",
        path=where.pop("path", None),
        message=message,
        hint=hint,
        **{k: v for k, v in where.items() if v is not None},
    )


def _cycles(graph: dict[str, tuple[str, ...]]) -> list[list[str]]:
    """Every cycle found by a depth-first walk (each reported once, from its smallest member)."""
    found: dict[tuple[str, ...], list[str]] = {}
    state: dict[str, int] = {}
    stack: list[str] = []

    def walk(node: str) -> None:
        state[node] = 1
        stack.append(node)
        for nxt in graph.get(node, ()):
            if state.get(nxt) == 1:
                cyc = stack[stack.index(nxt) :]
                k = cyc.index(min(cyc))
                norm = cyc[k:] + cyc[:k]
                found[tuple(norm)] = [*norm, norm[0]]
            elif nxt not in state:
                walk(nxt)
        stack.pop()
        state[node] = 2

    for n in sorted(graph):
        if n not in state:
            walk(n)
    return list(found.values())


def lint(contract: Contract) -> list[Finding]:
    """Every problem of the contract as a finding; an empty list means the contract can be used."""
    out: list[Finding] = []
    src = contract.sources[-1] if contract.sources else None
    units = contract.units
    for problem in contract.problems:
        out.append(_f("contract-unit", problem, path=src))
    for v in contract.variables.values():
        if not NAME_PATTERN.match(v.name):
            out.append(
                _f(
                    "contract-name",
                    f"variable name {v.name!r} is not lower-case segments joined by dots",
                    "Use names like emissions.co2.fossil.",
                    path=src,
                    variable=v.name,
                )
            )
        if v.sign not in SIGNS:
            out.append(
                _f(
                    "contract-name",
                    f"{v.name}: sign {v.sign!r} is not one of {', '.join(SIGNS)}",
                    path=src,
                    variable=v.name,
                )
            )
        if v.regions not in AGGREGATIONS:
            out.append(
                _f(
                    "contract-name",
                    f"{v.name}: regions {v.regions!r} is not one of {', '.join(AGGREGATIONS)}",
                    path=src,
                    variable=v.name,
                )
            )
        if not v.unit.strip():
            out.append(
                _f(
                    "contract-unit",
                    f"{v.name}: the unit is empty",
                    'Give a unit, e.g. "Mt CO2/yr" or "1" for a ratio.',
                    path=src,
                    variable=v.name,
                )
            )
            continue
        try:
            units.parse(v.unit)
        except UnitError as e:
            out.append(_f("contract-unit", f"{v.name}: {e}", path=src, variable=v.name, unit=v.unit))
            continue
        for p in v.parts:
            part = contract.variables.get(p.variable)
            if part is None:
                out.append(
                    _f(
                        "contract-part",
                        f"{v.name}: part {p.variable!r} is not a variable of the contract",
                        path=src,
                        variable=v.name,
                    )
                )
                continue
            if p.gwp is not None:
                continue  # the gas-to-CO2e factor was derived at load; its problems are in contract.problems
            try:
                factor = units.factor(part.unit, v.unit)
            except UnitError:
                out.append(
                    _f(
                        "contract-unit",
                        f"{v.name} ({v.unit}): part {p.variable} is in {part.unit}, which "
                        "does not convert into the total's unit",
                        'Give the part a unit of the same dimension, or name its gas with gwp = "...".',
                        path=src,
                        variable=v.name,
                    )
                )
                continue
            if abs(p.factor - factor) > 1e-9 * max(abs(factor), 1.0):
                out.append(
                    _f(
                        "contract-unit",
                        f"{v.name}: part {p.variable} has factor {p.factor:g}, but "
                        f"{part.unit} converts to {v.unit} by {factor:g}",
                        path=src,
                        variable=v.name,
                    )
                )
    for cyc in _cycles({v.name: tuple(p.variable for p in v.parts) for v in contract.variables.values()}):
        out.append(_f("contract-cycle", "variables are parts of themselves: " + " -> ".join(cyc), path=src))
    for cyc in _cycles({r.name: r.parts for r in contract.regions.values()}):
        out.append(_f("contract-cycle", "regions are parts of themselves: " + " -> ".join(cyc), path=src))
    uses_codes = any(len(p) == 3 and p.isupper() for r in contract.regions.values() for p in r.parts)
    isos = iso3_codes() if uses_codes else frozenset()
    for r in contract.regions.values():
        for code in r.parts:
            if code not in contract.regions and code not in isos:
                out.append(
                    _f(
                        "contract-part",
                        f"region {r.name}: part {code!r} is neither a region of the contract "
                        "nor an ISO 3166-1 alpha-3 code",
                        path=src,
                        region=r.name,
                    )
                )
    for ref in contract.reference:
        where: dict[str, Any] = {"path": src, "region": ref.region, "variable": ref.variable, "year": ref.year}
        known = contract.variables.get(ref.variable)
        if known is None:
            out.append(_f("contract-reference", f"reference value for unknown variable {ref.variable!r}", **where))
        elif not units.compatible(ref.unit, known.unit):
            out.append(
                _f(
                    "contract-reference",
                    f"reference {ref.variable} is in {ref.unit}, which does not convert to {known.unit}",
                    **where,
                )
            )
        if not contract.is_region(ref.region):
            out.append(_f("contract-reference", f"reference value for unknown region {ref.region!r}", **where))
    for b in contract.bounds:
        if b.variable not in contract.variables:
            out.append(_f("contract-reference", f"bound for unknown variable {b.variable!r}", path=src))
        if b.region is not None and not contract.is_region(b.region):
            out.append(_f("contract-reference", f"bound for unknown region {b.region!r}", path=src))
        if b.low is not None and b.high is not None and b.low > b.high:
            out.append(_f("contract-reference", f"bound for {b.variable}: low {b.low:g} > high {b.high:g}", path=src))
    c = contract
    if not c.first_year <= c.base_year <= c.last_year:
        out.append(
            _f("contract-reference", f"base year {c.base_year} is outside {c.first_year}–{c.last_year}", path=src)
        )
    for m in c.milestones:
        if not c.first_year <= m <= c.last_year:
            out.append(_f("contract-reference", f"milestone {m} is outside {c.first_year}–{c.last_year}", path=src))
    for name in c.required_regions:
        if not c.is_region(name):
            out.append(_f("contract-reference", f"required region {name!r} is not a region of the contract", path=src))
    out.extend(_budget_problems(c, src))
    out.extend(_allocation_problems(c, src))
    for rule, sev in c.severity.items():
        if rule not in RULES or sev not in SEVERITIES:
            out.append(
                _f(
                    "contract-severity",
                    f"[severity] {rule} = {sev!r}: rule ids are those of `milepost "
                    f"rules`, severities {', '.join(SEVERITIES)}",
                    path=src,
                )
            )
    out += _harmonise_problems(c, src)
    out += _number_problems(c, src)
    return out


def _number_problems(c: Contract, src: str | None) -> list[Finding]:
    """contract-number: settings that must be finite (and tolerances not negative); NaN passes every comparison,
    so a NaN tolerance or reference would silently accept anything."""
    out: list[Finding] = []
    for name, value in asdict(c.tolerance).items():
        if not math.isfinite(value) or value < 0:
            out.append(
                _f("contract-number", f"[tolerance] {name} = {value!r}: a tolerance is a finite number ≥ 0", path=src)
            )
    if not math.isfinite(c.discount_rate):
        out.append(
            _f("contract-number", f"discount_rate = {c.discount_rate!r} is not a finite number (% per year)", path=src)
        )
    for ref in c.reference:
        if not math.isfinite(ref.value):
            out.append(
                _f(
                    "contract-number",
                    f"reference value {ref.value!r} for {ref.variable} in {ref.region} at {ref.year} "
                    "is not a finite number",
                    path=src,
                    region=ref.region,
                    variable=ref.variable,
                    year=ref.year,
                )
            )
    for b in c.bounds:
        for side, value in (("low", b.low), ("high", b.high)):
            if value is not None and math.isnan(value):
                out.append(
                    _f(
                        "contract-number",
                        f"bound {side} of {b.variable} is NaN; leave it empty for none",
                        path=src,
                        variable=b.variable,
                    )
                )
    return out


def _harmonise_problems(c: Contract, src: str | None) -> list[Finding]:
    """contract-harmonise: the harmonisation defaults and each variable's own method and convergence year.

    A convergence year is checked only where a converging method uses it, so a contract that harmonises nothing
    is never faulted for a default it does not use."""
    from milepost.validate.harmonise.settings import CONVERGING_METHODS, choices

    out: list[Finding] = []
    h = c.harmonise
    methods = ", ".join(HARMONISE_METHODS)
    if h.method not in HARMONISE_METHODS:
        out.append(_f("contract-harmonise", f"[harmonise] method {h.method!r} is not one of {methods}", path=src))
    for pattern in h.variables:
        if not any(fnmatch.fnmatchcase(name, pattern) for name in c.variables):
            out.append(_f("contract-harmonise", f"[harmonise] variables: {pattern!r} matches no variable", path=src))
    for v in c.variables.values():
        if v.harmonise is not None and v.harmonise not in (*HARMONISE_METHODS, HARMONISE_OFF):
            out.append(
                _f(
                    "contract-harmonise",
                    f"{v.name}: harmonise {v.harmonise!r} is not one of {methods}, {HARMONISE_OFF}",
                    path=src,
                    variable=v.name,
                )
            )
    hint = "The converging methods move from the reference at the base year to the model's own values later."
    default_told = False
    for choice in choices(c):
        if choice.method not in CONVERGING_METHODS or choice.converge_year > c.base_year:
            continue
        own = c.variables[choice.variable].converge_year is not None
        if own:
            message = (
                f"{choice.variable}: converge_year {choice.converge_year} is not after the base year {c.base_year}"
            )
            out.append(_f("contract-harmonise", message, hint, path=src, variable=choice.variable))
        elif not default_told:
            message = f"[harmonise] converge_year {h.converge_year} is not after the base year {c.base_year}"
            out.append(_f("contract-harmonise", message, hint, path=src))
            default_told = True
    return out


def _budget_problems(c: Contract, src: str | None) -> list[Finding]:
    """The carbon-budget table must be readable as budget_p(W), increasing in W, for the budget indicators."""
    b = c.budgets
    if b is None:
        return []
    out: list[str] = []
    if b.from_year != c.base_year:
        out.append(
            f"[budgets] count from 1 January {b.from_year}, but cumulative emissions start at the base year "
            f"{c.base_year}: give budgets from {c.base_year} (and from_year = {c.base_year})"
        )
    if not c.is_region(b.region):
        out.append(f"[budgets] region {b.region!r} is not a region of the contract")
    p = b.likelihoods
    if not p or any(not 0 < x < 100 for x in p) or any(x >= y for x, y in itertools.pairwise(p)):
        out.append(f"[budgets] likelihoods must rise strictly between 0 and 100 %, not {list(p)}")
    for level, row in zip(b.levels, b.remaining, strict=True):
        if len(row) != len(p):
            out.append(f"[budgets.remaining] {level:g} °C has {len(row)} budgets for {len(p)} likelihoods")
        elif any(x < y for x, y in itertools.pairwise(row)):
            out.append(f"[budgets.remaining] {level:g} °C: budgets must not grow with the likelihood, not {list(row)}")
    if all(len(row) == len(p) for row in b.remaining):
        for j, likelihood in enumerate(p):
            column = [row[j] for row in b.remaining]
            if any(x >= y for x, y in itertools.pairwise(column)):
                out.append(
                    f"[budgets.remaining] at {likelihood:g} %: budgets must rise strictly with the warming level, "
                    f"not {column}"
                )
    low, high = b.tcre_likely
    if not 0 < low <= b.tcre <= high:
        out.append(f"[budgets] tcre {b.tcre:g} must be positive and inside its likely range {low:g}-{high:g}")
    return [_f("contract-budget", m, "See schema/core/contract.toml for the shape.", path=src) for m in out]


def _allocation_problems(c: Contract, src: str | None) -> list[Finding]:
    """contract-allocation: contraction and convergence needs a year after the base year to converge by, and the
    market must be a region (one without parts, as World in the core contract, has no burden-sharing rows)."""
    a = c.allocation
    out: list[str] = []
    if a.convergence_year <= c.base_year:
        out.append(f"[allocation] convergence_year {a.convergence_year} must be after the base year {c.base_year}")
    if a.region not in c.regions:
        out.append(f"[allocation] region {a.region!r} is not a region of the contract")
    hint = "Give e.g. [allocation] convergence_year = 2050 (regions: the contract's regions.toml)."
    return [_f("contract-allocation", m, hint, path=src) for m in out]


def advice(contract: Contract) -> list[Finding]:
    """Warnings about a usable contract that will not compute what it seems to ask for; `contract lint` prints
    them but passes (unlike `lint`, they never stop a command).

    allocation-no-parts: the `[allocation] region` has no parts among the contract's regions, so no region trades
    and no burden-sharing row (allowance, permits_sold, transfer, cost_share ...) is computed."""
    a = contract.allocation
    market = contract.regions.get(a.region)
    if market is None or any(p in contract.regions for p in market.parts):
        return []  # an unknown market region is contract-allocation's error
    return [
        Finding(
            "allocation-no-parts",
            "warning",
            path=contract.sources[-1] if contract.sources else None,
            message=f"[allocation] region {a.region!r} has no parts among the contract's regions: no burden-sharing "
            "or cost-share indicators will be computed",
            hint=f"List the regions that trade as the parts of {a.region} in regions.toml, or set [allocation] region "
            "to a region that has parts.",
        )
    ]


def _cache_dir() -> Path:
    return Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "milepost"


def lint_once(contract: Contract) -> list[Finding]:
    """`lint`, remembered per contract hash and milepost version once it passed: linting parses every unit with
    pint, which costs more start-up time than checking a small file. Failures are never cached."""
    from milepost.validate import __version__

    # the rule ids stand for the lint's own version: a release that adds a contract rule lints every contract again
    rules = hashlib.sha256(" ".join(sorted(RULES)).encode()).hexdigest()[:8]
    marker = _cache_dir() / f"contract-ok-{contract.hash[:32]}-{__version__}-{rules}"
    if marker.exists():
        return []
    problems = lint(contract)
    if not problems:
        try:
            marker.parent.mkdir(parents=True, exist_ok=True)
            marker.touch()
        except OSError:
            pass  # a read-only home only costs the lint again next time
    return problems
