"""Ingest one submission (one or more files): check it, then store it, or record why it was rejected.

Checking and loading share one DuckDB connection: `run_check` leaves the usable rows in the TEMP table
`checked` and every finding in `findings`; the database copy is attached to that same connection and filled
straight from them (see `milepost.validate.store.database.Writer` for how the copy is swapped in atomically).
"""

from __future__ import annotations

import getpass
import hashlib
import json
import time
from collections import Counter
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import duckdb

from milepost.validate.errors import LoadError, UsageError
from milepost.validate.findings import FINDING_COLUMNS, plural
from milepost.validate.progress import Stages
from milepost.validate.sql import identifier
from milepost.validate.store import recompute
from milepost.validate.store.database import NEW, Reader, Writer, connect_memory, default_db_path

DATA_COLUMNS = ("model", "scenario", "region", "variable", "unit", "year", "value")
INDICATOR_COLUMNS = ("model", "scenario", "region", "kind", "variable", "year_from", "year_to", "value", "unit", "note")
HARMONISATION_COLUMNS = (
    "model",
    "scenario",
    "region",
    "variable",
    "unit",
    "method",
    "requested",
    "factor",
    "offset_value",
    "convergence_year",
    "base_value",
    "reference_value",
    "note",
)


@dataclass
class IngestResult:
    """What one ingest did: `status` is 'accepted', 'rejected' or 'unchanged' (the same files were ingested before)."""

    status: str
    db: str
    sha256: str
    submission_id: int | None = None
    duplicate_of: int | None = None  # for 'unchanged': the earlier submission with the same files
    duplicate_status: str | None = None  # ... and its status
    model: str | None = None
    scenarios: list[str] = field(default_factory=list)
    rows: int = 0
    counts: dict[str, int] = field(default_factory=lambda: {"error": 0, "warning": 0, "note": 0})
    superseded: list[int] = field(default_factory=list)  # submissions now wholly superseded by this one
    replaced: list[dict[str, Any]] = field(default_factory=list)  # [{model, scenario, submission_id}] older versions
    refreshed: list[dict[str, Any]] = field(default_factory=list)  # older scenarios whose indicators were recomputed
    # indicator rows recomputed because a migration changed the indicator conventions (0 = none were due)
    recomputed: int = 0
    files: list[dict[str, Any]] = field(default_factory=list)
    findings: list[Any] = field(default_factory=list)  # milepost.validate.findings.Finding (capped per rule)
    reason: str = ""
    timings: dict[str, float] = field(default_factory=dict)
    harmonised: bool = False  # harmonised values were stored beside the raw ones
    harmonised_rows: int = 0
    harmonised_series: int = 0  # series adjusted (harmonised directly or rebuilt from harmonised parts)
    harmonise_counts: dict[str, int] = field(default_factory=dict)  # harmonisation findings by severity

    @property
    def exit_code(self) -> int:
        """0 stored or already stored; 1 rejected (now or before)."""
        rejected = self.status == "rejected" or (self.status == "unchanged" and self.duplicate_status == "rejected")
        return 1 if rejected else 0

    def to_dict(self) -> dict[str, Any]:
        """Plain data for `--format json`."""
        out = asdict(self)
        out["findings"] = [f.to_dict() if hasattr(f, "to_dict") else f for f in self.findings]
        out["exit_code"] = self.exit_code
        return out


class _Unchanged(Exception):
    """Raised inside the writer to abandon the copy when the submission turns out to be stored already."""

    def __init__(self, row: tuple[Any, ...]) -> None:
        super().__init__("unchanged")
        self.row = row


def submission_digest(digests: Sequence[str]) -> str:
    """The identity of a submission: sha256 over its files' sha256 digests, sorted, one per line."""
    return hashlib.sha256("\n".join(sorted(digests)).encode()).hexdigest()


