"""DuckDB's memory budget: every connection gets it and a private spill folder, a check past the budget spills
there and finds the same, and a bad budget is a usage error."""

from __future__ import annotations

import tempfile
from pathlib import Path

import duckdb
import pytest

from milepost.schema.contract import Contract
from milepost.validate.errors import UsageError
from milepost.validate.memory import DEFAULT_MEMORY_MB, ENV_MEMORY, memory_mb, spill_folder
from milepost.validate.runner import run_check
from milepost.validate.store.database import connect_memory


def _big_csv(path: Path, scenarios: int) -> Path:
    """A long table of consistent World rows (no sums to fail), written by DuckDB so it is quick to make."""
    duckdb.execute(
        "COPY (SELECT 'M' AS model, 's' || s AS scenario, 'World' AS region, 'emissions.co2' AS variable, "
        "'Mt CO2/yr' AS unit, y AS year, 30000.0 - s - y AS value FROM range(?) t(s), range(2010, 2101, 1) u(y)) "
        "TO ? (HEADER)",
        [scenarios, str(path)],
    )
    return path


def _settings(con: duckdb.DuckDBPyConnection) -> tuple[str, str]:
    row = con.execute("SELECT current_setting('memory_limit'), current_setting('temp_directory')").fetchall()[0]
    return str(row[0]), str(row[1])


def test_connections_get_the_budget_and_a_private_spill_folder(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv(ENV_MEMORY, raising=False)
    con = connect_memory()
    limit, temp = _settings(con)
    # DuckDB prints the limit in MiB with decimals (768 MB = 732.4 MiB)
    assert limit.endswith("MiB") and abs(float(limit.split()[0]) - DEFAULT_MEMORY_MB * 1e6 / 2**20) < 1
    assert Path(temp) == spill_folder() and Path(temp).is_dir()
    # under the system's temporary folder, never DuckDB's default `.tmp` in the working directory
    assert Path(temp).resolve().is_relative_to(Path(tempfile.gettempdir()).resolve())
    assert not Path(temp).resolve().is_relative_to(Path.cwd().resolve())
    monkeypatch.setenv(ENV_MEMORY, "300")
    assert "286" in _settings(connect_memory())[0]  # 300 MB = 286.1 MiB


@pytest.mark.parametrize("raw", ["lots", "12.5", "10"])
def test_a_bad_budget_is_a_usage_error(monkeypatch: pytest.MonkeyPatch, raw: str) -> None:
    monkeypatch.setenv(ENV_MEMORY, raw)
    with pytest.raises(UsageError, match=ENV_MEMORY):
        memory_mb()


def test_a_check_past_its_budget_spills_to_the_private_folder_and_finds_the_same(
    tmp_path: Path, core: Contract, monkeypatch: pytest.MonkeyPatch
) -> None:
    data = _big_csv(tmp_path / "big.csv", 4000)  # 364,000 rows
    monkeypatch.delenv(ENV_MEMORY, raising=False)
    roomy = run_check([data], core)
    expected = (roomy.counts, roomy.rule_counts, roomy.usable_rows)
    roomy.con.close()
    monkeypatch.setenv(ENV_MEMORY, "64")
    tight = run_check([data], core)
    try:
        spilled = tight.con.execute("SELECT path FROM duckdb_temporary_files()").fetchall()
        assert spilled, "the check kept everything in memory: the budget was not applied"
        assert all(Path(p).parent == spill_folder() for (p,) in spilled)
        assert (tight.counts, tight.rule_counts, tight.usable_rows) == expected
        assert tight.usable_rows == 364_000
    finally:
        tight.con.close()
