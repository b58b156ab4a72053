"""Hostile inputs built on the fly: broken contracts, damaged workbooks and databases (small on disk)."""

from __future__ import annotations

from pathlib import Path

HEAD = 'name = "broken"\nextends = "core"\n'
REF_HEADER = "region,variable,unit,year,value\n"

# name -> files of a contract folder that extends the core contract; each breaks one thing
BROKEN_CONTRACTS: dict[str, dict[str, str | bytes]] = {
    "unit-open-paren": {"variables.toml": '["emissions.co2"]\nunit = "Mt CO2/("\n'},
    "unit-one-over-zero": {"variables.toml": '["emissions.co2"]\nunit = "1/0"\n'},
    "unit-empty": {"variables.toml": '["emissions.co2"]\nunit = ""\n'},
    "unit-number": {"variables.toml": '["emissions.co2"]\nunit = 5\n'},
    "reference-short-header": {"reference.csv": "region,variable\nWorld,emissions.co2\n"},
    "reference-short-row": {"reference.csv": REF_HEADER + "World,emissions.co2\n"},
    "reference-latin1": {"reference.csv": (REF_HEADER + "Wörld,emissions.co2,Mt CO2/yr,2020,1\n").encode("latin-1")},
    "reference-nan": {"reference.csv": REF_HEADER + "World,emissions.co2,Mt CO2/yr,2020,nan\n"},
    "tolerance-not-a-table": {"contract.toml": HEAD + "tolerance = 5\n"},
    "tolerance-negative": {"contract.toml": HEAD + "[tolerance]\nsum_relative = -0.01\n"},
    "severity-not-a-table": {"contract.toml": HEAD + 'severity = "error"\n'},
    "years-text": {"contract.toml": HEAD + '[years]\nfirst = "2010"\nlast = 2100\nbase = 2020\n'},
    "years-fraction": {"contract.toml": HEAD + "[years]\nfirst = 2010.7\nlast = 2100\nbase = 2020\n"},
    "discount-nan": {"contract.toml": HEAD + "discount_rate = nan\n"},
    "parts-a-text": {"variables.toml": '["emissions.co2"]\nunit = "Mt CO2/yr"\nparts = "emissions.co2.fossil"\n'},
    "region-parts-number": {"regions.toml": '["World"]\nparts = 5\n'},
    "deflator-missing-key": {"contract.toml": HEAD + '[[units.deflators]]\nfrom = "USD_2010"\nfactor = 1.1\n'},
    "deflator-missing": {"reference.csv": REF_HEADER + "World,price.carbon,USD_2010/t CO2,2020,5\n"},
    "units-not-a-table": {"contract.toml": HEAD + 'units = "SI"\n'},
    "toml-broken": {"contract.toml": HEAD + "[years\n"},
}


def broken_contract(root: Path, name: str) -> Path:
    """Write the broken contract `name` into a folder of its own under `root`."""
    folder = root / f"contract-{name}"
    folder.mkdir(parents=True, exist_ok=True)
    files = {"contract.toml": HEAD, **BROKEN_CONTRACTS[name]}
    for file, content in files.items():
        path = folder / file
        if isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")
    return folder