def _find_repeat(
    con: duckdb.DuckDBPyConnection,
    catalog: str,
    sha: str,
    contract_hash: str,
    accept_warnings: bool,
    harmonise: bool = False,
) -> tuple[Any, ...] | None:
    """The earlier submission of the same files under the same contract whose outcome would not change."""
    c = identifier(catalog)
    # a database written before harmonised values existed (read before the writer migrates it) has no such table
    has_table = con.execute(
        "SELECT count(*) FROM duckdb_tables() WHERE database_name = ? AND table_name = 'harmonisation'", [catalog]
    ).fetchall()[0][0]
    harmonised = f"EXISTS (SELECT 1 FROM {c}.harmonisation AS h WHERE h.submission_id = s.id)" if has_table else "false"  # noqa: S608 - names from the code; values bound as parameters
    rows = con.execute(
        f"SELECT id, status, errors, warnings, {harmonised} AS harmonised FROM {c}.submissions AS s "  # noqa: S608 - names from the code; values bound as parameters
        "WHERE sha256 = ? AND contract_hash = ? ORDER BY id DESC",
        [sha, contract_hash],
    ).fetchall()
    for row in rows:
        _, status, errors, _warnings, harmonised = row
        # A rejection for warnings alone is worth retrying with --accept-warnings, and an accepted submission
        # stored without harmonised values is worth storing again with them; anything else would repeat.
        if status == "rejected" and not errors and accept_warnings:
            continue
        if status != "rejected" and harmonise and not harmonised:
            continue
        return row[:4]
    return None


def _check_repeat_before_lock(
    db: Path, sha: str, contract_hash: str, accept_warnings: bool, harmonise: bool = False
) -> tuple[Any, ...] | None:
    if not db.exists():
        return None
    # The version is not checked here: the writer migrates an older database, and refuses a newer or foreign one.
    with Reader(db, check_version=False) as reader:
        if reader.version == 0:
            return None
        return _find_repeat(reader.con, "db", sha, contract_hash, accept_warnings, harmonise)


def known_scenarios(db: Path) -> list[tuple[str, str, str | None]]:
    """The database's current (model, scenario, reference), so that a partial revision may name a reference
    submitted before (rule unknown-reference); [] without a database."""
    if not db.exists():
        return []
    from milepost.validate.store.database import view_or_definition

    with Reader(db, check_version=False) as reader:
        if reader.version == 0:
            return []
        view = view_or_definition(reader.con, "current_scenarios")
        rows = reader.con.execute(f"SELECT model, scenario, reference FROM {view}").fetchall()  # noqa: S608 - the view or its definition in database.sql
    return [(str(m), str(s), r) for m, s, r in rows]


def _unchanged(db: Path, sha: str, row: tuple[Any, ...], files: list[dict[str, Any]]) -> IngestResult:
    sid, status = row[0], row[1]
    return IngestResult(
        status="unchanged",
        db=str(db),
        sha256=sha,
        duplicate_of=int(sid),
        duplicate_status=status,
        files=files,
        reason=f"these files were already ingested as submission {sid} ({status})",
    )


