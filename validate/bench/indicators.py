"""Time `compute_indicators` on invented intercomparison-sized data: `python -m milepost.validate.bench.indicators`.

The data are made up in SQL (models M0.., scenarios S1.. each referring to scenario "ref", regions World, R1..), one
row per contract variable, region and year; values are smooth invented paths, some crossing zero.
"""

from __future__ import annotations

import argparse
import time

import duckdb

from milepost.schema.contract import Contract, load
from milepost.validate.store.indicators import compute_indicators


def make_data(
    con: duckdb.DuckDBPyConnection,
    contract: Contract,
    scenarios: int = 3000,
    regions: int = 6,
    years: tuple[int, ...] = tuple(range(2020, 2101, 5)),
    models: int = 10,
) -> int:
    """Create TEMP TABLEs `checked` and `checked_scenarios` of invented rows; returns the data row count."""
    names = list(contract.variables)
    units = [contract.variables[v].unit for v in names]
    per_model = max(1, scenarios // models)
    con.execute(
        "CREATE OR REPLACE TEMP TABLE checked AS"
        " SELECT 'M' || m AS model, CASE WHEN s = 0 THEN 'ref' ELSE 'S' || s END AS scenario,"
        # region 0 is World, so the kinds written for the carbon-budget region only are measured too
        " CASE WHEN r = 0 THEN 'World' ELSE 'R' || r END AS region,"
        " v.variable, v.unit, y::INTEGER AS year,"
        " (50 + (hash(m, s, r, v.variable) % 100)::DOUBLE) * (1 - (y - $base) / 60.0 * (s % 7) / 4.0) AS value"
        " FROM range($models) a(m), range($per_model) b(s), range($regions) c(r),"
        " (SELECT unnest($names::VARCHAR[]) AS variable, unnest($units::VARCHAR[]) AS unit) v,"
        " (SELECT unnest($years::INTEGER[]) AS y)",
        {
            "base": contract.base_year,
            "models": models,
            "per_model": per_model,
            "regions": regions,
            "names": names,
            "units": units,
            "years": list(years),
        },
    )
    con.execute(
        "CREATE OR REPLACE TEMP TABLE checked_scenarios AS SELECT DISTINCT model, scenario,"
        " CASE WHEN scenario = 'ref' THEN NULL ELSE 'ref' END AS reference FROM checked"
    )
    return int(con.execute("SELECT count(*) FROM checked").fetchall()[0][0])


def run(scenarios: int = 3000, regions: int = 6, contract: Contract | None = None) -> dict[str, float]:
    """Build the invented data in a fresh in-memory DuckDB, compute indicators, return rows and seconds.

    `cpu_seconds` is the process CPU time (all DuckDB threads): on a busy machine it shows the work, not the wait.
    """
    c = contract if contract is not None else load()
    con = duckdb.connect()
    try:
        con.execute("SET enable_progress_bar = false")
        rows = make_data(con, c, scenarios=scenarios, regions=regions)
        start, cpu = time.perf_counter(), time.process_time()
        out = compute_indicators(con, c)
        seconds, cpu_seconds = time.perf_counter() - start, time.process_time() - cpu
        threads = con.execute("SELECT current_setting('threads')").fetchall()[0][0]
    finally:
        con.close()
    return {
        "data_rows": rows,
        "indicator_rows": out,
        "seconds": seconds,
        "cpu_seconds": cpu_seconds,
        "threads": float(threads),
    }


def main() -> None:
    """Command-line entry: print the timing of one run."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scenarios", type=int, default=3000)
    parser.add_argument("--regions", type=int, default=6)
    args = parser.parse_args()
    r = run(args.scenarios, args.regions)
    print(
        f"{r['data_rows']:,} data rows -> {r['indicator_rows']:,} indicator rows"
        f" in {r['seconds']:.2f} s wall, {r['cpu_seconds']:.2f} s CPU ({int(r['threads'])} DuckDB threads)"
    )


if __name__ == "__main__":
    main()
