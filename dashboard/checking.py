"""The self-check of uploaded files: run the real checker in memory on temporary copies, never on the database."""

from __future__ import annotations

import tempfile
from pathlib import Path

import pandas as pd

from milepost.schema.contract import Contract
from milepost.validate.store.database import connect_memory


class CheckedUpload:
    """One uploaded submission, checked. Kept for the session: the XLSX report copies the uploaded files with
    the offending cells marked, so the files must outlive the check until the report is asked for."""

    def __init__(self, files: list[tuple[str, bytes]], contract: Contract) -> None:
        from milepost.validate import reports
        from milepost.validate.runner import run_check

        self.dir = tempfile.TemporaryDirectory(prefix="milepost-selfcheck-")
        paths = []
        for name, data in files:
            p = Path(self.dir.name) / Path(name).name
            p.write_bytes(data)
            paths.append(p)
        self.con = connect_memory()
        self.result = run_check(paths, contract, con=self.con)
        self.findings: pd.DataFrame = self.con.execute("SELECT * FROM findings").df()
        # the temporary folder means nothing to the user: show the uploaded file names
        self.findings["path"] = self.findings["path"].str.replace(f"{self.dir.name}/", "", regex=False)
        self.json = reports.to_json(self.result)

    def xlsx(self) -> bytes:
        """The XLSX report (summary, findings, marked copies of the files), built on demand."""
        from milepost.validate import reports

        # A folder of its own: an upload may be called report.xlsx too, and a report never replaces an input.
        out = Path(self.dir.name) / "report" / "milepost-check.xlsx"
        out.parent.mkdir(exist_ok=True)
        reports.to_xlsx(self.result, out, force=True)
        return out.read_bytes()

    def close(self) -> None:
        self.con.close()
        self.dir.cleanup()
