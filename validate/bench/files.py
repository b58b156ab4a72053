"""The benchmark's input files, made once per size and kept in the work folder (invented data only)."""

from __future__ import annotations

from pathlib import Path

# regions x variables x years of the demo contract: the rows of one scenario in the generator's ensemble
PER_SCENARIO = 6 * 32 * 17


def clean_submission(workdir: Path, rows: int) -> tuple[Path, Path]:
    """A consistent submission of about `rows` rows: the generator's many-scenario ensemble as one data CSV and
    one scenarios CSV (the shape a modelling team sends). Returns (data, scenarios)."""
    import duckdb

    from milepost.example_db.generate import write_many_scenarios
    from milepost.validate.sql import literal, literal_list

    data, scen = workdir / f"clean-{rows}.csv", workdir / f"clean-{rows}-scenarios.csv"
    if data.exists() and scen.exists():
        return data, scen
    parts = write_many_scenarios(workdir / f"clean-{rows}-parts", n_scenarios=max(4, rows // PER_SCENARIO), fmt="csv")
    con = duckdb.connect()
    for out, group in (
        (data, [p for p in parts if "scenarios" not in p.name]),
        (scen, [p for p in parts if "scenarios" in p.name]),
    ):
        tmp = out.with_name(out.name + ".part")
        con.execute(
            f"COPY (SELECT * FROM read_csv({literal_list([str(p) for p in group])}, header = true, "  # noqa: S608 - paths via validate.sql
            f"all_varchar = true, union_by_name = true)) TO {literal(str(tmp))} (HEADER)"
        )
        tmp.rename(out)
    con.close()
    for p in parts:
        p.unlink()
    return data, scen


def dirty_submission(workdir: Path, rows: int) -> tuple[Path, Path]:
    """The clean submission with 30 % of its rows broken, a quarter each way: a variable the contract does not
    know, a unit that does not convert, a value that is not a number, a year outside the contract's range."""
    import duckdb

    from milepost.validate.sql import literal

    clean, scen = clean_submission(workdir, rows)
    out = workdir / f"dirty-{rows}.csv"
    if out.exists():
        return out, scen
    tmp = out.with_name(out.name + ".part")
    bad = "(hash(model, scenario, region, variable, year) % 100 < 30)"
    kind = "(hash(scenario, variable, year, 7) % 4)"
    duckdb.connect().execute(
        "COPY (SELECT model, scenario, region, "  # noqa: S608 - constants of this module; paths via validate.sql
        f"CASE WHEN {bad} AND {kind} = 0 THEN variable || '.unknown' ELSE variable END AS variable, "
        f"CASE WHEN {bad} AND {kind} = 1 THEN 'furlong/fortnight' ELSE unit END AS unit, "
        f"CASE WHEN {bad} AND {kind} = 3 THEN '1492' ELSE year END AS year, "
        f"CASE WHEN {bad} AND {kind} = 2 THEN 'n.a.x' ELSE value END AS value "
        f"FROM read_csv({literal(str(clean))}, header = true, all_varchar = true)) "
        f"TO {literal(str(tmp))} (HEADER)"
    )
    tmp.rename(out)
    return out, scen


def incremental_submission(workdir: Path, clean: Path, scenarios: int = 3) -> Path:
    """The first `scenarios` scenarios of a clean file (about 10k rows at 3) as those of a model the database does
    not hold yet, so that no stored scenario depends on them: what it costs to store them follows their size."""
    import duckdb

    from milepost.validate.sql import literal

    out = workdir / f"incremental-{scenarios}.csv"
    if not out.exists():
        tmp = out.with_name(out.name + ".part")
        duckdb.connect().execute(
            "COPY (SELECT * REPLACE ('Newcomer' AS model, model || '-' || scenario AS scenario) "  # noqa: S608 - path via validate.sql
            f"FROM read_csv({literal(str(clean))}, header = true, all_varchar = true) "
            f"LIMIT {int(scenarios) * PER_SCENARIO}) TO {literal(str(tmp))} (HEADER)"
        )
        tmp.rename(out)
    return out
