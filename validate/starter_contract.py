"""A starter contract: the commented files `milepost contract new` writes, extending the core contract or another.

Every setting the loader knows is shown, commented out, with what it does, so a new intercomparison starts from a
contract that already loads and lints, and changes only what differs from the one it extends.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

from milepost.schema.contract import CORE_DIR, load
from milepost.validate.errors import UsageError
from milepost.validate.outputs import writing

CONTRACT_TOML = """\
# Contract of the intercomparison "{name}": what every submission must hold and how it is checked.
# Written by `milepost contract new`; check it with `milepost contract lint {folder}`.
# Everything commented out is inherited from the contract this one extends ({parent}); uncomment to change it.
name = "{name}"
description = "{name}: describe the intercomparison here."
extends = "{extends}"
# discount_rate = 5.0            # %/yr, for net-present-value costs

# Years reported, the base year (harmonisation, reference values) and the milestones indicators are read at.
# [years]
# first = 2010
# last = 2100
# base = 2020
# milestones = [2030, 2050, 2100]
# required_regions = ["World"]   # regions where required variables must be reported

# Sums of parts and regions must hold within max(sum_relative * |total|, sum_absolute).
# [tolerance]
# sum_relative = 0.01
# sum_absolute = 0.001
# base_year_relative = 0.10      # base-year values within 10 % of reference.csv

# Units that convert only where the intercomparison accepts them.
# [units]
# carbon_to_co2 = false          # accept Mt C for Mt CO2 (x 44.009/12.011)
# nitrogen_to_n2o = false        # accept kt N2O-N for kt N2O (x 44.013/28.014)

# Cost indicators (losses against each model's reference scenario).
# [costs]
# reference_required = false     # true: every scenario that is no scenario's reference must name one

# Severity of a rule for this intercomparison (`milepost rules` lists them): error, warning or note.
# [severity]
# out-of-bounds = "error"

# Base-year harmonisation (`milepost harmonise`, `milepost ingest --harmonise`).
# [harmonise]
# variables = ["emissions.*"]
# method = "converging-ratio"    # ratio | offset | converging-ratio | converging-offset
# converge_year = 2050

# Delay comparisons: scenarios of one model with the same values of `match` pair up, ordered by `order`
# (both are columns of the scenarios table).
# [pairs]
# match = ["ambition"]
# order = "policy_start"
"""

VARIABLES_TOML = """\
# Variables of "{name}" beyond those of {parent} (a variable of the same name here replaces the inherited one).
# unit      the contract unit; submissions in compatible units are converted to it
# required  must be reported for every scenario at the base year and each milestone (in required_regions)
# sign      "any" or "non-negative"
# regions   how the variable aggregates over regions: "sum", "none" (intensive) or "zero" (regions net to zero)
# parts     variables whose sum (times `factor`) equals this one
#
# ["energy.final.hydrogen"]
# unit = "EJ/yr"
# description = "Final energy from hydrogen."
# sign = "non-negative"
"""

REGIONS_TOML = """\
# Regions of "{name}" beyond those of {parent}. `parts` = regions whose values sum to this one.
# countries = true accepts every ISO 3166-1 alpha-3 code as a region name.
# countries = false
#
# ["North"]
# description = "The northern countries of the intercomparison."
# parts = ["NOR", "SWE", "FIN"]
"""

README = """\
Optional files beside these (see the core contract's documentation in README.md):
  reference.csv  region,variable,unit,year,value  base-year reference values (base-year-deviation, harmonisation)
  bounds.csv     variable,region,year_from,year_to,low,high  plausibility bounds (out-of-bounds)
"""


def write_starter(folder: Path, extends: str = "core", name: str | None = None) -> list[Path]:
    """Write a commented starter contract into `folder` (new or empty) extending `extends` ("core" or a contract
    folder); returns the files written. Raises UsageError for a folder in use or a parent that is no contract."""
    if folder.exists() and (not folder.is_dir() or any(folder.iterdir())):
        raise UsageError(f"{folder} exists and is not an empty folder; choose a new folder for the contract")
    name = name or folder.resolve().name
    if not re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9._-]*", name):
        raise UsageError(f"contract name {name!r}: use letters, digits, '.', '_' and '-' (give --name)")
    parent_dir = CORE_DIR if extends == "core" else Path(extends)
    if not (parent_dir / "contract.toml").exists():
        raise UsageError(f"--extends {extends}: not a contract folder (no contract.toml)")
    parent = load(parent_dir)
    with writing(folder):
        folder.mkdir(parents=True, exist_ok=True)
    # a folder is named relative to the new one, so the two can move together
    ref = "core" if extends == "core" else Path(os.path.relpath(parent_dir.resolve(), folder.resolve())).as_posix()
    fields = {"name": name, "parent": f"contract {parent.name}", "extends": ref, "folder": folder.as_posix()}
    out = []
    for file, text in (
        ("contract.toml", CONTRACT_TOML),
        ("variables.toml", VARIABLES_TOML),
        ("regions.toml", REGIONS_TOML),
        ("README.txt", README),
    ):
        path = folder / file
        with writing(path):
            path.write_text(text.format(**fields), encoding="utf-8")
        out.append(path)
    return out


__all__ = ["write_starter"]
