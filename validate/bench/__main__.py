"""`python -m milepost.validate.bench` (`make bench`): one table of every step against its floor.

Sections: `check`, `ingest`, `dashboard` (the page queries), `browser` (the real app in headless Chromium),
`bombs` (hostile inputs: time and peak memory of a check of each).
`--full` (`make bench BENCH_FULL=1`) adds the 10M-row steps, which take several minutes more on 2 cores.
The table is printed and written with every run's times to `bench-out/results.json`.
"""

from __future__ import annotations

import argparse
import importlib
import inspect
import json
import os
import platform
import sys
import time
from pathlib import Path

from milepost.validate.bench.timing import Step, table

ROOT = Path(__file__).resolve().parents[2]
SECTIONS = ("check", "ingest", "dashboard", "browser", "bombs")


def machine() -> dict[str, object]:
    """What the numbers were measured on (the ratios matter; the seconds depend on this and on the load)."""
    cpu = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    try:
        mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    except (ValueError, OSError):
        mem = 0.0
    return {
        "cpu": cpu,
        "cores": os.cpu_count(),
        "memory_gib": round(mem, 1),
        "python": platform.python_version(),
        "system": f"{platform.system()} {platform.release()}",
        "load_average_at_start": [round(x, 2) for x in os.getloadavg()],
        "when_utc": time.strftime("%Y-%m-%d %H:%M", time.gmtime()),
    }


def _step(r: dict[str, object]) -> Step:
    """A section's result given as a plain dict (the bombs section) as a row of the table."""
    ratio, target = r.get("ratio"), r.get("target")
    within = r.get("within_memory_target")
    met = (float(ratio) <= float(target)) if isinstance(ratio, float) and isinstance(target, float) else within
    return Step(
        step=str(r["step"]),
        rows=0,
        seconds=float(r["seconds"]),  # type: ignore[arg-type]
        floor_seconds=float(r["floor_seconds"]) if r.get("floor_seconds") is not None else None,  # type: ignore[arg-type]
        floor=str(r.get("floor", "-")),
        target=f"≤ {target:g}x" if isinstance(target, float) else ("memory" if within is not None else "-"),
        met=met if isinstance(met, bool) else None,
        peak_mb=float(r["peak_mb"]) if r.get("peak_mb") is not None else None,  # type: ignore[arg-type]
        ratio=float(ratio) if isinstance(ratio, float) else None,
    )


def main(argv: list[str] | None = None) -> int:
    """Run the sections, print the table, write results.json; exit 0 (a target not met is reported, not raised)."""
    ap = argparse.ArgumentParser(prog="python -m milepost.validate.bench", description=__doc__)
    ap.add_argument("--workdir", type=Path, default=ROOT / "bench-out")
    ap.add_argument("--only", choices=SECTIONS, action="append")
    ap.add_argument("--full", action="store_true", help="also the 10M-row steps")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--rows", type=int, help="check and ingest this many rows instead (a quick trial of the bench)")
    args = ap.parse_args(argv)
    args.workdir.mkdir(parents=True, exist_ok=True)
    steps: list[Step] = []
    about = machine()
    for name in args.only or SECTIONS:
        print(f"[{name}] running …", file=sys.stderr, flush=True)
        run = importlib.import_module(f"milepost.validate.bench.{name}").run
        wanted = inspect.signature(run).parameters
        given = {"full": args.full, "repeat": args.repeat, "rows": args.rows}
        for found in run(args.workdir, **{k: v for k, v in given.items() if k in wanted and v is not None}):
            s = found if isinstance(found, Step) else _step(found)
            steps.append(s)
            print(
                f"  {s.step}: {s.seconds:.2f} s" + (f" = {s.ratio:.2f}x" if s.ratio else ""),
                file=sys.stderr,
                flush=True,
            )
    out = {"machine": about, "full": args.full, "steps": [s.to_dict() for s in steps], "table": table(steps)}
    (args.workdir / "results.json").write_text(json.dumps(out, indent=2, ensure_ascii=False), encoding="utf-8")
    print(f"{about['cpu']}, {about['cores']} cores, {about['memory_gib']} GiB, load {about['load_average_at_start']}")
    print(table(steps))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
