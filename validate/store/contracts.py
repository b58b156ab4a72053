"""Which contract a database was loaded with: its name as stored, and the bundled contract folder of that name.

The database keeps each submission's contract name and hash, not the contract itself. Commands that need the
contract again (the pairing rule of `milepost export --what pairs`, the dashboard's reference values) take a
folder from the user, or else the bundled contract (the demo's or the core one) whose name matches.
"""

from __future__ import annotations

from pathlib import Path

import duckdb

from milepost.schema.contract import CORE_DIR, Contract, ContractError, load


def bundled_dirs() -> tuple[Path, ...]:
    """The contract folders shipped with milepost: the demo intercomparison's, then the core contract."""
    import milepost.example_db

    return (Path(milepost.example_db.__file__).parent / "contract", CORE_DIR)


def stored_contract_name(con: duckdb.DuckDBPyConnection) -> str | None:
    """The contract name of the newest accepted submission (None for an empty database)."""
    rows = con.execute(
        "SELECT contract_name FROM submissions WHERE status = 'accepted' ORDER BY submitted_at DESC, id DESC LIMIT 1"
    ).fetchall()
    return rows[0][0] if rows else None


def find_bundled(name: str | None) -> Contract | None:
    """The bundled contract called `name` (any bundled one, the demo's first, when `name` is None), else None."""
    for folder in bundled_dirs():
        if not (folder / "contract.toml").exists():
            continue
        try:
            c = load(folder)
        except ContractError:
            continue
        if name is None or c.name == name:
            return c
    return None
