"""Benchmark: the Screen and Rates page queries on a 3,000-scenario database, as a ratio to a full indicators scan."""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from milepost.dashboard import queries
from milepost.validate.bench.timing import Step
from milepost.validate.store.database import Reader

N_SCENARIOS = 3000
REPEATS = 7
LIMIT = 3.0


def build(workdir: Path, n_scenarios: int = N_SCENARIOS) -> Path:
    """The benchmark database: the generator's many-scenario ensemble, ingested per model (reused while its
    schema is current)."""
    from milepost.example_db.generate import CONTRACT_DIR, write_many_scenarios
    from milepost.validate.bench.ingest import current
    from milepost.validate.store.ingest import ingest

    db = Path(workdir) / f"dashboard-bench-{n_scenarios}.duckdb"
    if current(db):
        return db
    db.unlink(missing_ok=True)  # of an older schema: built again, as a fresh clone would
    paths = write_many_scenarios(Path(workdir) / f"many-{n_scenarios}", n_scenarios)
    partial = db.with_name(db.name + ".building")
    partial.unlink(missing_ok=True)
    for data, scenarios in zip(paths[::2], paths[1::2], strict=True):
        result = ingest([data, scenarios], partial, CONTRACT_DIR)
        if result.status != "accepted":
            raise RuntimeError(f"bench input {data.name} was not accepted: {result.reason}")
    partial.rename(db)
    return db


def _timed(fn: Callable[[], Any]) -> float:
    t = time.perf_counter()
    fn()
    return time.perf_counter() - t


def _ratio(fn: Callable[[], Any], floor: Callable[[], Any], repeats: int = REPEATS) -> tuple[float, float]:
    """Median seconds of `fn` and of `floor`, timed alternately so that load from other processes hits both."""
    fn(), floor()  # warm-up: first touch of the file's pages
    pairs = [(_timed(fn), _timed(floor)) for _ in range(repeats)]
    return statistics.median(p[0] for p in pairs), statistics.median(p[1] for p in pairs)


def _on_cursor(reader: Reader, fn: Callable[..., Any], *args: Any) -> Any:
    cur = reader.cursor()
    try:
        return fn(cur, *args)
    finally:
        cur.close()


def run(workdir: Path, full: bool = False, repeat: int = 3, rows: int | None = None) -> list[Step]:
    """Time what the Screen and Rates pages query per interaction (default filters), and the per-version `choices`,
    each as a ratio to a full scan of the indicators table (in this process, alternating; medians)."""
    db = build(Path(workdir))
    con = Reader(db)  # the dashboard's own reader (dashboard/connection.py caches one per file version)
    try:
        ch = _on_cursor(con, queries.choices)
        sel = queries.Selection()
        later = [y for y in ch.milestones if y > sel.year]
        n_scen = len(_on_cursor(con, queries.selected, queries.Selection(include_references=True)))
        n_ind = _on_cursor(con, queries.full_scan)[0]

        # the pages cache `choices` once per file version; it is timed on its own
        def screen() -> None:
            _on_cursor(con, queries.band_edges, sel)
            _on_cursor(con, queries.screen_table, sel, ch.base_year, later[0] if later else None, ch.attributes)
            _on_cursor(con, queries.variable_unit, sel.variable)

        def rates() -> None:
            periods = _on_cursor(con, queries.rate_periods, sel.variable, sel.region)
            period = next(p for p in periods if p[0] == sel.year)
            _on_cursor(con, queries.band_edges, sel)
            queries.summarise(_on_cursor(con, queries.rates, sel, *period), ["kind", "band"])

        def cold(fn: Callable[[], None]) -> Callable[[], None]:
            def run() -> None:
                queries.clear_cache()
                fn()

            return run

        steps = []
        for name, fn in (
            ("dashboard: Screen queries", screen),
            ("dashboard: Rates queries", rates),
            ("dashboard: Screen queries, first read of the variable", cold(screen)),
            ("dashboard: Rates queries, first read of the variable", cold(rates)),
            ("dashboard: choices (once per database version)", lambda: _on_cursor(con, queries.choices)),
        ):
            seconds, floor = _ratio(fn, lambda: _on_cursor(con, queries.full_scan))
            limit = None if "choices" in name or "first" in name else LIMIT
            steps.append(
                Step(
                    step=f"{name}, {n_scen:,} scenarios",
                    rows=n_ind,
                    seconds=seconds,
                    floor_seconds=floor,
                    floor="count(*), sum(value) over the indicators table, same connection",
                    target=f"≤ {LIMIT:g}x" if limit else "-",
                    met=(seconds / floor <= limit) if limit else None,
                    ratio=seconds / floor,
                    detail={"scenarios": n_scen, "repeats": REPEATS},
                )
            )
        return steps
    finally:
        con.close()


if __name__ == "__main__":
    import sys

    for row in run(Path(sys.argv[1] if len(sys.argv) > 1 else ".")):
        print(row)
