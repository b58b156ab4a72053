"""`make demo`: write the invented demo submissions, check each one, and load them through `milepost ingest`.

Each submission is stored twice over, as submitted and harmonised to the contract's base-year reference values
(`--harmonise`), so the dashboard can show raw and harmonised pathways side by side.

Everything goes through the real command line, as an assessment author would run it, so the demo database is
built exactly like a real one (never by writing to it directly).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
from pathlib import Path

from milepost.example_db.generate import write_demo

CONTRACT = Path(__file__).resolve().parent / "contract"


def _milepost(*args: str | Path) -> int:
    cmd = [sys.executable, "-m", "milepost.validate", *map(str, args)]
    print("$ milepost " + " ".join(map(str, args)), flush=True)
    return subprocess.run(cmd, check=False).returncode  # noqa: S603 - our own entry point, an argv list, no shell


def main(argv: list[str] | None = None) -> int:
    """Write the demo into OUT, check every submission, ingest them into DB; exit 1 if a step fails unexpectedly."""
    ap = argparse.ArgumentParser(prog="python -m milepost.example_db.demo", description=__doc__)
    ap.add_argument("out", type=Path, help="folder for the generated submission files")
    ap.add_argument("--db", type=Path, required=True, help="database to build (replaced if it exists)")
    args = ap.parse_args(argv)
    files = write_demo(args.out)
    print(f"wrote {len(files.all_paths())} demo files into {args.out} in {files.seconds:.1f} s\n", flush=True)
    batches = [(model, paths, 0) for model, paths in files.submissions.items()]
    batches += [("flawed", files.flawed, 1), ("revision", files.revision, 0)]
    for name, paths, expected in batches:
        code = _milepost("check", *paths, "--contract", CONTRACT, "--limit", "12")
        print(flush=True)
        if code != expected:
            print(f"unexpected exit code {code} for the {name} submission", file=sys.stderr)
            return 1
    if args.db.exists():
        args.db.unlink()
    for name, paths, expected in batches:
        code = _milepost(
            "ingest",
            *paths,
            "--db",
            args.db,
            "--contract",
            CONTRACT,
            "--by",
            "demo",
            "--note",
            f"demo submission: {name}",
            "--harmonise",
        )
        if code != expected:
            print(f"unexpected exit code {code} when ingesting the {name} submission", file=sys.stderr)
            return 1
    _milepost("submissions", "--db", args.db)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
