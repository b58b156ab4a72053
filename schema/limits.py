"""How much a check run reads and keeps: the limits that bound memory and time whatever a file holds.

A contract may raise or lower any of them in a `[limits]` table of `contract.toml`; the defaults below are safe
for a machine with a few GiB of memory. Reaching a limit is a `limit-exceeded` finding (an error), never a crash:
the file is read up to the limit and the finding says which limit and how to raise it.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any

from milepost.validate.errors import ContractError


@dataclass(frozen=True)
class Limits:
    """Upper bounds of one check run; every field is a `[limits]` key of contract.toml."""

    # Rows of one data file. Bigger files are read up to here and rejected: the 2-million-row benchmark fits.
    max_rows: int = 5_000_000
    # Columns of a header: the long format has 7; wide exports with a column per year have about a hundred.
    max_columns: int = 1_000
    # Characters in one XLSX cell: Excel's own limit (32,767, from memory of the Excel specifications table).
    max_cell_chars: int = 32_767
    # Bytes of one CSV line (DuckDB's max_line_size): seven long-format cells never come near.
    max_line_bytes: int = 1 << 20
    # Bytes an XLSX may expand to (the sum of its parts once unzipped), and the part holding its shared texts.
    max_xlsx_bytes: int = 1 << 30
    max_shared_strings_bytes: int = 256 << 20
    # Findings stored per rule; beyond it they are only counted (reports and the database keep the first ones).
    findings_stored_per_rule: int = 10_000
    # Distinct unknown names that get a did-you-mean hint; the rest are still reported, without one.
    hinted_names: int = 2_000

    @classmethod
    def from_table(cls, table: Any, where: str) -> Limits:
        """The `[limits]` table of a contract: positive whole numbers for known keys, defaults for the rest."""
        if table is None:
            return cls()
        if not isinstance(table, dict):
            raise ContractError(f"{where}: [limits] must be a table")
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(table) - known)
        if unknown:
            raise ContractError(
                f"{where}: [limits] has unknown keys {', '.join(unknown)} (known: {', '.join(sorted(known))})"
            )
        for key, value in table.items():
            if isinstance(value, bool) or not isinstance(value, int) or value <= 0:
                raise ContractError(f"{where}: [limits] {key} must be a positive whole number, got {value!r}")
        return cls(**table)


__all__ = ["Limits"]
