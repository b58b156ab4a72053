"""An empty long-format submission template for a contract: CSV header, or XLSX with drop-down lists.

The XLSX drop-downs cover every row of the sheet. The unit column offers the units of the variable chosen on
the same row: a hidden sheet `units` holds one column per variable (its contract unit first, then the units the
checker converts into it), each named `unit_<n>` after the variable's row in `lists`, and the unit cell's list
is `INDIRECT("unit_" & MATCH(variable cell, the variable list, 0))`. Named ranges and INDIRECT are how Excel and
LibreOffice both make one list depend on another.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any, cast

from milepost.schema.contract import Contract
from milepost.validate.cells import set_text
from milepost.validate.outputs import check_target, replacing, save_workbook
from milepost.validate.readers import LONG_COLUMNS

SHEET_ROWS = 1_048_576  # an Excel sheet's rows; the drop-downs cover all of them but the header
PREFIXES = "kMGTPE"  # decimal prefixes, a factor 1000 apart
_PREFIXED = re.compile(r"^([kMGTPE])(\S+)(.*)$")


def unit_choices(contract: Contract) -> dict[str, list[str]]:
    """Per variable: its contract unit, then other units the checker converts into it (the contract's own
    units and the variants one decimal prefix up and down, e.g. kt and Gt beside Mt), in a stable order."""
    pool: list[str] = []
    for v in contract.variables.values():
        m = _PREFIXED.match(v.unit)
        variants = []
        if m:
            at = PREFIXES.index(m.group(1))
            near = PREFIXES[max(at - 1, 0) : at + 2].replace(m.group(1), "")
            variants = [f"{p}{m.group(2)}{m.group(3)}" for p in near]
        for u in (v.unit, *variants):
            if u not in pool:
                pool.append(u)
    out: dict[str, list[str]] = {}
    for v in contract.variables.values():
        choices = [v.unit]
        for u in pool:
            if u != v.unit and _converts(contract, u, v.unit):
                choices.append(u)
        out[v.name] = choices
    return out


def _converts(contract: Contract, source: str, target: str) -> bool:
    try:
        return bool(contract.units.compatible(source, target))
    except Exception:  # a unit the registry cannot parse is simply not offered
        return False


def scenario_attributes(contract: Contract) -> list[str]:
    """Columns of the scenarios sheet: model, scenario, reference, then the attributes the contract reads."""
    extra: list[str] = []
    if contract.pairs is not None:
        extra = [*contract.pairs.match, contract.pairs.order]
    columns = ["model", "scenario", "reference"]
    return columns + [a for a in dict.fromkeys(extra) if a not in columns]


def write_template(contract: Contract, path: Path, *, force: bool = False) -> Path:
    """Write the template; the format follows the suffix (.xlsx or .csv). Never over a file Milepost did not
    write unless `force`."""
    path = Path(path)
    header = ",".join(LONG_COLUMNS) + "\n"
    if path.suffix.lower() == ".csv":
        again = path.is_file() and path.stat().st_size < 1024 and path.read_bytes() == header.encode()
        check_target(path, force=force or again)
        with replacing(path) as tmp:
            tmp.write_text(header, encoding="utf-8")
        return path
    check_target(path, force=force)
    save_workbook(_workbook(contract), path, "template")
    return path


def _workbook(contract: Contract) -> Any:
    import openpyxl
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter, quote_sheetname
    from openpyxl.workbook.defined_name import DefinedName
    from openpyxl.worksheet.datavalidation import DataValidation
    from openpyxl.worksheet.worksheet import Worksheet

    bold = Font(bold=True)
    wb = openpyxl.Workbook()
    data = cast(Worksheet, wb.active)  # a new workbook's active sheet is its one worksheet
    data.title = "data"
    data.append(list(LONG_COLUMNS))
    for c in data[1]:
        c.font = bold
    data.freeze_panes = "A2"
    for name, width in zip(LONG_COLUMNS, (16, 22, 12, 34, 18, 8, 12), strict=True):
        data.column_dimensions[get_column_letter(LONG_COLUMNS.index(name) + 1)].width = width

    def column(name: str) -> str:
        return get_column_letter(LONG_COLUMNS.index(name) + 1)

    def whole_column(name: str) -> str:
        return f"{column(name)}2:{column(name)}{SHEET_ROWS}"

    lists = wb.create_sheet("lists")
    choices = unit_choices(contract)
    listed = {
        "region": sorted(contract.regions),
        "variable": list(contract.variables),
        "unit": sorted({u for us in choices.values() for u in us}),
    }
    for j, (name, values) in enumerate(listed.items(), start=1):
        lists.cell(row=1, column=j, value=name).font = bold
        for i, v in enumerate(values, start=2):
            set_text(lists.cell(row=i, column=j), v)
        letter = get_column_letter(j)
        lists.column_dimensions[letter].width = max([len(name), *map(len, values)]) + 2
        if name == "unit":
            continue  # the unit column's list depends on the row's variable, below
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
        dv.add(whole_column(name))

    units = wb.create_sheet("units")
    units.sheet_state = "hidden"
    for j, (variable, options) in enumerate(choices.items(), start=1):
        set_text(units.cell(row=1, column=j), variable).font = bold
        for i, u in enumerate(options, start=2):
            set_text(units.cell(row=i, column=j), u)
        letter = get_column_letter(j)
        ref = f"{quote_sheetname('units')}!${letter}$2:${letter}${len(options) + 1}"
        wb.defined_names[f"unit_{j}"] = DefinedName(f"unit_{j}", attr_text=ref)
    n = len(contract.variables)
    var_cell = f"${column('variable')}2"  # relative row: each unit cell looks at its own row's variable
    uv = DataValidation(
        type="list",
        formula1=f'=INDIRECT("unit_"&MATCH({var_cell},lists!$B$2:$B${n + 1},0))',
        allow_blank=True,
        showErrorMessage=True,
        errorStyle="warning",  # other units that convert are accepted by the checker too
        error="Not a unit listed for this variable; milepost converts it only if it is compatible.",
        errorTitle="unit",
    )
    data.add_data_validation(uv)
    uv.add(whole_column("unit"))

    yv = DataValidation(
        type="whole",
        operator="between",
        formula1=str(contract.first_year),
        formula2=str(contract.last_year),
        showErrorMessage=True,
        error=f"A whole year in {contract.first_year}–{contract.last_year}",
    )
    data.add_data_validation(yv)
    yv.add(whole_column("year"))
    vv = DataValidation(type="decimal", operator="between", formula1="-1E+300", formula2="1E+300")
    vv.error, vv.showErrorMessage = "A number", True
    data.add_data_validation(vv)
    vv.add(whole_column("value"))

    info = wb.create_sheet("variables")
    info.append(["variable", "unit", "other units", "required", "sign", "regions", "parts", "description"])
    for r, var in enumerate(contract.variables.values(), start=2):
        row: list[Any] = [
            var.name,
            var.unit,
            ", ".join(choices[var.name][1:]),
            var.required,
            var.sign,
            var.regions,
            ", ".join(f"{p.variable} × {p.factor:g}" for p in var.parts),
            var.description,
        ]
        for j, v in enumerate(row, start=1):
            set_text(info.cell(row=r, column=j), v)
    info.freeze_panes = "A2"
    for letter, width in zip("ABCDEFGH", (34, 16, 30, 9, 13, 9, 40, 60), strict=True):
        info.column_dimensions[letter].width = width

    sc = wb.create_sheet("scenarios")
    sc.append(scenario_attributes(contract))
    for c in sc[1]:
        c.font = bold
        sc.column_dimensions[c.column_letter].width = max(14, len(str(c.value)) + 2)
    sc.freeze_panes = "A2"
    # A reference names another scenario of the same submission: offer the scenario column as its list.
    rv = DataValidation(
        type="list",
        formula1=f"=$B$2:$B${SHEET_ROWS}",
        allow_blank=True,
        showErrorMessage=True,
        errorStyle="warning",
        error="The reference should be a scenario listed in column B (its no-policy scenario).",
        errorTitle="reference",
    )
    sc.add_data_validation(rv)
    rv.add(f"C2:C{SHEET_ROWS}")
    info["A1"].font = bold
    for c in info[1]:
        c.font = bold
    return wb
