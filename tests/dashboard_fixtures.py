"""Dashboard test fixtures: the demo database built once through the real generator and ingest, and helpers."""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest
from streamlit.testing.v1 import AppTest

from milepost.example_db.generate import CONTRACT_DIR, DemoFiles, write_demo
from milepost.validate.store.ingest import ingest

ROOT = Path(__file__).resolve().parents[1]
APP = ROOT / "dashboard" / "app.py"
_BUILT: dict[str, tuple[Path, DemoFiles]] = {}


def build_demo_db(folder: Path) -> tuple[Path, DemoFiles]:
    """Write the demo files and ingest them in the documented order (four models, the flawed one, the revision),
    harmonised as `make demo-db` does: raw values beside harmonised ones."""
    key = str(folder)
    if key not in _BUILT:
        files = write_demo(folder / "files")
        db = folder / "milepost.duckdb"
        for paths in [*files.submissions.values(), files.flawed, files.revision]:
            ingest(paths, db, CONTRACT_DIR, harmonise=True)
        _BUILT[key] = (db, files)
    return _BUILT[key]


@pytest.fixture(scope="session")
def demo(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, DemoFiles]:
    """(database path, demo files): built once per session, shared by every dashboard test module."""
    return build_demo_db(tmp_path_factory.getbasetemp() / "dashboard-demo")


@pytest.fixture(scope="session")
def demo_db(demo: tuple[Path, DemoFiles]) -> Path:
    return demo[0]


@pytest.fixture
def sql(demo_db: Path):
    """A plain read-only DuckDB connection to the demo database, for the expected values."""
    con = duckdb.connect(str(demo_db), read_only=True)
    yield con
    con.close()


def milestone_values(
    con: duckdb.DuckDBPyConnection,
    variable: str,
    year: int,
    region: str = "World",
    models: tuple[str, ...] = (),
    with_references: bool = False,
) -> pd.DataFrame:
    """The expected selection, written independently of dashboard/queries.py: straight from the stored rows."""
    df = con.execute(
        """SELECT i.model, i.scenario, i.value, s.attributes
           FROM current_indicators i JOIN current_scenarios s USING (model, scenario)
           WHERE i.kind = 'value' AND i.variable = ? AND i.year_from = ? AND i.region = ?""",
        [variable, year, region],
    ).df()
    refs = con.execute(
        "SELECT DISTINCT model, reference AS scenario FROM current_scenarios WHERE reference IS NOT NULL"
    ).df()
    if not with_references:
        marked = df.merge(refs, on=["model", "scenario"], how="left", indicator=True)
        df = df[(marked["_merge"] == "left_only").to_numpy()]
    if models:
        df = df[df["model"].isin(models)]
    return df.reset_index(drop=True)


def numpy_bands(values: np.ndarray, edges: list[float] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(edges, band per value) by numpy: terciles with linear interpolation, a value at an edge goes up."""
    e = np.quantile(values, [1 / 3, 2 / 3]) if edges is None else np.asarray(sorted(edges), dtype=float)
    return e, np.searchsorted(e, values, side="right")


@pytest.fixture(autouse=True)
def _restore_db_env() -> Iterator[None]:
    """The app finds its database through MILEPOST_DB, which `open_app` sets: put back what a test changed."""
    old = os.environ.get("MILEPOST_DB")
    yield
    if old is None:
        os.environ.pop("MILEPOST_DB", None)
    else:
        os.environ["MILEPOST_DB"] = old


def open_app(db: Path, page: str | None = None, params: dict | None = None) -> AppTest:
    """The real app on `db` (query parameters set before the first run), switched to `page`; fails on an exception."""
    os.environ["MILEPOST_DB"] = str(db)
    at = AppTest.from_file(str(APP), default_timeout=60)
    for k, v in (params or {}).items():
        at.query_params[k] = v
    at.run()
    if page:
        at.switch_page(page).run()
    assert not at.exception, [e.message for e in at.exception]
    return at
