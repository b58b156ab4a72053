"""Stored indicators computed under older conventions: tell readers, and recompute them on the next ingest.

A migration that changes what an indicator means puts the key `indicators_outdated` into `meta` (only where
indicators are stored). Readers (exports, the dashboard) say so; the next `milepost ingest` recomputes every
stored indicator with the contract it was given and removes the key, inside its own write. Recomputing needs the
contract (which variables get which kinds, and in which unit), which a migration, run by any writer, does not have.

What is recomputed: every accepted version, current or not. The current versions are computed together, each
against the current version of its reference (the rule of a normal ingest). An older version is computed with the
rows of its own submission, against the reference scenario of that submission if it holds one, else against the
current version of the reference.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import duckdb

from milepost.validate.sql import identifier
from milepost.validate.store.database import schema_version

OUTDATED_KEY = "indicators_outdated"
_DATA = "model, scenario, region, variable, unit, year, value"
_TABLES = ("recompute_current", "recompute_history")
_GAP_TABLES = ("recompute_current_gaps", "recompute_history_gaps")


def outdated_reason(con: duckdb.DuckDBPyConnection, catalog: str | None = None) -> str | None:
    """Why the stored indicators do not follow this milepost's conventions, or None when they do.

    Either the database was written by an older milepost and not migrated yet, or it was migrated and the
    indicators wait for the next ingest.
    """
    from milepost.validate.store.database import latest_version

    prefix = f"{identifier(catalog)}." if catalog else ""
    version, latest = schema_version(con, catalog), latest_version()
    if version < latest:
        return (
            f"the database has schema version {version} (this milepost writes {latest}): its indicators follow "
            "older conventions until the next `milepost ingest` migrates it and recomputes them"
        )
    try:
        rows = con.execute(f"SELECT value FROM {prefix}meta WHERE key = ?", [OUTDATED_KEY]).fetchall()  # noqa: S608 - names from the code; values bound as parameters
    except duckdb.CatalogException:
        return None
    if not rows:
        return None
    return f"the stored indicators were {rows[0][0]}; the next `milepost ingest` recomputes them"


def is_outdated(con: duckdb.DuckDBPyConnection, catalog: str) -> bool:
    """True when the (migrated) database `catalog` waits for its indicators to be recomputed."""
    rows = con.execute(f"SELECT count(*) FROM {identifier(catalog)}.meta WHERE key = ?", [OUTDATED_KEY]).fetchall()  # noqa: S608 - names from the code; values bound as parameters
    return bool(rows[0][0])


def _bases(con: duckdb.DuckDBPyConnection, catalog: str) -> tuple[str, ...]:
    """The bases with stored rows: raw always; harmonised once `milepost ingest --harmonise` stored some."""
    c = identifier(catalog)
    harmonised = con.execute(f"SELECT EXISTS (SELECT 1 FROM {c}.harmonisation)").fetchall()[0][0]  # noqa: S608 - names from the code; values bound as parameters
    return ("raw", "harmonised") if harmonised else ("raw",)


def prepare(
    con: duckdb.DuckDBPyConnection, contract: Any, catalog: str, on_step: Callable[[str], None] | None = None
) -> int:
    """Compute every stored indicator anew into TEMP tables (before the write's transaction); returns the rows.

    Each basis (raw, harmonised) is computed from the rows of its own basis only. Raises IndicatorDataError or
    IndicatorSpecError as `compute_indicators` does.
    """
    from milepost.validate.store.indicators import COLUMNS, GAP_COLUMNS

    if on_step is not None:
        on_step("recomputing the stored indicators")
    columns = ", ".join(name for name, _ in COLUMNS)
    for tables, spec in ((_TABLES, COLUMNS), (_GAP_TABLES, GAP_COLUMNS)):
        typed = ", ".join(f"{name} {sql_type}" for name, sql_type in spec)
        for table in tables:
            con.execute(f"CREATE OR REPLACE TEMP TABLE {table} (submission_id INTEGER, {typed}, basis VARCHAR)")
    for basis in _bases(con, catalog):
        _prepare_basis(con, contract, catalog, basis, columns)
    for leftover in ("recompute_computed", "recompute_computed_gaps", "recompute_data", "recompute_scenarios"):
        con.execute(f"DROP TABLE IF EXISTS temp.main.{leftover}")
    counts = [con.execute(f"SELECT count(*) FROM temp.main.{t}").fetchall()[0][0] for t in _TABLES]  # noqa: S608 - names from the code; values bound as parameters
    return int(sum(counts))


def _prepare_basis(con: duckdb.DuckDBPyConnection, contract: Any, catalog: str, basis: str, columns: str) -> None:
    from milepost.validate.store.indicators import GAP_COLUMNS, compute_indicators

    c = identifier(catalog)
    b = "'raw'" if basis == "raw" else "'harmonised'"
    current = f"(SELECT * FROM {c}.current_data_by_basis WHERE basis = {b})"  # noqa: S608 - names from the code; values bound as parameters
    con.execute(f"CREATE OR REPLACE TEMP VIEW recompute_current_data AS SELECT {_DATA} FROM {current}")  # noqa: S608 - names from the code; values bound as parameters
    con.execute(
        "CREATE OR REPLACE TEMP VIEW recompute_current_scenarios AS SELECT model, scenario, reference"  # noqa: S608 - names from the code; values bound as parameters
        f" FROM {c}.current_scenarios"
    )
    compute_indicators(con, contract, "recompute_current_data", "recompute_current_scenarios", "recompute_computed")
    con.execute("DROP VIEW temp.main.recompute_current_data")
    con.execute("DROP VIEW temp.main.recompute_current_scenarios")
    gap_columns = ", ".join(name for name, _ in GAP_COLUMNS)
    for suffix, cols in (("", columns), ("_gaps", gap_columns)):
        con.execute(
            f"INSERT INTO temp.main.recompute_current{suffix} SELECT v.submission_id, {cols}, {b}"  # noqa: S608 - names from the code; values bound as parameters
            f" FROM temp.main.recompute_computed{suffix} JOIN {c}.current_versions v USING (model, scenario)"
        )
    # Older versions, one submission at a time: within one submission every (model, scenario) is unique.
    older = [
        int(r[0])
        for r in con.execute(
            f"SELECT DISTINCT s.submission_id FROM {c}.scenarios s JOIN {c}.submissions b ON b.id = s.submission_id"  # noqa: S608 - names from the code; values bound as parameters
            f" WHERE b.status <> 'rejected' AND NOT EXISTS (SELECT 1 FROM {c}.current_versions v"
            " WHERE v.submission_id = s.submission_id AND v.model = s.model AND v.scenario = s.scenario)"
            f" AND EXISTS (SELECT 1 FROM {c}.data d WHERE d.submission_id = s.submission_id AND d.basis = {b})"
            " ORDER BY 1"
        ).fetchall()
    ]
    for sid in older:
        con.execute(
            f"CREATE OR REPLACE TEMP TABLE recompute_data AS SELECT {_DATA} FROM {c}.data"  # noqa: S608 - names from the code; values bound as parameters
            f" WHERE submission_id = $sid AND basis = {b}"
            f" UNION ALL SELECT {_DATA} FROM {current} d WHERE EXISTS (SELECT 1 FROM {c}.scenarios s"
            " WHERE s.submission_id = $sid AND s.model = d.model AND s.reference = d.scenario)"
            f" AND NOT EXISTS (SELECT 1 FROM {c}.scenarios s"
            " WHERE s.submission_id = $sid AND s.model = d.model AND s.scenario = d.scenario)",
            {"sid": sid},
        )
        con.execute(
            "CREATE OR REPLACE TEMP TABLE recompute_scenarios AS SELECT model, scenario, reference"  # noqa: S608 - names from the code; values bound as parameters
            f" FROM {c}.scenarios WHERE submission_id = ?",
            [sid],
        )
        compute_indicators(con, contract, "recompute_data", "recompute_scenarios", "recompute_computed")
        for suffix, cols in (("", columns), ("_gaps", gap_columns)):
            con.execute(
                f"INSERT INTO temp.main.recompute_history{suffix} SELECT $sid, {cols}, {b}"  # noqa: S608 - names from the code; values bound as parameters
                f" FROM temp.main.recompute_computed{suffix} i"
                f" WHERE EXISTS (SELECT 1 FROM {c}.scenarios s WHERE s.submission_id = $sid AND s.model = i.model"
                f" AND s.scenario = i.scenario) AND NOT EXISTS (SELECT 1 FROM {c}.current_versions v"
                " WHERE v.submission_id = $sid AND v.model = i.model AND v.scenario = i.scenario)",
                {"sid": sid},
            )


def apply(con: duckdb.DuckDBPyConnection, catalog: str) -> None:
    """Inside the write's transaction: replace every stored indicator with the recomputed rows, clear the marker."""
    from milepost.validate.store.indicators import COLUMNS, GAP_COLUMNS

    c = identifier(catalog)
    for target, tables, spec in (("indicators", _TABLES, COLUMNS), ("indicator_gaps", _GAP_TABLES, GAP_COLUMNS)):
        columns = ", ".join(["submission_id", *(name for name, _ in spec), "basis"])
        con.execute(f"DELETE FROM {c}.{target}")  # noqa: S608 - names from the code; values bound as parameters
        for table in tables:
            con.execute(f"INSERT INTO {c}.{target} ({columns}) SELECT {columns} FROM temp.main.{table}")  # noqa: S608 - names from the code; values bound as parameters
    con.execute(f"DELETE FROM {c}.meta WHERE key = ?", [OUTDATED_KEY])  # noqa: S608 - names from the code; values bound as parameters


def recompute_stored(
    db: Path, contract: Any, *, timeout: float | None = None, on_wait: Callable[[str], None] | None = None
) -> int:
    """Recompute the stored indicators of `db` in a write of their own if they are outdated; returns the rows (0 if
    nothing was due). Used when an ingest brings files that are stored already: it still brings the contract."""
    from milepost.validate.errors import LoadError
    from milepost.validate.store.database import NEW, Writer, connect_memory, open_reader
    from milepost.validate.store.indicators import IndicatorDataError, IndicatorSpecError

    with open_reader(db) as reader:
        if outdated_reason(reader.con, "db") is None:
            return 0
    con = connect_memory()
    try:
        with Writer(db, con, timeout=timeout, on_wait=on_wait) as w:
            if not is_outdated(con, NEW):  # another process recomputed them meanwhile (or there were none)
                return 0
            try:
                n = prepare(con, contract, NEW)
            except (IndicatorDataError, IndicatorSpecError) as e:
                raise LoadError(f"the stored indicators could not be recomputed: {e}") from None
            w.begin()
            apply(con, NEW)
        return n
    finally:
        con.close()


def drop(con: duckdb.DuckDBPyConnection) -> None:
    """Remove the TEMP tables of `prepare`."""
    for table in (*_TABLES, *_GAP_TABLES):
        con.execute(f"DROP TABLE IF EXISTS temp.main.{table}")
