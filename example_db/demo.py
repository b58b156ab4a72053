"""`make demo`: write the invented demo submissions, check each one, and load them through `milepost ingest`.

Each submission is stored twice over, as submitted and harmonised to the contract's base-year reference values
(`--harmonise`), so the dashboard can show raw and harmonised pathways side by side.

Everything goes through the real command line, as an assessment author would run it, so the demo database is
built exactly like a real one (never by writing to it directly).

A database built from the same inputs (the generator, the demo contract, milepost's version and its database
schema and indicator definitions) is reused: a stamp of those inputs is written beside it (`DB.inputs`) once it
is complete, and `--rebuild` builds it again regardless.
"""

from __future__ import annotations

import argparse
import hashlib
import subprocess
import sys
from pathlib import Path

from milepost.example_db.generate import write_demo

CONTRACT = Path(__file__).resolve().parent / "contract"
HERE = Path(__file__).resolve().parent


def inputs_stamp(contract: Path = CONTRACT) -> str:
    """sha256 of what the demo database is built from: milepost's version, the generator, the contract files,
    and the database schema and indicator definitions it is stored under."""
    import milepost.schema
    from milepost.validate import __version__

    schema = Path(milepost.schema.__file__).resolve().parent
    files = [HERE / "generate.py", HERE / "demo.py", schema / "database.sql", schema / "indicators.toml"]
    files += sorted(p for p in contract.iterdir() if p.is_file())
    h = hashlib.sha256(f"milepost {__version__}\n".encode())
    for f in files:
        h.update(f"{f.name}\n".encode())
        h.update(f.read_bytes())
    return h.hexdigest()


def stamp_path(db: Path) -> Path:
    """The file beside the database that holds the stamp of the inputs it was built from."""
    return db.with_name(db.name + ".inputs")


def is_current(db: Path, stamp: str) -> bool:
    """Whether `db` was completely built from inputs with this stamp, and opens as a Milepost database."""
    from milepost.validate.errors import LoadError
    from milepost.validate.store.database import Reader

    try:
        if not db.is_file() or stamp_path(db).read_text(encoding="utf-8").strip() != stamp:
            return False
        with Reader(db):
            return True
    except (OSError, LoadError):
        return False


def _milepost(*args: str | Path) -> int:
    cmd = [sys.executable, "-m", "milepost.validate", *map(str, args)]
    print("$ milepost " + " ".join(map(str, args)), flush=True)
    return subprocess.run(cmd, check=False).returncode  # noqa: S603 - our own entry point, an argv list, no shell


def main(argv: list[str] | None = None) -> int:
    """Write the demo into OUT, check every submission, ingest them into DB; exit 1 if a step fails unexpectedly."""
    ap = argparse.ArgumentParser(prog="python -m milepost.example_db.demo", description=__doc__)
    ap.add_argument("out", type=Path, help="folder for the generated submission files")
    ap.add_argument("--db", type=Path, required=True, help="database to build (replaced unless it is up to date)")
    ap.add_argument("--rebuild", action="store_true", help="build the database again even if it is up to date")
    args = ap.parse_args(argv)
    stamp = inputs_stamp()
    if not args.rebuild and is_current(args.db, stamp):
        print(
            f"{args.db} is up to date (built from this generator, contract and milepost version); "
            "--rebuild (make demo REBUILD=1) builds it again",
            flush=True,
        )
        return 0
    stamp_path(args.db).unlink(missing_ok=True)  # a database half built is never taken for a current one
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
    stamp_path(args.db).write_text(stamp + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
