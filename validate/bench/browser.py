"""The dashboard in a real headless Chromium on the demo database: page open and a filter change, timed.

Starts `milepost dashboard --db DEMO` as a user would, opens each page `REPEAT` times in a fresh browser context
(timed from navigation until the script has finished and a chart is drawn), then changes a filter and times until
the numbers on the page change. Needs Playwright (test extras) and /usr/bin/chromium; skipped without them.
"""

import os
import socket
import statistics
import subprocess
import sys
import time
import urllib.request
from pathlib import Path
from typing import Any

from milepost.validate.bench.timing import Step

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--no-first-run"]
# Streamlit marks the app `notRunning` when the script has finished and elements `stale` while a rerun replaces them.
RENDERED = """() => document.querySelector('[data-testid="stApp"]')
   ?.getAttribute('data-test-script-state') === 'notRunning' && !document.querySelector('[data-stale="true"]')"""
CHART = '[data-testid="stVegaLiteChart"] canvas, [data-testid="stVegaLiteChart"] svg'
OPEN_LIMIT, FILTER_LIMIT = 1.5, 1.0
PAGES = ("", "rates")


def demo_db(workdir: Path) -> Path:
    """The demo database, built as `make demo-db` builds it (reused if present)."""
    db = workdir / "demo" / "demo.duckdb"
    if not db.exists():
        db.parent.mkdir(parents=True, exist_ok=True)
        subprocess.run(  # noqa: S603 - our own entry point, an argv list, no shell
            [sys.executable, "-m", "milepost.example_db.demo", str(db.parent / "submissions"), "--db", str(db)],
            check=True,
            stdout=subprocess.DEVNULL,
        )
    return db


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _serve(db: Path, log: Path) -> tuple[subprocess.Popen[bytes], str]:
    port = _free_port()
    with log.open("wb") as out:
        proc = subprocess.Popen(  # noqa: S603 - our own entry point, an argv list, no shell
            [sys.executable, "-m", "milepost.validate", "dashboard", "--db", str(db), "--port", str(port)],
            stdout=out,
            stderr=subprocess.STDOUT,
            env={**os.environ, "MILEPOST_CONTRACT": ""},
        )
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 90
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(f"{url}/_stcore/health", timeout=2) as r:  # noqa: S310 - http://127.0.0.1
                if r.read() == b"ok":
                    return proc, url
        except OSError:
            time.sleep(0.2)
        if proc.poll() is not None:
            break
    proc.terminate()
    raise RuntimeError(f"the dashboard did not start: {log.read_text(errors='replace')[-800:]}")


def _open(browser: Any, url: str, context: Any = None) -> tuple[float, Any]:
    """Seconds from navigation until the script has finished and a chart is drawn, in `context` (else a fresh
    browser context: nothing cached, the app's scripts and styles downloaded again)."""
    page = (context or browser.new_context(viewport={"width": 1400, "height": 900})).new_page()
    t = time.perf_counter()
    page.goto(url)
    page.wait_for_function(RENDERED, timeout=60_000)
    page.wait_for_selector(CHART, timeout=60_000)
    return time.perf_counter() - t, page


def _change_year(page: Any, year: str) -> float:
    """Seconds from picking a milestone year until the page shows its numbers (the headline names the year)."""
    page.get_by_test_id("stSelectbox").filter(has_text="Milestone year").click()
    option = page.get_by_role("option", name=year, exact=True)
    t = time.perf_counter()
    option.click()
    page.get_by_text(f"in {year}, World").first.wait_for(timeout=60_000)
    page.wait_for_function(RENDERED, timeout=60_000)
    return time.perf_counter() - t


def run(workdir: Path, full: bool = False, repeat: int = 3, rows: int | None = None) -> list[Step]:
    """Page open (Screen and Rates) and a milestone-year change on Screen, medians of `repeat` (after one warm-up
    open, so the server has imported its modules: what a second reviewer sees)."""
    if not CHROMIUM.exists():
        print("  no /usr/bin/chromium: browser steps skipped", file=sys.stderr)
        return []
    from playwright.sync_api import sync_playwright

    db = demo_db(workdir)
    proc, url = _serve(db, workdir / "dashboard-server.log")
    steps = []
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
            try:
                _open(browser, url)[1].context.close()
                for page_name in PAGES:
                    times, again = [], []
                    for _ in range(repeat):
                        seconds, page = _open(browser, f"{url}/{page_name}")
                        times.append(seconds)
                        page.close()
                        # the same reviewer opening it again: the browser has the app's scripts cached
                        seconds, page = _open(browser, f"{url}/{page_name}", page.context)
                        again.append(seconds)
                        page.context.close()
                    name = page_name or "screen"
                    steps.append(_absolute(f"browser: open {name}, new browser profile (demo)", times, OPEN_LIMIT))
                    steps.append(_absolute(f"browser: open {name} again (demo)", again, OPEN_LIMIT))
                changes = []
                seconds, page = _open(browser, url)
                for i in range(repeat):
                    changes.append(_change_year(page, ("2050", "2030")[i % 2]))
                page.context.close()
                steps.append(_absolute("browser: screen, change the milestone year", changes, FILTER_LIMIT))
            finally:
                browser.close()
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
    return steps


def _absolute(name: str, times: list[float], limit: float) -> Step:
    seconds = statistics.median(times)
    return Step(
        step=name,
        rows=0,
        seconds=seconds,
        floor_seconds=None,
        floor="- (absolute target)",
        target=f"< {limit:g} s",
        met=seconds < limit,
        runs=times,
    )
