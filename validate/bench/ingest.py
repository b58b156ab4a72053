"""`milepost ingest` at assessment scale: into a new database against DuckDB's own load of the same CSV, and a
small submission into a large database against the same submission into a database a tenth of the size.

Every run is a fresh process on a fresh copy of its database (the copy is made before the clock starts).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

from milepost.validate.bench.files import clean_submission, incremental_submission
from milepost.validate.bench.timing import (
    LOAD_FLOOR,
    LOAD_FLOOR_LABEL,
    Step,
    alternate,
    milepost,
    python,
    ratio_step,
    run_once,
)

DEMO_CONTRACT = Path(__file__).resolve().parents[2] / "example_db" / "contract"
NEW_DB_LIMIT = 2.0
INCREMENTAL_LIMIT = 1.5


def _remove(db: Path) -> None:
    for p in (db, db.with_name(db.name + ".wal"), db.with_name(db.name + ".lock")):
        p.unlink(missing_ok=True)


def _ingest_cmd(files: list[Path], db: Path) -> list[str]:
    return milepost("ingest", *map(str, files), "--db", str(db), "-c", str(DEMO_CONTRACT), "--format", "json")


def _payload(path: Path) -> dict[str, Any]:
    payload: dict[str, Any] = json.loads(path.read_text(encoding="utf-8"))
    if payload["status"] != "accepted":
        raise RuntimeError(f"benchmark ingest was {payload['status']}: {payload.get('reason')}")
    return payload


def new_database(workdir: Path, rows: int, repeat: int) -> Step:
    """A clean submission into a new database file, against CREATE TABLE AS read_csv into a new file."""
    data, scen = clean_submission(workdir, rows)
    db, plain, out = workdir / "ingest-new.duckdb", workdir / "load-floor.duckdb", workdir / "ingest-new.json"
    jobs, floors = alternate(
        _ingest_cmd([data, scen], db),
        python("-c", LOAD_FLOOR, str(data), str(plain)),
        repeat,
        before_job=lambda: _remove(db),
        before_floor=lambda: _remove(plain),
        job_stdout=out,
    )
    payload = _payload(out)
    return ratio_step(
        "ingest, clean, into a new database",
        int(payload["rows"]),
        jobs,
        floors,
        LOAD_FLOOR_LABEL,
        NEW_DB_LIMIT,
        detail={"stages": payload["timings"], "db_bytes": db.stat().st_size},
    )


def _stored_rows(db: Path) -> int:
    import duckdb

    with duckdb.connect(str(db), read_only=True) as con:
        return int(con.execute("SELECT count(*) FROM data").fetchall()[0][0])


def current(db: Path) -> bool:
    """Whether a kept database is of this program's schema: an older one would be migrated, and its indicators
    recomputed, by the timed ingest."""
    import duckdb

    from milepost.validate.store.database import latest_version, schema_version

    if not db.exists():
        return False
    with duckdb.connect(str(db), read_only=True) as con:
        return schema_version(con) == latest_version()


def _base(workdir: Path, rows: int) -> Path:
    """A database holding one clean submission of `rows` rows (made once, kept while its schema is current)."""
    db = workdir / f"base-{rows}.duckdb"
    if not current(db):
        _remove(db)
        data, scen = clean_submission(workdir, rows)
        partial = workdir / f"base-{rows}.building.duckdb"
        _remove(partial)
        run_once(_ingest_cmd([data, scen], partial))
        partial.rename(db)
    return db


def incremental(workdir: Path, small_rows: int, large_rows: int, repeat: int) -> Step:
    """About 10k rows into a copy of the large database, against the same into a copy of the small one.
    At 10M rows the large one is the dashboard bench's 3,000-scenario database (10.4M data rows, four
    submissions), which one submission of that size would take minutes and gigabytes to build."""
    small = _base(workdir, small_rows)
    if large_rows >= 10_000_000:
        from milepost.validate.bench.dashboard import build

        large = build(workdir)
    else:
        large = _base(workdir, large_rows)
    large_rows = _stored_rows(large)
    sub = incremental_submission(workdir, clean_submission(workdir, small_rows)[0])
    into_small, into_large = workdir / "incremental-small.duckdb", workdir / "incremental-large.duckdb"
    out_small, out_large = workdir / "incremental-small.json", workdir / "incremental-large.json"

    def fresh(src: Path, dst: Path) -> None:
        _remove(dst)
        shutil.copyfile(src, dst)

    jobs, floors = alternate(
        _ingest_cmd([sub], into_large),
        _ingest_cmd([sub], into_small),
        repeat,
        before_job=lambda: fresh(large, into_large),
        before_floor=lambda: fresh(small, into_small),
        job_stdout=out_large,
    )
    run_once(_ingest_cmd([sub], into_small), before=lambda: fresh(small, into_small), stdout=out_small)
    big, little = _payload(out_large), _payload(out_small)
    return ratio_step(
        f"ingest {big['rows']:,} rows into a {large_rows:,}-row database",
        int(big["rows"]),
        jobs,
        floors,
        f"the same into a {_stored_rows(small):,}-row database",
        INCREMENTAL_LIMIT,
        detail={
            "stages_large": big["timings"],
            "stages_small": little["timings"],
            "db_bytes_large": large.stat().st_size,
            "db_bytes_small": small.stat().st_size,
            "db_rows_large": _stored_rows(large),
            "db_rows_small": _stored_rows(small),
        },
    )


def run(
    workdir: Path,
    full: bool = False,
    repeat: int = 3,
    rows: int | None = None,
) -> list[Step]:
    """2M rows into a new database; 10k rows into 2M against 200k (with `full`: into 10M against 1M).
    `rows`: a quick trial, `rows` into a new database and the small submission into `2 * rows` against `rows`."""
    small, large = (rows, 2 * rows) if rows else ((1_000_000, 10_000_000) if full else (200_000, 2_000_000))
    return [new_database(workdir, rows or 2_000_000, repeat), incremental(workdir, small, large, repeat)]
