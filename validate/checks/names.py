"""Names: regions and variables the contract does not know (with a did-you-mean hint), and names holding
control characters."""

from __future__ import annotations

import difflib

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


def _hints_table(ctx: Context, table: str, column: str, known_sql: str, known: list[str]) -> tuple[int, int]:
    """`table` (name, suggestion): the distinct names of `column` that `known_sql` (a one-column SELECT of the
    contract's names) does not hold; returns (unknown names, distinct names seen). Only the first `hinted_names`
    get a suggestion, so 300,000 made-up names cost one anti-join, not 300,000 fuzzy searches."""
    con = ctx.con
    con.execute(
        f"CREATE OR REPLACE TEMP TABLE {table} AS SELECT value AS name, NULL::VARCHAR AS suggestion "  # noqa: S608 - names from the code; contract text via validate.sql
        f"FROM combo_values WHERE col = {literal(column)} AND value IS NOT NULL AND trim(value) <> '' "
        f"AND value NOT IN ({known_sql})"
    )
    sample = [
        r[0]
        for r in con.execute(
            f"SELECT name FROM {table} ORDER BY name LIMIT ?",  # noqa: S608 - names from the code
            [ctx.contract.limits.hinted_names],
        ).fetchall()
    ]
    hints = {n: h for n in sample if (h := suggest(n, known)) is not None}
    if hints:
        # one statement for all of them: the two lists bound as parameters and unnested side by side
        con.execute(
            f"UPDATE {table} AS t SET suggestion = h.suggestion FROM (SELECT unnest(?::VARCHAR[]) AS name, "  # noqa: S608 - names from the code; names and hints bound
            "unnest(?::VARCHAR[]) AS suggestion) AS h WHERE t.name = h.name",
            [list(hints), list(hints.values())],
        )
    unknown = con.execute(f"SELECT count(*) FROM {table}").fetchall()[0][0]  # noqa: S608 - names from the code
    if not unknown:
        return 0, 0
    seen = con.execute(
        "SELECT count(*) FROM combo_values WHERE col = ? AND value IS NOT NULL AND trim(value) <> ''", [column]
    ).fetchall()[0][0]
    return int(unknown), int(seen)


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
    unknown, seen = _hints_table(ctx, "unknown_regions", "region", "SELECT region FROM c_regions", list(c.regions))
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
    unknown, seen = _hints_table(ctx, "unknown_variables", "variable", "SELECT variable FROM c_variables", known)
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


# C0 controls (tab, CR, LF and NUL among them), DEL, C1 controls, and the byte-order mark / zero-width no-break
# space: invisible or layout-breaking in a name, so two names that print alike can differ.
_CONTROL = "[\\x00-\\x1f\\x7f-\\x9f\\x{feff}]"


def check_control_characters(ctx: Context) -> list[str]:
    """control-character: a key cell (model, scenario, region, variable, unit) holding a control character."""
    cols = ("model", "scenario", "region", "variable", "unit")
    found = ctx.con.execute(
        f"SELECT list(DISTINCT col) FROM combo_values WHERE regexp_matches(value, {literal(_CONTROL)})"  # noqa: S608 - names from the code
    ).fetchall()[0][0]
    if not found:
        return []
    return [
        f"SELECT 'control-character' AS rule, {literal(c)} AS column_name, {_ROW}, "  # noqa: S608 - names from the code; contract text via validate.sql
        f"o.{c} AS value, 'a name of printable characters' AS expected, "
        f"'{c} holds a control character (code ' || "
        f"CAST(unicode(regexp_extract(o.{c}, {literal(_CONTROL)})) AS VARCHAR) || ')' AS message, "
        "'Remove invisible characters (tabs, line breaks, NUL, byte-order marks) from names: they make "
        "names that look alike but differ.' AS hint "
        f"FROM obs o SEMI JOIN (SELECT src, {c} FROM combos WHERE regexp_matches({c}, {literal(_CONTROL)})) k "
        f"ON o.src = k.src AND o.{c} = k.{c}"
        for c in cols
        if c in found  # only the columns holding one: each other query would scan every row for nothing
    ]
