"""Shared fixtures: the core and demo contracts, and a checker that runs on real files in tmp_path."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pytest
from hypothesis import settings

from milepost.schema.contract import Contract, load
from milepost.validate.runner import CheckResult, run_check

ROOT = Path(__file__).resolve().parents[1]
DEMO_CONTRACT = ROOT / "example_db" / "contract"
BASIC_CONTRACT = Path(__file__).parent / "contracts" / "basic"

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
def check() -> Callable[..., CheckResult]:
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
