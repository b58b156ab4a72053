"""Which method and convergence year each variable gets, and the hierarchy levels the rebuild walks.

Everything here runs over the contract (variables, regions), never over data rows: it yields the two small
tables the harmonisation SQL joins against.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass

from milepost.schema.contract import HARMONISE_METHODS, HARMONISE_OFF, Contract
from milepost.validate.errors import UsageError

RATIO_METHODS = ("ratio", "converging-ratio")
CONVERGING_METHODS = ("converging-ratio", "converging-offset")


@dataclass(frozen=True)
class Choice:
    """The method asked for one variable and, for the converging methods, the year it reaches the model's values."""

    variable: str
    method: str
    converge_year: int


def offset_counterpart(method: str) -> str:
    """The offset method used where a ratio is undefined or would flip the sign: same convergence, other formula."""
    return method.replace("ratio", "offset")


def check_overrides(contract: Contract, method: str | None, converge_year: int | None) -> None:
    """Refuse a method or convergence year given on the command line that the formulas cannot use."""
    if method is not None and method not in HARMONISE_METHODS:
        raise UsageError(f"method {method!r} is not one of {', '.join(HARMONISE_METHODS)}")
    if converge_year is not None and converge_year <= contract.base_year:
        raise UsageError(
            f"the convergence year {converge_year} must come after the base year {contract.base_year}: "
            "the converging methods move from the reference at the base year to the model's own values"
        )


def choices(contract: Contract, method: str | None = None, converge_year: int | None = None) -> list[Choice]:
    """Every harmonised variable with its method and convergence year.

    A variable is harmonised when its own `harmonise` names a method, or when a `[harmonise] variables` pattern
    matches it and it does not say "none". `method` and `converge_year` (the command-line options) replace the
    contract's choice for every harmonised variable; they never add a variable the contract keeps out.
    """
    check_overrides(contract, method, converge_year)
    h = contract.harmonise
    out = []
    for v in contract.variables.values():
        if v.harmonise == HARMONISE_OFF:
            continue
        if v.harmonise is None and not any(fnmatch.fnmatchcase(v.name, p) for p in h.variables):
            continue
        out.append(
            Choice(
                v.name,
                method or v.harmonise or h.method,
                converge_year or v.converge_year or h.converge_year,
            )
        )
    return out


def heights(graph: dict[str, tuple[str, ...]]) -> dict[str, int]:
    """How far each node is above its deepest descendant (0 for a node without parts).

    A part always sits lower than its total, in variables and in regions alike, so a series' level (the height of
    its variable plus that of its region) orders the rebuild: every part is final before its total is rebuilt.
    """
    memo: dict[str, int] = {}

    def height(node: str, path: frozenset[str]) -> int:
        if node in memo:
            return memo[node]
        if node in path:  # contract lint reports the cycle; here it only must not recurse forever
            return 0
        parts = graph.get(node, ())
        value = 1 + max(height(p, path | {node}) for p in parts) if parts else 0
        memo[node] = value
        return value

    for node in graph:
        height(node, frozenset())
    return memo


def variable_heights(contract: Contract) -> dict[str, int]:
    """The height of every contract variable in the tree of parts."""
    return heights({v.name: tuple(p.variable for p in v.parts) for v in contract.variables.values()})


def region_heights(contract: Contract) -> dict[str, int]:
    """The height of every contract region with parts (regions not listed, such as ISO codes, have height 0)."""
    return heights({r.name: r.parts for r in contract.regions.values()})
