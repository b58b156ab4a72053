"""The self-check of uploaded files: the real checker in a child process with a memory and time budget (one upload
can never take the server down), on temporary copies, never on the database."""

from __future__ import annotations

import shutil
import tempfile
from pathlib import Path
from typing import Any

import duckdb
import pandas as pd

from milepost.schema.contract import Contract
from milepost.validate.findings import FINDING_COLUMNS, SEVERITIES
from milepost.validate.isolated import check_in_child, failure_finding


class CheckedUpload:
    """One uploaded submission, checked. Its folder (the uploads and the child's reports) is kept for the session
    so the XLSX report can be downloaded, and removed by `close`, or at once if anything fails on the way."""

    def __init__(self, files: list[tuple[str, bytes]], contract: Contract) -> None:
        self.dir = tempfile.mkdtemp(prefix="milepost-selfcheck-")
        try:
            self._check(files, contract)
        except BaseException:
            self.close()
            raise

    def _check(self, files: list[tuple[str, bytes]], contract: Contract) -> None:
        inputs = Path(self.dir) / "in"
        inputs.mkdir()
        paths = []
        for name, data in files:
            p = inputs / (Path(name).name or "upload")
            p.write_bytes(data)
            paths.append(p)
        child = check_in_child(paths, Path(contract.sources[-1]), Path(self.dir) / "out")
        self.failure = child.failure
        self._xlsx = child.xlsx_path
        if child.failure is not None:
            self.counts = {s: 0 for s in SEVERITIES} | {"error": 1}
            self.rows = 0
            self.findings = pd.DataFrame(
                [{c: None for c in FINDING_COLUMNS} | failure_finding(child, [n for n, _ in files])]
            )
            self.json = ""
            return
        summary: dict[str, Any] = child.summary
        self.counts, self.rows = summary["counts"], summary["rows"]
        con = duckdb.connect(":memory:")
        try:
            self.findings = con.execute("SELECT * FROM read_parquet(?)", [str(child.findings_path)]).df()
        finally:
            con.close()
        # the temporary folder means nothing to the user: show the uploaded file names
        self.findings["path"] = self.findings["path"].str.replace(f"{inputs}/", "", regex=False)
        self.json = child.json_path.read_text(encoding="utf-8") if child.json_path else ""

    def xlsx(self) -> bytes:
        """The XLSX report (summary, findings, marked copies of the files) the child wrote, or nothing."""
        return self._xlsx.read_bytes() if self._xlsx is not None and self._xlsx.exists() else b""

    def close(self) -> None:
        shutil.rmtree(self.dir, ignore_errors=True)
