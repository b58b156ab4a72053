"""An empty long-format submission template for a contract: CSV header, or XLSX with drop-down lists."""

from __future__ import annotations

from pathlib import Path
from typing import cast

from milepost.schema.contract import Contract
from milepost.validate.outputs import save_workbook, writing
from milepost.validate.readers import LONG_COLUMNS

TEMPLATE_ROWS = 5000  # rows that carry the drop-down validation in the XLSX template


def write_template(contract: Contract, path: Path) -> Path:
    """Write the template; the format follows the suffix (.xlsx or .csv)."""
    if path.suffix.lower() == ".csv":
        with writing(path):
            path.write_text(",".join(LONG_COLUMNS) + "\n", encoding="utf-8")
        return path
    import openpyxl
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.datavalidation import DataValidation
    from openpyxl.worksheet.worksheet import Worksheet

    wb = openpyxl.Workbook()
    data = cast(Worksheet, wb.active)  # a new workbook's active sheet is its one worksheet
    data.title = "data"
    data.append(list(LONG_COLUMNS))
    for c in data[1]:
        c.font = Font(bold=True)
    data.freeze_panes = "A2"
    lists = wb.create_sheet("lists")
    columns = {
        "region": sorted(contract.regions),
        "variable": list(contract.variables),
        "unit": sorted({v.unit for v in contract.variables.values()}),
    }
    for j, (name, values) in enumerate(columns.items(), start=1):
        lists.cell(row=1, column=j, value=name).font = Font(bold=True)
        for i, v in enumerate(values, start=2):
            lists.cell(row=i, column=j, value=v)
        letter = get_column_letter(j)
        target = get_column_letter(LONG_COLUMNS.index(name) + 1)
        dv = DataValidation(
            type="list",
            formula1=f"=lists!${letter}$2:${letter}${len(values) + 1}",
            allow_blank=True,
            showErrorMessage=True,
            error=f"Not a {name} of contract {contract.name}",
            errorTitle=f"unknown {name}",
        )
        if name == "region" and contract.countries:
            dv.showErrorMessage = False  # ISO 3166 codes are allowed too, so the list is a suggestion only
        data.add_data_validation(dv)
        dv.add(f"{target}2:{target}{TEMPLATE_ROWS + 1}")
    year_col = get_column_letter(LONG_COLUMNS.index("year") + 1)
    yv = DataValidation(
        type="whole",
        operator="between",
        formula1=str(contract.first_year),
        formula2=str(contract.last_year),
        showErrorMessage=True,
        error=f"A whole year in {contract.first_year}–{contract.last_year}",
    )
    data.add_data_validation(yv)
    yv.add(f"{year_col}2:{year_col}{TEMPLATE_ROWS + 1}")
    info = wb.create_sheet("variables")
    info.append(["variable", "unit", "required", "sign", "regions", "parts", "description"])
    for var in contract.variables.values():
        info.append(
            [
                var.name,
                var.unit,
                var.required,
                var.sign,
                var.regions,
                ", ".join(f"{p.variable} × {p.factor:g}" for p in var.parts),
                var.description,
            ]
        )
    sc = wb.create_sheet("scenarios")
    sc.append(["model", "scenario", "reference"])
    info["A1"].font = sc["A1"].font = Font(bold=True)
    save_workbook(wb, path)
    return path
