"""SQL text for what cannot be a bound parameter: string literals, identifiers, and lists of literals.

Values from users (file names, sheet names, names and cells in the data, contract names) reach SQL only as bound
parameters (`con.execute(sql, [value])`) or through these functions. Parameters are the first choice; these are
for the places DuckDB takes no parameter: table and column names, ENUM types, `read_csv` options in a
CREATE TABLE AS, COPY targets, and constants inside views.
"""

from __future__ import annotations

from collections.abc import Iterable


def literal(text: str) -> str:
    """A SQL string literal: `o'hara` -> `'o''hara'`."""
    return "'" + str(text).replace("'", "''") + "'"


def literal_list(values: Iterable[str]) -> str:
    """A DuckDB list of string literals: `['a', 'b''c']`."""
    return "[" + ", ".join(literal(v) for v in values) + "]"


def identifier(name: str) -> str:
    """One SQL identifier in double quotes, whatever it holds (dots, spaces, quotes): `a"b` -> `"a""b"`."""
    return '"' + str(name).replace('"', '""') + '"'


def qualified(name: str) -> str:
    """A table name that may be qualified (`catalog.schema.table`): each dotted part quoted as an identifier."""
    parts = str(name).split(".")
    if not name or any(not part for part in parts):
        raise ValueError(f"not a table name: {name!r}")
    return ".".join(identifier(part) for part in parts)


def enum_type(values: Iterable[str]) -> str:
    """An ENUM type of the given labels, or VARCHAR when there are none (an ENUM cannot be empty)."""
    labels = [literal(v) for v in values]
    return f"ENUM({', '.join(labels)})" if labels else "VARCHAR"


__all__ = ["enum_type", "identifier", "literal", "literal_list", "qualified"]