def ingest(
    paths: Sequence[str | Path],
    db: str | Path | None,
    contract: Any = None,
    by: str | None = None,
    note: str | None = None,
    accept_warnings: bool = False,
    progress: bool = False,
    *,
    harmonise: bool = False,
    lock_timeout: float | None = None,
    on_wait: Callable[[str], None] | None = None,
) -> IngestResult:
    """Check `paths` as one submission against `contract` and store it in `db` (accepted) or record it (rejected).

    `contract` is a Contract, a contract folder, or None for the core contract. With `harmonise`, an accepted
    submission is also harmonised to the contract's base-year reference values (`milepost.validate.harmonise`)
    and stored a second time with basis 'harmonised', with its indicators and the method of every series.
    Raises UsageError for missing files, LoadError/LockTimeout when the database cannot be written; bad data
    never raises.
    """
    from milepost.schema.contract import Contract, load
    from milepost.validate.readers import sha256_of

    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    db_path = default_db_path(db)
    contract = contract if isinstance(contract, Contract) else load(contract)
    files = [Path(p) for p in paths]
    if not files:
        raise UsageError("no files given")
    from milepost.validate.readers import not_a_file

    missing = [f"{p} ({why})" for p in files if (why := not_a_file(p))]
    if missing:
        raise UsageError(f"not a file: {'; '.join(missing)}")
    resolved = [p.resolve() for p in files]
    if len(set(resolved)) != len(resolved):
        raise UsageError("the same file is given more than once")
    try:
        digests = [sha256_of(p) for p in files]
    except OSError as e:
        raise UsageError(f"cannot read {e.filename}: {e.strerror or e}") from None
    sha = submission_digest(digests)
    timings["hash"] = time.perf_counter() - t0

    plain_files = [
        {"path": str(p), "name": p.name, "sha256": d, "rows": None, "kind": None}
        for p, d in zip(files, digests, strict=True)
    ]
    repeat = _check_repeat_before_lock(db_path, sha, contract.hash, accept_warnings, harmonise)
    if repeat is not None:
        out = _unchanged(db_path, sha, repeat, plain_files)
        # the same files again still bring the contract, so stored indicators that wait for it are recomputed
        out.recomputed = recompute.recompute_stored(db_path, contract, timeout=lock_timeout, on_wait=on_wait)
        return out

    from milepost.validate.runner import run_check

    con = connect_memory()
    try:
        t = time.perf_counter()
        result = run_check(
            files, contract, con=con, progress=progress, digests=digests, known_scenarios=known_scenarios(db_path)
        )
        timings["check"] = time.perf_counter() - t
        file_rows = [
            # An XLSX file may hold both the data and the scenarios sheet: name the sheet so the two read apart.
            {
                "path": str(f.path),
                "name": Path(f.path).name + (f" [{f.sheet}]" if f.sheet else ""),
                "sheet": f.sheet,
                "sha256": f.sha256,
                "rows": int(f.rows),
                "kind": f.kind,
            }
            for f in result.inputs
        ]
        counts = {k: int(result.counts.get(k, 0)) for k in ("error", "warning", "note")}
        accepted = result.passed("error") and (accept_warnings or counts["warning"] == 0)
        bar = Stages(f"Loading {int(result.rows):,} rows", 4, enabled=progress, started=t0)
        try:
            t = time.perf_counter()
            with Writer(db_path, con, timeout=lock_timeout, on_wait=on_wait) as w:
                timings["lock_and_copy"] = time.perf_counter() - t
                repeat = _find_repeat(con, NEW, sha, contract.hash, accept_warnings, harmonise)
                if repeat is not None:
                    raise _Unchanged(repeat)
                if _settle_references(con, result):
                    counts = {k: int(result.counts.get(k, 0)) for k in ("error", "warning", "note")}
                    accepted = result.passed("error") and (accept_warnings or counts["warning"] == 0)
                out = _store(
                    w,
                    con,
                    result,
                    contract,
                    sha=sha,
                    files=file_rows,
                    counts=counts,
                    accepted=accepted,
                    by=by,
                    note=note,
                    bar=bar,
                    timings=timings,
                    harmonise=harmonise,
                )
                bar.step("writing the database file")
                t = time.perf_counter()
            timings["commit_and_swap"] = time.perf_counter() - t
        except _Unchanged as u:
            return _unchanged(db_path, sha, u.row, file_rows)
        finally:
            bar.close()
    finally:
        con.close()
    out.db = str(db_path)
    out.findings = list(result.findings)
    if not accepted:
        why = plural(counts["error"], "error") if counts["error"] else plural(counts["warning"], "warning")
        out.reason = f"{why}; no rows were stored"
        if not counts["error"]:
            out.reason += " (use --accept-warnings to accept a submission with warnings only)"
    timings["total"] = time.perf_counter() - t0
    out.timings = {k: round(v, 3) for k, v in timings.items()}
    return out


