"""The dashboard served by `milepost dashboard` and driven in a real headless Chromium (system binary)."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import duckdb
import numpy as np
import pytest

from milepost.dashboard.ui import fmt

from dashboard_fixtures import milestone_values

CHROMIUM = Path("/usr/bin/chromium")
ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--disable-dev-shm-usage",
]
RENDERED = """() => document.querySelector('[data-testid="stApp"]')
   ?.getAttribute('data-test-script-state') === 'notRunning' && !document.querySelector('[data-stale="true"]')"""
CHART = '[data-testid="stVegaLiteChart"] canvas, [data-testid="stVegaLiteChart"] svg'

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(
        not CHROMIUM.exists(),
        reason="no system Chromium at /usr/bin/chromium (apt-get install chromium); the real-browser test needs it",
    ),
]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="session")
def server(demo_db: Path):
    """`milepost dashboard --db DEMO --port FREE`, the way a reviewer starts it; yields the base URL."""
    port = _free_port()
    log = demo_db.parent / "dashboard-server.log"
    with log.open("wb") as out:
        proc = subprocess.Popen(
            [sys.executable, "-m", "milepost.validate", "dashboard", "--db", str(demo_db), "--port", str(port)],
            stdout=out,
            stderr=subprocess.STDOUT,
            env={**os.environ, "MILEPOST_CONTRACT": ""},
        )
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                with urllib.request.urlopen(f"{url}/_stcore/health", timeout=2) as r:  # noqa: S310 - http://127.0.0.1
                    if r.read() == b"ok":
                        break
            except OSError:
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                pytest.fail(f"the dashboard did not start:\n{log.read_text(errors='replace')}")
            time.sleep(0.2)
        yield url
    finally:
        proc.terminate()  # the CLI exec-ed into streamlit, so this is the server itself
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()


@pytest.fixture(scope="session")
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        yield b
        b.close()


def _settle(page) -> None:
    page.wait_for_function(RENDERED, timeout=30_000)
    page.wait_for_selector(CHART, timeout=30_000)


def _full_screenshot(page, path: Path) -> None:
    # the app scrolls inside stMain, so a full-page shot would be cut at the viewport: grow the viewport first
    h = page.evaluate("document.querySelector('[data-testid=\"stMain\"]').scrollHeight")
    page.set_viewport_size({"width": 1400, "height": int(h) + 50})
    page.wait_for_function(RENDERED, timeout=30_000)
    page.screenshot(path=str(path))


def test_screen_in_a_real_browser(server, browser, demo_db, tmp_path):
    from playwright.sync_api import expect

    page = browser.new_page(viewport={"width": 1400, "height": 900}, accept_downloads=True)
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    # an assessment's dashboard may run where nothing outside can be reached, and should tell no one who reads it
    outside: list[str] = []
    page.on("request", lambda r: outside.append(r.url) if _leaves_the_machine(r.url) else None)
    page.goto(server)
    _settle(page)
    expect(page.get_by_text("emissions.ghg in 2030, World")).to_be_visible()

    page.get_by_test_id("stSelectbox").filter(has_text="Milestone year").click()
    page.get_by_role("option", name="2050", exact=True).click()
    expect(page.get_by_text("emissions.ghg in 2050, World")).to_be_visible(timeout=30_000)
    _settle(page)
    assert "year=2050" in page.url
    assert page.locator(CHART).count() >= 1
    assert page.get_by_test_id("stDataFrame").count() >= 2
    with duckdb.connect(str(demo_db), read_only=True) as con:
        median = float(np.median(milestone_values(con, "emissions.ghg", 2050)["value"]))
    expect(page.get_by_test_id("stMetric").filter(has_text="Median 2050")).to_contain_text(fmt(median, 0))

    # the PNG button renders the chart only when clicked (deferred download)
    with page.expect_download(timeout=30_000) as dl:
        page.get_by_test_id("stDownloadButton").filter(has_text="PNG").first.click()
    png = Path(dl.value.path()).read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and dl.value.suggested_filename.endswith(".png")

    shot = tmp_path / "screen-2050.png"
    _full_screenshot(page, shot)
    assert shot.stat().st_size > 20_000
    print(f"screenshot: {shot}")

    # the URL is the shareable view: open it fresh, with a model filter added
    shared = browser.new_page(viewport={"width": 1400, "height": 900})
    shared.goto(page.url + "&model=Ferrow")
    _settle(shared)
    expect(shared.get_by_text("emissions.ghg in 2050, World")).to_be_visible()
    expect(shared.get_by_test_id("stMetric").filter(has_text="Models")).to_contain_text("1")
    assert not errors, errors
    assert not outside, outside


def _leaves_the_machine(url: str) -> bool:
    from urllib.parse import urlparse

    parts = urlparse(url)
    return parts.scheme in ("http", "https", "ws", "wss") and parts.hostname not in ("127.0.0.1", "localhost")


def test_selfcheck_upload_and_json_report_in_a_real_browser(server, browser, demo):
    from playwright.sync_api import expect

    db, files = demo
    page = browser.new_page(viewport={"width": 1400, "height": 900}, accept_downloads=True)
    page.goto(f"{server}/selfcheck")
    page.wait_for_function(RENDERED, timeout=30_000)
    page.locator('[data-testid="stFileUploaderDropzoneInput"]').set_input_files([str(p) for p in files.flawed])
    expect(page.get_by_text("Errors found")).to_be_visible(timeout=60_000)
    page.wait_for_function(RENDERED, timeout=30_000)
    with page.expect_download(timeout=30_000) as dl:
        page.get_by_test_id("stDownloadButton").filter(has_text="JSON report").click()
    report = json.loads(Path(dl.value.path()).read_text(encoding="utf-8"))
    with duckdb.connect(str(db), read_only=True) as con:
        errors = con.execute("SELECT errors FROM submissions WHERE model = 'Vossel'").fetchall()[0][0]
    assert report["summary"]["errors"] == errors > 0
    # the findings table opens on what to read and what to do: message and hint are the first visible columns
    # (the grid's accessible table holds only the cells in view, so an off-screen column is absent from it; it is
    # visually hidden, hence CSS role selectors rather than get_by_role)
    grid = page.get_by_test_id("stDataFrame").last  # the per-rule counts come first, then the findings
    grid.scroll_into_view_if_needed()
    grid.locator("[role=columnheader]").first.wait_for(state="attached", timeout=30_000)
    headers = grid.locator("[role=columnheader]").all_inner_texts()
    assert headers[:2] == ["message", "how to fix"], headers
    first = grid.locator("[role=row]").nth(1).locator("[role=gridcell]").all_inner_texts()
    assert first[0] in {f["message"] for f in report["findings"]}
    assert first[1] in {f["hint"] or "" for f in report["findings"]}
    with page.expect_download(timeout=60_000) as dl:
        page.get_by_test_id("stDownloadButton").filter(has_text="XLSX report").click()
    assert Path(dl.value.path()).read_bytes()[:2] == b"PK"  # XLSX is a ZIP container (ECMA-376 Part 2)


def test_outcome_class_in_a_real_browser(server, browser, demo_db):
    """A new user picks the 2 °C (67 %) class on Rates: the sentence speaks of that class and its numbers are SQL's."""
    from playwright.sync_api import expect

    page = browser.new_page(viewport={"width": 1400, "height": 1000})
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.goto(f"{server}/rates")
    _settle(page)
    page.get_by_test_id("stSelectbox").filter(has_text="Compare").click()
    page.get_by_role("option", name="carbon-budget classes").click()
    page.wait_for_function(RENDERED, timeout=30_000)
    page.get_by_test_id("stMultiSelect").filter(has_text="Outcome classes").click()
    page.get_by_role("option", name="within the 2 °C budget (67 %)").click()
    headline = page.get_by_test_id("stAlert").filter(has_text="Within the 2 °C budget (67 %): Median CAGR 2030–2050")
    expect(headline).to_be_visible(timeout=30_000)
    _settle(page)
    assert "outcome=class" in page.url and "class=2" in page.url

    with duckdb.connect(str(demo_db), read_only=True) as con:
        keys = set(
            con.execute(
                "SELECT model, scenario FROM current_indicators WHERE kind = 'budget_level' AND variable = '67%'"
                " AND value = 2.0"
            ).fetchall()
        )
        sel = milestone_values(con, "emissions.ghg", 2030)
        sel = sel[[(m, s) in keys for m, s in zip(sel["model"], sel["scenario"], strict=True)]]
        rates = con.execute(
            "SELECT model, scenario, value AS rate FROM current_indicators WHERE kind = 'rate_cagr'"
            " AND variable = 'emissions.ghg' AND region = 'World' AND year_from = 2030 AND year_to = 2050"
        ).df()
    edges = np.quantile(sel["value"], [1 / 3, 2 / 3])
    sel = sel.assign(band=np.searchsorted(edges, sel["value"], side="right")).merge(rates)
    hi, lo = (float(np.median(sel.loc[sel["band"] == b, "rate"])) for b in (2, 0))
    expect(headline).to_contain_text(f"high band {fmt(hi)} %/yr vs low band {fmt(lo)} %/yr")
    assert hi < lo
    assert not errors, errors
