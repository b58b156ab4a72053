"""Docs stay honest: every rule is documented, the README keeps its two set-up commands, commands have help."""

from __future__ import annotations

import re
from pathlib import Path

from typer.testing import CliRunner

from milepost.validate import errors
from milepost.validate.cli import app
from milepost.validate.findings import RULES

ROOT = Path(__file__).resolve().parents[1]


def test_every_rule_is_in_the_developers_table_with_its_severity():
    text = (ROOT / "DEVELOPERS.md").read_text()
    table = dict(re.findall(r"^\| `([a-z-]+)` \| (error|warning|note) \|", text, flags=re.M))
    assert table == {r.id: r.severity for r in RULES.values()}


def test_readme_starts_with_a_paragraph_then_the_two_commands():
    text = (ROOT / "README.md").read_text()
    blocks = text.split("\n\n")
    assert blocks[0].startswith("# ")
    assert not blocks[1].startswith(("```", "#", "-"))  # the one paragraph stating the job
    commands = [line.split("#")[0].strip() for line in blocks[2].strip("`\n").splitlines()[1:]]
    assert commands == ["make demo", "make test"]


def test_every_top_level_command_has_help():
    res = CliRunner().invoke(app, ["--help"])
    assert res.exit_code == 0
    for group in app.registered_groups:
        assert group.typer_instance.info.help, group.name
    for command in app.registered_commands:
        assert (command.callback.__doc__ or "").strip(), command.name


def test_the_exit_codes_are_documented_where_users_and_developers_look():
    codes = {v for k, v in vars(errors).items() if k.startswith("EXIT_") and k != "EXIT_INTERRUPTED"}
    for doc in ("README.md", "DEVELOPERS.md"):
        text = (ROOT / doc).read_text()
        section = text.split("## Exit codes" if doc == "README.md" else "## Errors and exit codes", 1)[1]
        table = {int(c) for c in re.findall(r"^\| (\d+) \|", section.split("\n## ", 1)[0], flags=re.M)}
        assert table == codes, doc
    documented = errors.__doc__ or ""
    for cls in (errors.UsageError, errors.LoadError, errors.LockTimeout, errors.OutputError, errors.ContractError):
        line = next(line for line in documented.splitlines() if f" {cls.__name__} " in line)
        assert line.rstrip().endswith(str(cls.exit_code)), line