def _settle_references(con: duckdb.DuckDBPyConnection, result: Any) -> bool:
    """Drop the unknown-reference findings whose reference is, under the lock, a current scenario of the database
    (another ingest may have stored it since the check read the database); True when any was dropped, with the
    result's counts and findings brought in line."""
    gone = con.execute(f"""
        DELETE FROM temp.main.findings AS f WHERE f.rule = 'unknown-reference' AND EXISTS
            (SELECT 1 FROM {NEW}.current_scenarios AS c WHERE c.model = f.model AND c.scenario = f.value)
        RETURNING f.path, f.line, f.severity""").fetchall()  # noqa: S608 - names from the code
    if not gone:
        return False
    dropped = {(p, ln) for p, ln, _ in gone}
    result.findings = [
        f for f in result.findings if not (f.rule == "unknown-reference" and (f.path, f.line) in dropped)
    ]
    # the table holds only the first findings of each rule (the per-rule cap), so the check's exact totals are
    # lowered by what was dropped rather than counted again from the table
    by_severity = Counter(sev for _, _, sev in gone)
    result.rule_counts = [
        (r, sev, n - by_severity[sev] if r == "unknown-reference" else n) for r, sev, n in result.rule_counts
    ]
    result.rule_counts = [(r, sev, n) for r, sev, n in result.rule_counts if n > 0]
    result.counts = {sev: sum(n for _, s2, n in result.rule_counts if s2 == sev) for sev in result.counts}
    return True


def _models(con: duckdb.DuckDBPyConnection) -> str | None:
    models = [
        r[0]
        for r in con.execute(
            "SELECT DISTINCT model FROM temp.main.ingest_scenarios WHERE model IS NOT NULL ORDER BY model"
        ).fetchall()
    ]
    return ", ".join(models) if models else None


def _register_scenarios(con: duckdb.DuckDBPyConnection, scenarios: Any) -> None:
    """TEMP table ingest_scenarios(model, scenario, reference, attributes JSON) from the check's scenarios frame."""
    con.register("ingest_scenarios_frame", scenarios)
    try:
        attrs = [c for c in scenarios.columns if c not in ("model", "scenario")]
        pack = ", ".join(f"{identifier(c)} := {identifier(c)}" for c in attrs)
        attributes = f"to_json(struct_pack({pack}))::VARCHAR" if attrs else "'{}'"
        reference = "reference::VARCHAR" if "reference" in attrs else "NULL::VARCHAR"
        con.execute(
            "CREATE OR REPLACE TEMP TABLE ingest_scenarios AS "  # noqa: S608 - names from the code; values bound as parameters
            f"SELECT DISTINCT model::VARCHAR AS model, scenario::VARCHAR AS scenario, {reference} AS reference, "
            f"{attributes} AS attributes FROM ingest_scenarios_frame "
            "WHERE model IS NOT NULL AND scenario IS NOT NULL"
        )
    finally:
        con.unregister("ingest_scenarios_frame")


