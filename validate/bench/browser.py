"""The dashboard in a real headless Chromium on the demo database: page open and a filter change, timed.

Starts `milepost dashboard --db DEMO` as a user would, opens each page `repeat` times in a fresh browser context
(timed from navigation until the script has finished, the page's headline numbers are shown and a chart is drawn),
then changes a filter and times until the numbers on the page change. Every open alternates with an open of the
floor, `floor_page.py` (a Streamlit page of the same kinds of elements on six invented rows, served with the same
options), so the rows say how much of the seconds Streamlit itself takes on this machine under this load. Needs
Playwright (test extras) and /usr/bin/chromium; skipped without them.
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
# What a user reads first on each page: its numbers, not only the page's frame. Streamlit loads an element's code
# when the first element of its kind arrives, so "the script has finished" can come before a number is drawn.
HEADLINES = {"": '[data-testid="stMetricValue"]', "rates": '[data-testid="stAlertContentInfo"]'}
PAGES = tuple(HEADLINES)
FLOOR_PAGE = Path(__file__).with_name("floor_page.py")
FLOOR_LABEL = "Streamlit page of the same kinds of elements, 6 invented rows"
FLOOR_HEADLINE = HEADLINES[""]


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


def _serve(db: Path, log: Path, floor: bool = False) -> tuple[subprocess.Popen[bytes], str]:
    """`milepost dashboard --db DB` on a free port (or, `floor`, the floor page with the same streamlit options)."""
    from milepost.validate.cli.dashboard import streamlit_command

    port = _free_port()
    if floor:
        argv, env = streamlit_command(db, port)
        argv[argv.index("run") + 1] = str(FLOOR_PAGE)
    else:
        argv = [sys.executable, "-m", "milepost.validate", "dashboard", "--db", str(db), "--port", str(port)]
        env = {**os.environ, "MILEPOST_CONTRACT": ""}
    with log.open("wb") as out:
        proc = subprocess.Popen(argv, stdout=out, stderr=subprocess.STDOUT, env=env)  # noqa: S603 - argv list, no shell
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


def _open(browser: Any, url: str, headline: str, context: Any = None) -> tuple[float, Any]:
    """Seconds from navigation until the script has finished, `headline` is shown and a chart is drawn, in
    `context` (else a fresh browser context: nothing cached, the app's scripts and styles downloaded again)."""
    page = (context or browser.new_context(viewport={"width": 1400, "height": 900})).new_page()
    t = time.perf_counter()
    page.goto(url)
    page.wait_for_function(RENDERED, timeout=60_000)
    page.wait_for_selector(headline, state="visible", timeout=60_000)
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


def _toggle_references(page: Any) -> None:
    """Flip "Include reference scenarios" (untimed) and wait for the page to settle."""
    page.get_by_test_id("stCheckbox").filter(has_text="Include reference scenarios").click()
    page.wait_for_timeout(100)
    page.wait_for_function(RENDERED, timeout=60_000)


def _fresh_selections(years: list[str], current: str, n: int) -> list[tuple[bool, str]]:
    """Up to `n` (references included, year) selections to change to in turn, none seen before by the server: the
    dashboard keeps every answer for every session, so a change back to a year seen before would time a cache hit.
    The page opens on (False, `current`); flipping the references switch (untimed) at the year then shown gives
    every other year a second selection not seen yet."""
    out: list[tuple[bool, str]] = []
    seen, refs, year = {(False, current)}, False, current
    while len(out) < n:
        unseen = [y for y in years if (refs, y) not in seen]
        if not unseen:
            if refs:
                break
            refs = True
            seen.add((refs, year))
            continue
        year = unseen[0]
        seen.add((refs, year))
        out.append((refs, year))
    return out


def _milestone_years(page: Any) -> tuple[list[str], str]:
    """The milestone years offered and the one shown."""
    box = page.get_by_test_id("stSelectbox").filter(has_text="Milestone year")
    current = box.inner_text().split()[-1]
    box.click()
    names = [t.strip() for t in page.get_by_role("option").all_inner_texts()]
    page.keyboard.press("Escape")
    return names, current


def run(workdir: Path, full: bool = False, repeat: int = 3, rows: int | None = None) -> list[Step]:
    """Page open (Screen and Rates) and a milestone-year change on Screen, medians of `repeat`, each open right
    after an open of the floor page in the same way. Before them, one open of each server (what the first reviewer
    after a start waits for: the server imports its modules and fills its caches), reported without a target."""
    if not CHROMIUM.exists():
        print("  no /usr/bin/chromium: browser steps skipped", file=sys.stderr)
        return []
    from playwright.sync_api import sync_playwright

    db = demo_db(workdir)
    proc, url = _serve(db, workdir / "dashboard-server.log")
    steps = []
    try:
        floor_proc, floor_url = _serve(db, workdir / "floor-server.log", floor=True)
    except BaseException:
        _stop(proc)
        raise
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
            try:
                _open(browser, floor_url, FLOOR_HEADLINE)[1].context.close()
                first, page = _open(browser, url, HEADLINES[""])
                page.context.close()
                steps.append(
                    Step(
                        step="browser: open screen, first after the server starts (demo)",
                        rows=0,
                        seconds=first,
                        floor_seconds=None,
                        floor="- (once)",
                        target="-",
                        met=None,
                        runs=[first],
                    )
                )
                for page_name in PAGES:
                    times: list[float] = []
                    again: list[float] = []
                    floor_new: list[float] = []
                    floor_again: list[float] = []
                    for _ in range(repeat):
                        for target, headline, new, old in (
                            (floor_url, FLOOR_HEADLINE, floor_new, floor_again),
                            (f"{url}/{page_name}", HEADLINES[page_name], times, again),
                        ):
                            seconds, page = _open(browser, target, headline)
                            new.append(seconds)
                            page.close()
                            # the same reviewer opening it again: the browser has the app's scripts cached
                            seconds, page = _open(browser, target, headline, page.context)
                            old.append(seconds)
                            page.context.close()
                    name = page_name or "screen"
                    steps.append(
                        _absolute(f"browser: open {name}, new browser profile (demo)", times, OPEN_LIMIT, floor_new)
                    )
                    steps.append(_absolute(f"browser: open {name} again (demo)", again, OPEN_LIMIT, floor_again))
                changes = []
                seconds, page = _open(browser, url, HEADLINES[""])
                refs = False
                for with_refs, year in _fresh_selections(*_milestone_years(page), repeat):
                    if with_refs != refs:
                        _toggle_references(page)
                        refs = with_refs
                    changes.append(_change_year(page, year))
                page.context.close()
                steps.append(
                    _absolute("browser: screen, change the milestone year (not seen before)", changes, FILTER_LIMIT)
                )
            finally:
                browser.close()
    finally:
        _stop(proc)
        _stop(floor_proc)
    return steps


def _stop(proc: subprocess.Popen[bytes]) -> None:
    proc.terminate()
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        proc.kill()


def _absolute(name: str, times: list[float], limit: float, floors: list[float] | None = None) -> Step:
    """A step with an absolute target; with `floors`, also their median and the ratio to it (for reading only)."""
    seconds = statistics.median(times)
    floor = statistics.median(floors) if floors else None
    return Step(
        step=name,
        rows=0,
        seconds=seconds,
        floor_seconds=floor,
        floor=FLOOR_LABEL if floors else "- (absolute target)",
        target=f"< {limit:g} s",
        met=seconds < limit,
        ratio=seconds / floor if floor else None,
        runs=times,
        floor_runs=list(floors or []),
    )
