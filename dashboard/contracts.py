"""Which contract the dashboard uses for reference values and the self-check, and how it was found."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import streamlit as st

from milepost.schema.contract import Contract, ContractError, load
from milepost.validate.store.contracts import bundled_dirs

ENV_CONTRACT = "MILEPOST_CONTRACT"


@dataclass(frozen=True)
class Found:
    """A loaded contract (or None) and a sentence saying where it came from."""

    contract: Contract | None
    source: str


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
    for folder in bundled_dirs():
        if not (folder / "contract.toml").exists():
            continue
        try:
            c = _load(str(folder))
        except ContractError:
            continue
        if name is None or c.name == name:
            return Found(c, f"bundled contract {c.name!r}")
    return Found(None, f"contract {name!r} is not bundled; set {ENV_CONTRACT} to its folder")


@dataclass(frozen=True)
class ReferenceValue:
    """A reference value in the variable's contract unit (the unit of the stored data), and how the contract gave it."""

    value: float
    unit: str
    given_value: float
    given_unit: str


def reference_value(contract: Contract | None, region: str, variable: str, year: int | None) -> ReferenceValue | None:
    """The contract's reference value for one region, variable and year, converted into the variable's contract unit
    (as the checker compares it), if the contract has one."""
    if contract is None or year is None:
        return None
    key = (region, variable, year)
    converted = [r for r in contract.references_in_contract_units() if (r.region, r.variable, r.year) == key]
    given = [r for r in contract.reference if (r.region, r.variable, r.year) == key]
    if not converted or not given:
        return None
    return ReferenceValue(converted[0].value, converted[0].unit, given[0].value, given[0].unit)
