"""The scenarios table (model, scenario, attributes such as `reference`), validated with a pandera frame schema."""

from __future__ import annotations

from typing import Any

from milepost.validate.findings import Finding


def validate_scenarios(frame: Any, path: str, sheet: str | None) -> tuple[Any, list[Finding]]:
    """Return the frame without rows that cannot be used, and findings for them (line = header 1 + row)."""
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
    for idx in sorted({int(i) for i in cases["index"]}):
        row = frame.iloc[idx]
        dup_rows.add(idx)
        same = frame[(frame["model"] == row["model"]) & (frame["scenario"] == row["scenario"])]
        first = int(same.index[0])
        identical = same.drop(columns=[]).iloc[0].equals(row)
        findings.append(
            Finding(
                "duplicate-row" if identical else "conflicting-row",
                "warning" if identical else "error",
                path=path,
                line=idx + 2,
                sheet=sheet,
                model=row["model"],
                scenario=row["scenario"],
                expected="one row per model and scenario",
                message=f"scenario {row['model']} / {row['scenario']} is listed again (first on line {first + 2})"
                + ("" if identical else " with other attributes"),
                hint="Keep one row per scenario in the scenarios table.",
            )
        )
    return frame.drop(index=list(dup_rows)), findings
