"""Which contract the dashboard uses for reference values and the self-check, and how it was found."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import streamlit as st

from milepost.schema.contract import CORE_DIR, Contract, ContractError, load

ENV_CONTRACT = "MILEPOST_CONTRACT"


@dataclass(frozen=True)
class Found:
    """A loaded contract (or None) and a sentence saying where it came from."""

    contract: Contract | None
    source: str


def _demo_dir() -> Path:
    import milepost.example_db

    return Path(milepost.example_db.__file__).parent / "contract"


@st.cache_resource(max_entries=8, show_spinner=False)
def _load(path: str) -> Contract:
    return load(path)


def find(name: str | None) -> Found:
    """The contract for the database's `contract_name`.

    Order: the folder in env MILEPOST_CONTRACT (used as given, with a note if its name differs); else the
    bundled contract (core or the demo) whose name matches; else none.
    """
    env = os.environ.get(ENV_CONTRACT)
    if env:
        try:
            c = _load(str(Path(env).resolve()))
        except ContractError as e:
            return Found(None, f"{ENV_CONTRACT}={env} could not be read: {e}")
        note = "" if name in (None, c.name) else f" (the database names contract {name!r})"
        return Found(c, f"contract {c.name!r} from {ENV_CONTRACT}{note}")
    for folder in (_demo_dir(), CORE_DIR):
        if not (folder / "contract.toml").exists():
            continue
        try:
            c = _load(str(folder))
        except ContractError:
            continue
        if name is None or c.name == name:
            return Found(c, f"bundled contract {c.name!r}")
    return Found(None, f"contract {name!r} is not bundled; set {ENV_CONTRACT} to its folder")


def reference_value(
    contract: Contract | None, region: str, variable: str, year: int | None
) -> tuple[float, str] | None:
    """The contract's reference value (value, unit) for one region, variable and year, if it has one."""
    if contract is None or year is None:
        return None
    match = [r for r in contract.reference if (r.region, r.variable, r.year) == (region, variable, year)]
    return (match[0].value, match[0].unit) if match else None
