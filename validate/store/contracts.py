"""Which contract a database was loaded with: its name as stored, and the bundled contract folder of that name.

The database keeps each submission's contract name and hash, not the contract itself, and in `meta` the folder
of the contract its newest accepted submission was checked with (`contract_path`). Commands that need the
contract again (`milepost ingest` without --contract, the pairing rule of `milepost export --what pairs`, the
dashboard's reference values) take a folder from the user, or else that folder, or else the bundled contract
(the demo's or the core one) whose name matches.
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


def database_contract(db: Path) -> tuple[str | None, Path | None]:
    """(name, folder) of the contract of a database's newest accepted submission; the folder is the one recorded
    at ingest, else the bundled contract of that name, else None. (None, None) without such a submission."""
    from milepost.validate.store.database import Reader

    if not db.exists():
        return None, None
    with Reader(db, check_version=False) as reader:
        if reader.version == 0:
            return None, None
        name = stored_contract_name(reader.con)
        rows = reader.con.execute("SELECT value FROM meta WHERE key = 'contract_path'").fetchall()
    if name is None:
        return None, None
    if rows and (Path(rows[0][0]) / "contract.toml").exists():
        try:
            if load(rows[0][0]).name == name:
                return name, Path(rows[0][0])
        except ContractError:
            pass
    bundled = find_bundled(name)
    return name, (Path(bundled.sources[-1]) if bundled is not None else None)


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
