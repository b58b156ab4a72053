"""The ingest benchmark runs end to end on a small input and reports comparable timings."""

from __future__ import annotations

from pathlib import Path

import pytest

from milepost.example_db import generate as gen
from milepost.validate.bench.ingest import LIMIT, run


@pytest.mark.slow
def test_benchmark_runs_and_reports_a_ratio(tmp_path: Path) -> None:
    rows = 2 * len(gen.ALL_REGIONS) * len(gen.contract().variables) * len(gen.YEARS)  # two whole scenarios
    results = run(tmp_path, rows=rows, repeats=1)
    assert len(results) == 3
    first, clean, small = results
    assert first["rows"] == rows and first["limit"] == LIMIT
    for r in (first, clean):
        assert r["seconds"] > 0 and r["duckdb_seconds"] > 0
        assert r["ratio"] == pytest.approx(r["seconds"] / r["duckdb_seconds"], rel=1e-2)
        assert {"check", "write", "commit_and_swap", "total"} <= set(r["stages"])
    assert first["findings"]["error"] == 0 and first["findings"]["note"] > 0  # the broken sums, as notes
    assert clean["findings"] == {"error": 0, "warning": 0, "note": 0}
    assert small["rows"] == 3 * rows // 2 and small["db_bytes"] > 0
