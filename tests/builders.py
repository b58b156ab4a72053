"""Small consistent submissions built from a contract, for tests that then break exactly one thing."""

from __future__ import annotations

import csv
import hashlib
from pathlib import Path

from milepost.schema.contract import Contract

HEADER = ["model", "scenario", "region", "variable", "unit", "year", "value"]


def _leaf_value(name: str, region: str, year: int) -> float:
    h = int(hashlib.sha256(f"{name}|{region}|{year}".encode()).hexdigest()[:8], 16)
    return 10.0 + (h % 9000) / 10.0


def consistent_rows(
    contract: Contract, model: str = "M1", scenario: str = "S1", years: tuple[int, ...] | None = None
) -> list[dict]:
    """Every contract variable in every leaf region and its parent, with all sums exact."""
    years = years or (contract.base_year, *contract.milestones)
    parents = {r.name: r.parts for r in contract.regions.values() if r.parts}
    leaves = sorted({p for parts in parents.values() for p in parts}) or list(contract.required_regions)

    def value(var: str, region: str, year: int) -> float:
        v = contract.variables[var]
        if v.parts:
            return sum(p.factor * value(p.variable, region, year) for p in v.parts)
        if region in parents and v.regions == "sum":
            return sum(value(var, r, year) for r in parents[region])
        if v.regions == "none":
            return _leaf_value(var, "any", year)
        if v.regions == "zero":
            if region in parents:
                return 0.0
            i = leaves.index(region)
            base = _leaf_value(var, "any", year)
            return base * (1 if i % 2 == 0 else -1) if len(leaves) % 2 == 0 else (base * (i - (len(leaves) - 1) / 2))
        return _leaf_value(var, region, year)

    regions = [*parents, *[r for r in leaves if r not in parents]]
    return [
        {
            "model": model,
            "scenario": scenario,
            "region": r,
            "variable": v.name,
            "unit": v.unit,
            "year": y,
            "value": round(value(v.name, r, y), 9),
        }
        for r in regions
        for v in contract.variables.values()
        for y in years
    ]


def write_csv(
    path: Path, rows: list[dict], header: list[str] | None = None, delimiter: str = ",", encoding: str = "utf-8"
) -> Path:
    """Write rows as CSV; row i (0-based) lands on physical line i + 2."""
    header = header or HEADER
    with path.open("w", newline="", encoding=encoding) as f:
        w = csv.DictWriter(f, fieldnames=header, delimiter=delimiter, extrasaction="ignore")
        w.writeheader()
        w.writerows(rows)
    return path


def write_xlsx(path: Path, sheets: dict[str, list[list]]) -> Path:
    """Write a workbook of the given sheets (name -> rows of cells, header first), in order."""
    import openpyxl

    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for r in rows:
            ws.append(r)
    wb.save(path)
    return path


def table_of(rows: list[dict]) -> list[list]:
    """Rows as a header line and one list of cells per row, for `write_xlsx`."""
    return [list(rows[0]), *(list(r.values()) for r in rows)]


def line_of(rows: list[dict], **key: object) -> int:
    """Physical CSV line of the first row matching every key given."""
    for i, r in enumerate(rows):
        if all(r[k] == v for k, v in key.items()):
            return i + 2
    raise KeyError(key)
