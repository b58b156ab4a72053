"""The dashboard in a real headless Chromium on the demo database: page open and a filter change, timed.

Starts `milepost dashboard --db DEMO` as a user would, opens each page `REPEAT` times in a fresh browser context
(timed from navigation until the script has finished and a chart is drawn), then changes a filter and times until
the numbers on the page change. Needs Playwright (test extras) and /usr/bin/chromium; skipped without them.
"""

from __future__ import annotations