def _prepare_indicators(con: duckdb.DuckDBPyConnection, contract: Any, harmonised: bool) -> None:
    """TEMP tables ingest_indicators_raw and ingest_indicators_harmonised for the new scenarios and for stored ones
    whose reference is among them.

    The data handed to the indicator code is the new rows plus the stored current rows of the same model that
    matter: the references of the new scenarios (so a policy scenario whose reference came earlier gets its
    losses) and the stored scenarios that name a new scenario as reference (their losses change with it). Each
    basis reads only rows of its own basis; without harmonised new rows (`harmonised` False) the harmonised
    indicators of stored dependents are still recomputed, so none is left computed against a replaced reference.
    """
    from milepost.validate.store.indicators import COLUMNS as INDICATOR_TYPES
    from milepost.validate.store.indicators import GAP_COLUMNS as GAP_TYPES
    from milepost.validate.store.indicators import IndicatorDataError, IndicatorSpecError, compute_indicators

    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE ingest_old AS
        SELECT cs.submission_id, cs.model, cs.scenario, cs.reference, cs.attributes
        FROM {NEW}.current_scenarios AS cs
        WHERE cs.model IN (SELECT model FROM temp.main.ingest_scenarios)
          AND NOT EXISTS (SELECT 1 FROM temp.main.ingest_scenarios AS n
                          WHERE n.model = cs.model AND n.scenario = cs.scenario)""")  # noqa: S608 - names from the code; values bound as parameters
    con.execute("""
        CREATE OR REPLACE TEMP TABLE ingest_dependents AS
        SELECT o.submission_id, o.model, o.scenario FROM temp.main.ingest_old AS o
        WHERE EXISTS (SELECT 1 FROM temp.main.ingest_scenarios AS n
                      WHERE n.model = o.model AND n.scenario = o.reference)""")
    con.execute("""
        CREATE OR REPLACE TEMP TABLE ingest_needed AS
        SELECT o.submission_id, o.model, o.scenario, o.reference, o.attributes FROM temp.main.ingest_old AS o
        WHERE EXISTS (SELECT 1 FROM temp.main.ingest_scenarios AS n
                      WHERE n.model = o.model AND n.reference = o.scenario)
           OR EXISTS (SELECT 1 FROM temp.main.ingest_dependents AS d
                      WHERE d.model = o.model AND d.scenario = o.scenario)""")
    con.execute("""
        CREATE OR REPLACE TEMP VIEW ingest_all_scenarios AS
        SELECT model, scenario, reference, attributes FROM temp.main.ingest_scenarios
        UNION ALL
        SELECT model, scenario, reference, attributes FROM temp.main.ingest_needed""")
    cols = ", ".join(DATA_COLUMNS)
    # Most submissions bring new scenarios that no stored one refers to: then no stored row is read at all, so
    # the cost of the indicators follows the submission, not the size of the database.
    stored_needed = bool(con.execute("SELECT EXISTS (SELECT 1 FROM temp.main.ingest_needed)").fetchall()[0][0])
    for basis, rows in (("raw", "checked"), ("harmonised", "harmonised" if harmonised else None)):
        if rows is None and not _stored_harmonised(con):
            # nothing harmonised, new or stored, to compute from: skip the indicator code altogether
            columns = ", ".join(f"{name} {sql_type}" for name, sql_type in INDICATOR_TYPES)
            con.execute(f"CREATE OR REPLACE TEMP TABLE ingest_indicators_{basis} ({columns})")
            gap_columns = ", ".join(f"{name} {sql_type}" for name, sql_type in GAP_TYPES)
            con.execute(f"CREATE OR REPLACE TEMP TABLE ingest_indicators_{basis}_gaps ({gap_columns})")
            continue
        branches = [f"SELECT {cols} FROM temp.main.{rows}"] if rows else []  # noqa: S608 - names from the code; values bound as parameters
        if stored_needed or not branches:
            branches.append(f"""
            SELECT {", ".join("d." + c for c in DATA_COLUMNS)} FROM {NEW}.data AS d
            JOIN temp.main.ingest_needed AS n
              ON n.submission_id = d.submission_id AND n.model = d.model AND n.scenario = d.scenario
            WHERE d.basis = '{basis}'""")  # noqa: S608 - names from the code; values bound as parameters
        con.execute(f"CREATE OR REPLACE TEMP VIEW ingest_data_{basis} AS {' UNION ALL '.join(branches)}")
        con.execute(f"DROP TABLE IF EXISTS temp.main.ingest_indicators_{basis}")
        try:
            compute_indicators(
                con,
                contract,
                data=f"ingest_data_{basis}",
                scenarios="ingest_all_scenarios",
                target=f"ingest_indicators_{basis}",
            )
        except (IndicatorDataError, IndicatorSpecError) as e:
            raise LoadError(f"the {basis} indicators could not be computed, nothing was stored: {e}") from None


def _prepare_recompute(con: duckdb.DuckDBPyConnection, contract: Any) -> int | None:
    """Recomputed rows of every stored indicator when a migration left them outdated (see `recompute`), else None."""
    from milepost.validate.store.indicators import IndicatorDataError, IndicatorSpecError

    if not recompute.is_outdated(con, NEW):
        return None
    try:
        return recompute.prepare(con, contract, NEW)
    except (IndicatorDataError, IndicatorSpecError) as e:
        raise LoadError(f"the stored indicators could not be recomputed, nothing was stored: {e}") from None


def _stored_harmonised(con: duckdb.DuckDBPyConnection) -> bool:
    """Whether any stored scenario the indicators of this ingest read has harmonised values (the method table is
    far smaller than `data`, and a harmonised series always has a row there)."""
    return bool(
        con.execute(f"""
            SELECT EXISTS (SELECT 1 FROM {NEW}.harmonisation AS h JOIN temp.main.ingest_needed AS n
                           ON n.submission_id = h.submission_id AND n.model = h.model AND n.scenario = h.scenario)
        """).fetchall()[0][0]  # noqa: S608 - names from the code; values bound as parameters
    )


def _store(
    w: Writer,
    con: duckdb.DuckDBPyConnection,
    result: Any,
    contract: Any,
    *,
    sha: str,
    files: list[dict[str, Any]],
    counts: dict[str, int],
    accepted: bool,
    by: str | None,
    note: str | None,
    bar: Stages,
    timings: dict[str, float],
    harmonise: bool = False,
) -> IngestResult:
    """Write the submission into the attached copy `new` (inside one transaction)."""
    # Row order carries no meaning in the stored tables; without it DuckDB writes row groups in parallel and
    # straight to the file (measured: 2M data rows 1.1 s instead of 2.2 s, and a file half the size).
    con.execute("SET preserve_insertion_order = false")
    try:
        return _store_ordered_freely(
            w,
            con,
            result,
            contract,
            sha=sha,
            files=files,
            counts=counts,
            accepted=accepted,
            by=by,
            note=note,
            bar=bar,
            timings=timings,
            harmonise=harmonise,
        )
    finally:
        con.execute("RESET preserve_insertion_order")


def _store_ordered_freely(
    w: Writer,
    con: duckdb.DuckDBPyConnection,
    result: Any,
    contract: Any,
    *,
    sha: str,
    files: list[dict[str, Any]],
    counts: dict[str, int],
    accepted: bool,
    by: str | None,
    note: str | None,
    bar: Stages,
    timings: dict[str, float],
    harmonise: bool = False,
) -> IngestResult:
    from milepost.validate import __version__

    sid = int(con.execute(f"SELECT coalesce(max(id), 0) + 1 FROM {NEW}.submissions").fetchall()[0][0])  # noqa: S608 - names from the code; values bound as parameters
    _register_scenarios(con, result.scenarios)
    model = _models(con)
    submitter = by if by is not None else _user()
    t = time.perf_counter()
    rows = 0
    recomputed = _prepare_recompute(con, contract)
    harmonised = None
    if accepted:
        if harmonise:
            from milepost.validate.harmonise import harmonise as harmonise_rows

            bar.step("harmonising")
            harmonised = harmonise_rows(con, contract)
            timings["harmonise"] = time.perf_counter() - t
            t = time.perf_counter()
        bar.step("computing indicators")
        _prepare_indicators(con, contract, harmonised is not None)
        timings["indicators"] = time.perf_counter() - t
        rows = int(con.execute("SELECT count(*) FROM temp.main.checked").fetchall()[0][0])
    t = time.perf_counter()
    w.begin()
    if recomputed is not None:
        # first, so that the new submission's own rows (and the dependents it refreshes) land on top
        recompute.apply(con, NEW)
    con.execute(
        f"INSERT INTO {NEW}.submissions VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, NULL, ?, ?, ?, ?)",  # noqa: S608 - names from the code; values bound as parameters
        [
            sid,
            model,
            json.dumps(files),
            sha,
            contract.name,
            contract.hash,
            __version__,
            submitter,
            note,
            datetime.now(UTC).replace(tzinfo=None),
            "accepted" if accepted else "rejected",
            rows,
            counts["error"],
            counts["warning"],
            counts["note"],
        ],
    )
    if accepted and contract.sources:
        # the folder the accepted data was checked with: the default contract of the next `milepost ingest`
        con.execute(f"DELETE FROM {NEW}.meta WHERE key = 'contract_path'")  # noqa: S608 - names from the code
        con.execute(f"INSERT INTO {NEW}.meta VALUES ('contract_path', ?)", [str(contract.sources[-1])])  # noqa: S608 - names from the code
    fcols = ", ".join(FINDING_COLUMNS)
    con.execute(f"INSERT INTO {NEW}.findings (submission_id, {fcols}) SELECT ?, {fcols} FROM temp.main.findings", [sid])  # noqa: S608 - names from the code; values bound as parameters
    out = IngestResult(
        status="accepted" if accepted else "rejected",
        db="",
        sha256=sha,
        submission_id=sid,
        model=model,
        rows=rows,
        counts=counts,
        files=files,
        recomputed=recomputed or 0,
    )
    out.scenarios = [
        r[0]
        for r in con.execute("SELECT DISTINCT scenario FROM temp.main.ingest_scenarios ORDER BY scenario").fetchall()
    ]
    if accepted:
        bar.step(f"storing {rows:,} rows")
        data_cols = ", ".join(DATA_COLUMNS)
        con.execute(
            f"INSERT INTO {NEW}.data (submission_id, {data_cols}, basis) "  # noqa: S608 - names from the code; values bound as parameters
            f"SELECT ?, {data_cols}, 'raw' FROM temp.main.checked",
            [sid],
        )
        if harmonised is not None:
            con.execute(
                f"INSERT INTO {NEW}.data (submission_id, {data_cols}, basis) "  # noqa: S608 - names from the code; values bound as parameters
                f"SELECT ?, {data_cols}, 'harmonised' FROM temp.main.harmonised",
                [sid],
            )
            method_cols = ", ".join(HARMONISATION_COLUMNS)
            con.execute(
                f"INSERT INTO {NEW}.harmonisation (submission_id, {method_cols}) "  # noqa: S608 - names from the code; values bound as parameters
                f"SELECT ?, {method_cols} FROM temp.main.harmonise_methods",
                [sid],
            )
            out.harmonised = True
            out.harmonised_rows = harmonised.rows
            out.harmonised_series = harmonised.harmonised_series
            out.harmonise_counts = dict(harmonised.severity_counts)
        con.execute(
            f"INSERT INTO {NEW}.scenarios SELECT ?, model, scenario, reference, attributes "  # noqa: S608 - names from the code; values bound as parameters
            "FROM temp.main.ingest_scenarios",
            [sid],
        )
        _store_indicators(con, sid)
        out.replaced = [
            {"model": m, "scenario": s, "submission_id": i}
            for m, s, i in con.execute(
                f"""
                SELECT c.model, c.scenario, max(c.submission_id) FROM {NEW}.scenarios AS c
                JOIN {NEW}.submissions AS b ON b.id = c.submission_id AND b.status = 'accepted' AND b.id <> ?
                JOIN temp.main.ingest_scenarios AS n ON n.model = c.model AND n.scenario = c.scenario
                GROUP BY c.model, c.scenario ORDER BY 1, 2""",  # noqa: S608 - names from the code; values bound as parameters
                [sid],
            ).fetchall()
        ]
        out.refreshed = [
            {"model": m, "scenario": s, "submission_id": i}
            for i, m, s in con.execute(
                "SELECT submission_id, model, scenario FROM temp.main.ingest_dependents ORDER BY 2, 3"
            ).fetchall()
        ]
        out.superseded = [
            r[0]
            for r in con.execute(
                f"""
            UPDATE {NEW}.submissions SET status = 'superseded', superseded_by = ?
            WHERE status = 'accepted' AND id <> ?
              AND id IN (SELECT s.submission_id FROM {NEW}.scenarios AS s
                         JOIN temp.main.ingest_scenarios AS n ON n.model = s.model AND n.scenario = s.scenario)
              AND id NOT IN (SELECT submission_id FROM {NEW}.current_versions)
            RETURNING id""",  # noqa: S608 - names from the code; values bound as parameters
                [sid, sid],
            ).fetchall()
        ]
        out.superseded.sort()
    timings["write"] = time.perf_counter() - t
    return out


def _store_indicators(con: duckdb.DuckDBPyConnection, sid: int) -> None:
    cols = ", ".join("i." + c for c in INDICATOR_COLUMNS)
    names = ", ".join(INDICATOR_COLUMNS)
    # Stored scenarios whose reference was just replaced: their reference-based indicators are recomputed.
    con.execute(f"""
        DELETE FROM {NEW}.indicators AS x USING temp.main.ingest_dependents AS d
        WHERE x.submission_id = d.submission_id AND x.model = d.model AND x.scenario = d.scenario""")  # noqa: S608 - names from the code; values bound as parameters
    # Without stored scenarios among the inputs every computed row is one of the new scenarios, and the filter
    # by them would cost as much as the insert itself (measured: 2.3 s of 4.7 s for 3.2M indicator rows).
    stored_needed = bool(con.execute("SELECT EXISTS (SELECT 1 FROM temp.main.ingest_needed)").fetchall()[0][0])
    only_new = (
        "SEMI JOIN temp.main.ingest_scenarios AS n ON n.model = i.model AND n.scenario = i.scenario"
        if stored_needed
        else ""
    )
    for basis in ("raw", "harmonised"):
        computed = f"temp.main.ingest_indicators_{basis}"
        con.execute(
            f"""
            INSERT INTO {NEW}.indicators (submission_id, {names}, basis) SELECT ?, {cols}, '{basis}'
            FROM {computed} AS i {only_new}""",  # noqa: S608 - names from the code; values bound as parameters
            [sid],
        )
        if not stored_needed:
            continue  # no dependents either: they are a subset of the stored scenarios needed
        con.execute(f"""
            INSERT INTO {NEW}.indicators (submission_id, {names}, basis) SELECT d.submission_id, {cols}, '{basis}'
            FROM {computed} AS i
            JOIN temp.main.ingest_dependents AS d ON d.model = i.model AND d.scenario = i.scenario""")  # noqa: S608 - names from the code; values bound as parameters
    _store_gaps(con, sid)


def _store_gaps(con: duckdb.DuckDBPyConnection, sid: int) -> None:
    """The gaps of the new scenarios and of the dependents recomputed with them (as `_store_indicators`)."""
    from milepost.validate.store.indicators import GAP_COLUMNS

    names = ", ".join(name for name, _ in GAP_COLUMNS)
    cols = ", ".join("g." + name for name, _ in GAP_COLUMNS)
    con.execute(f"""
        DELETE FROM {NEW}.indicator_gaps AS x USING temp.main.ingest_dependents AS d
        WHERE x.submission_id = d.submission_id AND x.model = d.model AND x.scenario = d.scenario""")  # noqa: S608 - names from the code
    for basis in ("raw", "harmonised"):
        computed = f"temp.main.ingest_indicators_{basis}_gaps"
        con.execute(
            f"""
            INSERT INTO {NEW}.indicator_gaps (submission_id, {names}, basis) SELECT ?, {cols}, '{basis}'
            FROM {computed} AS g
            SEMI JOIN temp.main.ingest_scenarios AS n ON n.model = g.model AND n.scenario = g.scenario""",  # noqa: S608 - names from the code; values bound as parameters
            [sid],
        )
        con.execute(f"""
            INSERT INTO {NEW}.indicator_gaps (submission_id, {names}, basis) SELECT d.submission_id, {cols}, '{basis}'
            FROM {computed} AS g
            JOIN temp.main.ingest_dependents AS d ON d.model = g.model AND d.scenario = g.scenario""")  # noqa: S608 - names from the code


def _user() -> str | None:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return None
