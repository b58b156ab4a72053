"""`make demo` reuses a demo database built from the same inputs, and builds it again when one changes."""

from __future__ import annotations

import shutil
from pathlib import Path

from milepost.example_db import demo


def test_an_up_to_date_demo_database_is_reused(tmp_path: Path, demo_db: Path, capsys) -> None:
    db = tmp_path / "demo.duckdb"
    shutil.copy(demo_db, db)
    stamp = demo.inputs_stamp()
    assert not demo.is_current(db, stamp)  # no stamp beside it: not known to be complete
    demo.stamp_path(db).write_text(stamp + "\n")
    assert demo.is_current(db, stamp)
    before = db.stat().st_mtime_ns
    assert demo.main([str(tmp_path / "files"), "--db", str(db)]) == 0
    assert "is up to date" in capsys.readouterr().out
    assert db.stat().st_mtime_ns == before and not (tmp_path / "files").exists()  # nothing generated or written
    # a stamp of other inputs, or a file that is not a database, is not current
    assert not demo.is_current(db, "0" * 64)
    broken = tmp_path / "broken.duckdb"
    broken.write_bytes(b"not a database")
    demo.stamp_path(broken).write_text(stamp)
    assert not demo.is_current(broken, stamp)


def test_the_stamp_follows_the_contract(tmp_path: Path) -> None:
    contract = tmp_path / "contract"
    shutil.copytree(demo.CONTRACT, contract)
    assert demo.inputs_stamp(contract) == demo.inputs_stamp()
    with (contract / "contract.toml").open("a") as f:
        f.write("\n# changed\n")
    assert demo.inputs_stamp(contract) != demo.inputs_stamp()
