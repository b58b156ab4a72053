"""Names: regions and variables the contract does not know, with a did-you-mean hint."""

from __future__ import annotations

import difflib
from collections.abc import Callable

from milepost.validate.checks.context import Context
from milepost.validate.sql import literal

_ROW = "o.path, o.sheet, o.line, o.model, o.scenario, o.region, o.variable, o.unit, o.year"


def suggest(name: str, known: list[str]) -> str | None:
    """The closest known name: same spelling but for case and spaces first, else difflib's best close match."""
    squash = {k.lower().replace(" ", "").replace("_", "."): k for k in known}
    exact = squash.get(name.lower().replace(" ", "").replace("_", "."))
    if exact:
        return exact
    close = difflib.get_close_matches(name, known, n=1, cutoff=0.75)
    if not close:
        close = difflib.get_close_matches(name.lower(), [k.lower() for k in known], n=1, cutoff=0.75)
        close = [next(k for k in known if k.lower() == close[0])] if close else []
    return close[0] if close else None


def _hints_table(
    ctx: Context, table: str, column: str, known: list[str], is_known: Callable[[str], bool]
) -> tuple[int, int]:
    """Fill `table` (name, suggestion) with the unknown names of `column`; (unknown, distinct names seen)."""
    names = [
        r[0]
        for r in ctx.con.execute(
            f"SELECT DISTINCT {column} FROM combos WHERE {column} IS NOT NULL AND trim({column}) <> ''"  # noqa: S608 - names from the code; contract text via validate.sql
        ).fetchall()
    ]
    unknown = [n for n in names if not is_known(n)]
    rows = [(n, suggest(n, known)) for n in unknown]
    ctx.con.execute(f"CREATE OR REPLACE TEMP TABLE {table} (name VARCHAR, suggestion VARCHAR)")
    if rows:
        ctx.con.executemany(f"INSERT INTO {table} VALUES (?, ?)", rows)  # noqa: S608 - names from the code; contract text via validate.sql
    return len(rows), len(names)


def _other_contract(ctx: Context, what: str, unknown: int, seen: int) -> str:
    """A hint prefix (SQL literal) asking whether another contract was meant, when most names are unknown to it."""
    if seen < 2 or unknown * 2 <= seen:
        return "''"
    return literal(
        f"{unknown} of the {seen} {what} names are unknown to the contract {ctx.contract.name}: was another "
        "contract meant (--contract FOLDER)? "
    )


def check_unknown_region(ctx: Context) -> list[str]:
    """unknown-region: the region is neither a contract region nor (where allowed) an ISO 3166-1 alpha-3 code."""
    c = ctx.contract
    unknown, seen = _hints_table(ctx, "unknown_regions", "region", list(c.regions), c.is_region)
    if not unknown:
        return []
    prefix = _other_contract(ctx, "region", unknown, seen)
    allowed = sorted(c.regions)
    listing = ", ".join(allowed[:8]) + (" …" if len(allowed) > 8 else "")
    if c.countries:
        listing += " or an ISO 3166-1 alpha-3 country code"
    return [
        "SELECT 'unknown-region' AS rule, 'region' AS column_name, "  # noqa: S608 - names from the code; contract text via validate.sql
        f"{_ROW}, o.region AS value, {literal(listing)} AS expected, "
        "'region ' || o.region || ' is not in the contract' AS message, "
        f"{prefix} || CASE WHEN h.suggestion IS NOT NULL THEN 'Did you mean ' || h.suggestion || '?' "
        f"ELSE 'Use one of: ' || {literal(listing)} || '.' END AS hint "
        "FROM obs o JOIN unknown_regions h ON o.region = h.name"
    ]


def check_unknown_variable(ctx: Context) -> list[str]:
    """unknown-variable: the variable name is not in the contract."""
    known = list(ctx.contract.variables)
    unknown, seen = _hints_table(ctx, "unknown_variables", "variable", known, lambda n: n in ctx.contract.variables)
    if not unknown:
        return []
    prefix = _other_contract(ctx, "variable", unknown, seen)
    return [
        f"SELECT 'unknown-variable' AS rule, 'variable' AS column_name, {_ROW}, o.variable AS value, "  # noqa: S608 - names from the code; contract text via validate.sql
        "coalesce(h.suggestion, 'a contract variable') AS expected, "
        "'variable ' || o.variable || ' is not in the contract' AS message, "
        f"{prefix} || CASE WHEN h.suggestion IS NOT NULL THEN 'Did you mean ' || h.suggestion || '?' "
        "ELSE 'See `milepost contract show` for the variable names.' END AS hint "
        "FROM obs o JOIN unknown_variables h ON o.variable = h.name"
    ]
