"""Shared fixtures: the core and demo contracts, a checker that runs on real files in tmp_path, the `milepost`
entry point run on many command lines in one process, and (as a plugin) the dashboard's demo database."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from hypothesis import settings

from milepost.schema.contract import Contract, load
from milepost.validate.runner import CheckResult, run_check

ROOT = Path(__file__).resolve().parents[1]
DEMO_CONTRACT = ROOT / "example_db" / "contract"
BASIC_CONTRACT = Path(__file__).parent / "contracts" / "basic"

# The demo database and its helpers are fixtures of the dashboard tests, the CLI tests and the browser test.
pytest_plugins = ["dashboard_fixtures"]

settings.register_profile("ci", max_examples=40, deadline=None)
settings.load_profile("ci")


@pytest.fixture(scope="session")
def core() -> Contract:
    return load()


@pytest.fixture(scope="session")
def demo_contract() -> Contract:
    return load(DEMO_CONTRACT)


@pytest.fixture(scope="session")
def basic() -> Contract:
    """Core variables, five regions summing to World, no reference values or bounds."""
    return load(BASIC_CONTRACT)


@pytest.fixture
def check() -> Iterator[Callable[..., CheckResult]]:
    """run_check, closing the DuckDB connection it opened when the test ends."""
    opened: list[CheckResult] = []

    def run(paths: list[Path] | Path, contract: Contract) -> CheckResult:
        r = run_check(paths if isinstance(paths, list) else [paths], contract)
        opened.append(r)
        return r

    yield run
    for r in opened:
        r.con.close()


def rules_at(result: CheckResult, rule: str) -> list:
    """Findings of one rule."""
    return [f for f in result.findings if f.rule == rule]


# Runs `milepost` (its real entry point, `main`) once per argv in one process, so a traceback that escaped any of
# them ends the process and shows on stderr. Prints "EXIT <code>" on stderr after each command.
_DRIVER = textwrap.dedent("""
    import json, sys
    from milepost.validate.cli import main
    for argv in json.loads(sys.argv[1]):
        sys.argv = ["milepost", *argv]
        try:
            main()
        except SystemExit as e:
            print(f"EXIT {e.code if e.code is not None else 0}", file=sys.stderr, flush=True)
""")


@pytest.fixture
def run_milepost(tmp_path: Path) -> Callable[..., tuple[list[int], str]]:
    """run(commands, stdout=None) -> (exit code of each command, all of stderr); logs go to tmp_path/logs."""

    def run(commands: list[list[str]], stdout: Any = subprocess.PIPE) -> tuple[list[int], str]:
        env = {**os.environ, "MILEPOST_LOG_DIR": str(tmp_path / "logs"), "COLUMNS": "200"}
        proc = subprocess.run(
            [sys.executable, "-c", _DRIVER, json.dumps([[str(a) for a in c] for c in commands])],
            stdout=stdout,
            stderr=subprocess.PIPE,
            text=True,
            timeout=300,
            env=env,
        )
        assert proc.returncode == 0, proc.stderr[-3000:]
        return [int(line.split()[1]) for line in proc.stderr.splitlines() if line.startswith("EXIT ")], proc.stderr

    return run
