"""The scenarios table skips pandera when nothing can fail; pandera itself (PyPI) is the reference for when that is."""

from __future__ import annotations

import pandas as pd
import pandera.pandas as pa
import pytest

from milepost.validate.scenario_table import validate_scenarios

SCHEMA = pa.DataFrameSchema(
    {"model": pa.Column(str, nullable=False), "scenario": pa.Column(str, nullable=False)},
    unique=["model", "scenario"],
    report_duplicates="exclude_first",
    coerce=True,
)

FRAMES = {
    "clean": {"model": ["A", "A", "B"], "scenario": ["s1", "s2", "s1"], "reference": ["s1", "s1", None]},
    "repeat": {"model": ["A", "A", "A"], "scenario": ["s1", "s2", "s1"], "reference": [None, "s1", None]},
    "conflict": {"model": ["A", "A"], "scenario": ["s1", "s1"], "reference": ["x", "y"]},
    "numbers read as text": {"model": ["1", "1"], "scenario": ["2", "2.0"], "reference": [None, None]},
    "mixed types": {"model": [1, "1"], "scenario": ["s", "s"], "reference": [None, None]},
}


def _pandera_passes(frame: pd.DataFrame) -> bool:
    try:
        SCHEMA.validate(frame, lazy=True)
    except pa.errors.SchemaErrors:
        return False
    return True


@pytest.mark.parametrize("name", sorted(FRAMES))
def test_no_findings_exactly_when_pandera_passes_the_table(name: str) -> None:
    frame = pd.DataFrame(FRAMES[name])
    kept, findings = validate_scenarios(frame, "scenarios.csv", None)
    if _pandera_passes(frame):
        assert findings == [] and kept is frame
    else:
        assert findings and len(kept) < len(frame)


def test_repeated_rows_are_reported_on_their_lines() -> None:
    kept, findings = validate_scenarios(pd.DataFrame(FRAMES["repeat"]), "scenarios.csv", None)
    assert [(f.rule, f.line) for f in findings] == [("duplicate-row", 4)]  # header = line 1, third row = line 4
    assert list(kept["scenario"]) == ["s1", "s2"]
