"""The scenarios table (model, scenario, attributes such as `reference`), validated with a pandera frame schema.

The readers leave each scenarios table in a TEMP table of text cells with each row's line; `repeated_rows` asks
DuckDB whether a key repeats, and only then loads the table into pandas for the schema (a clean table, the usual
case, never imports pandas or pandera).
"""

from __future__ import annotations

from typing import Any

import duckdb

from milepost.validate.findings import Finding


def repeated_rows(con: duckdb.DuckDBPyConnection, table: str, path: str, sheet: str | None) -> list[Finding]:
    """Findings for rows of the scenarios `table` that list a model and scenario again; those rows are deleted
    from `table`, so what is left has one row per scenario."""
    repeats = con.execute(
        f"SELECT count(*) FROM (SELECT 1 FROM {table} GROUP BY model, scenario HAVING count(*) > 1)"  # noqa: S608 - generated names
    ).fetchall()[0][0]
    if not repeats:
        return []
    frame = con.execute(f"SELECT * FROM {table} ORDER BY line").df()  # noqa: S608 - generated names
    kept, findings = validate_scenarios(frame, path, sheet)
    dropped = sorted(set(frame["line"]) - set(kept["line"]))
    con.execute(f"DELETE FROM {table} WHERE list_contains(?, line)", [[int(n) for n in dropped]])  # noqa: S608 - generated names
    return findings


def validate_scenarios(frame: Any, path: str, sheet: str | None) -> tuple[Any, list[Finding]]:
    """Return the frame without rows that cannot be used, and findings for them: on the line a `line` column
    gives, else on header 1 + row."""
    lines = list(frame["line"]) if "line" in frame.columns else [i + 2 for i in range(len(frame))]
    keys = frame[["model", "scenario"]]
    # The usual table has one row per scenario and no empty key: then the schema below would pass it, and
    # importing pandera costs more than the rest of a check of a small submission (measured: 0.2-0.8 s).
    if not keys.isna().any(axis=None) and not keys.astype("str").duplicated().any():
        return frame, []
    import pandera.pandas as pa

    schema = pa.DataFrameSchema(
        {"model": pa.Column(str, nullable=False), "scenario": pa.Column(str, nullable=False)},
        unique=["model", "scenario"],
        report_duplicates="exclude_first",
        coerce=True,
    )
    try:
        schema.validate(frame, lazy=True)
        return frame, []
    except pa.errors.SchemaErrors as e:
        cases = e.failure_cases.dropna(subset=["index"]).drop_duplicates(["check", "index"])
    findings = []
    dup_rows = set()
    cells = frame.drop(columns=["line"], errors="ignore")
    for idx in sorted({int(i) for i in cases["index"]}):
        row = cells.iloc[idx]
        dup_rows.add(idx)
        same = cells[(cells["model"] == row["model"]) & (cells["scenario"] == row["scenario"])]
        first = int(same.index[0])
        identical = same.iloc[0].equals(row)
        findings.append(
            Finding(
                "duplicate-row" if identical else "conflicting-row",
                "warning" if identical else "error",
                path=path,
                line=int(lines[idx]),
                sheet=sheet,
                model=row["model"],
                scenario=row["scenario"],
                expected="one row per model and scenario",
                message=f"scenario {row['model']} / {row['scenario']} is listed again (first on line {lines[first]})"
                + ("" if identical else " with other attributes"),
                hint="Keep one row per scenario in the scenarios table.",
            )
        )
    return frame.drop(index=list(dup_rows)), findings
