"""The wheel ships every module and data file of the four package folders, under the one `milepost` namespace."""

from __future__ import annotations

import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("schema", "validate", "dashboard", "example_db")


def _tracked() -> list[str]:
    """The files git knows under the package folders (generated demo files and caches are not part of them)."""
    if shutil.which("git") is None or not (ROOT / ".git").exists():
        pytest.skip("needs a git checkout to tell source files from generated ones")
    out = subprocess.run(
        ["git", "ls-files", "--cached", "--others", "--exclude-standard", *PACKAGES],  # noqa: S607 - git from PATH
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    return [line for line in out.splitlines() if (ROOT / line).is_file()]


def test_the_wheel_holds_every_package_and_data_file(tmp_path: Path) -> None:
    # Build from a copy, so the build leaves nothing in the working tree; without isolation, so nothing is
    # downloaded (setuptools comes with the test extras).
    src = tmp_path / "src"
    src.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy2(ROOT / name, src / name)
    tracked = _tracked()
    for rel in tracked:
        (src / rel).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(ROOT / rel, src / rel)
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-q", "-w", str(tmp_path), "."],
        cwd=src,
        check=True,
        capture_output=True,
        timeout=300,
    )
    (wheel,) = tmp_path.glob("milepost-*.whl")
    shipped = {n for n in zipfile.ZipFile(wheel).namelist() if n.startswith("milepost/")}
    missing = sorted(rel for rel in tracked if f"milepost/{rel}" not in shipped)
    assert missing == [], "left out of the wheel (list the package or its data in pyproject.toml)"
    assert all(rel.split("/")[0] in PACKAGES for rel in (n.removeprefix("milepost/") for n in shipped))
    # the console script points at the CLI module that exists in the wheel
    entry = next(n for n in zipfile.ZipFile(wheel).namelist() if n.endswith("entry_points.txt"))
    assert "milepost = milepost.validate.cli:main" in zipfile.ZipFile(wheel).read(entry).decode()
    assert "milepost/validate/cli/__init__.py" in shipped
