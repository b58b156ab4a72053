"""`milepost contract new`: a commented starter contract that loads, lints and checks like the one it extends."""

from __future__ import annotations

import tomllib
from pathlib import Path

from typer.testing import CliRunner

from milepost.example_db import generate as demo
from milepost.schema.contract import load
from milepost.validate.cli import app

from builders import consistent_rows, write_csv


def run(*args: str):
    return CliRunner().invoke(app, [str(a) for a in args])


def test_new_then_lint_passes_and_inherits_the_core_contract(tmp_path: Path, core, check) -> None:
    folder = tmp_path / "my-comparison"
    r = run("contract", "new", folder)
    assert r.exit_code == 0, r.output
    assert r.stdout.startswith("wrote contract.toml, variables.toml, regions.toml, README.txt in ")
    lint = run("contract", "lint", folder)
    assert lint.exit_code == 0, lint.output
    *advice, verdict = lint.stdout.splitlines()
    assert verdict.startswith("PASSED: contract my-comparison (")
    # the starter's World has no parts yet: the lint says no burden-sharing rows would be computed, and passes
    assert [line.split(": ")[1] for line in advice] == ["warning allocation-no-parts"]
    c = load(folder)
    assert (c.name, set(c.variables), c.base_year) == ("my-comparison", set(core.variables), core.base_year)
    # every commented-out setting is valid TOML once uncommented (the lines the user is invited to change)
    text = (folder / "contract.toml").read_text()
    settings = "\n".join(
        line[2:] for line in text.splitlines() if (line.startswith("# ") and "=" in line) or line.startswith("# [")
    )
    tomllib.loads(settings)
    # a consistent submission for the core contract passes it too
    path = write_csv(tmp_path / "s.csv", consistent_rows(core))
    assert check(path, c).counts == check(path, core).counts


def test_new_extends_another_folder_and_refuses_a_folder_in_use(tmp_path: Path) -> None:
    folder = tmp_path / "child"
    r = run("contract", "new", folder, "--extends", demo.CONTRACT_DIR, "--name", "child-of-demo")
    assert r.exit_code == 0, r.output
    assert run("contract", "lint", folder).exit_code == 0
    child, parent = load(folder), load(demo.CONTRACT_DIR)
    assert child.name == "child-of-demo" and set(child.regions) == set(parent.regions)
    assert tomllib.loads((folder / "contract.toml").read_text())["extends"].startswith("..")
    again = run("contract", "new", folder)
    assert again.exit_code == 2 and "is not an empty folder" in again.stderr
    bad = run("contract", "new", tmp_path / "x", "--extends", tmp_path)
    assert bad.exit_code == 2 and "not a contract folder" in bad.stderr
