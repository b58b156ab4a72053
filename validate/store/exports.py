"""Reading the database out: filtered exports (CSV, Parquet, XLSX), Parquet snapshots with a manifest, and diffs.

Every query takes its filter values as parameters; only table and column names, which come from this module,
are written into SQL text. All of these open the database read-only, so they never disturb an ingest.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

import duckdb

from milepost.validate.cells import neutralise_sql, safe_row
from milepost.validate.errors import OutputError, UsageError, one_line
from milepost.validate.findings import FINDING_COLUMNS
from milepost.validate.outputs import (
    MARK,
    building,
    check_target,
    register_csv_header,
    replacing,
    save_workbook,
    writing,
)
from milepost.validate.readers import sha256_of
from milepost.validate.sql import identifier, literal
from milepost.validate.store.database import (
    reading,
    schema_version,
    select_columns,
    stored_columns,
    view_or_definition,
)
from milepost.validate.store.pairs import PAIR_COLUMNS, PairRule, pair_rows_sql
from milepost.validate.store.recompute import outdated_reason

XLSX_MAX_ROWS = 1_048_575  # an Excel sheet has 1,048,576 rows; one is the header
CAUTIONS = (
    "Scenario results are model projections under stated assumptions, not forecasts.",
    "Mitigation costs exclude avoided climate damages and co-benefits.",
)
# How the indicators are defined, for the "about" sheet of an indicators export (schema/indicators.toml has all).
INDICATOR_BASIS = (
    "Values are read from the piecewise-linear interpolation of the reported years at whole years.",
    "cumulative: the sum of the annual values of every year from year_from to year_to, both included "
    "(carbon budgets, as in IPCC AR6 WG1, count from 1 January of the first year).",
    "net_zero_year, peak_year, peak_value: from the base year on only; an empty net-zero year was not reached by "
    "year_to (see note).",
    "rate_linear: % of the value at year_from per year; rate_linear_base: % of the base-year value per year; "
    "rate_absolute: the variable's unit per year; rate_cagr: compound %/yr. Negative = falling.",
    "loss_pct, growth_reduction_pp: against each model's own reference scenario named in the scenarios table "
    "(see note), which may differ from a current-policies pathway.",
    "lmdi_*: additive LMDI-I effects (Ang 2005) of the Kaya factors on fossil CO2, base year to year_to, Mt CO2; "
    "the four sum to the change. A scenario lacking an input has none (see --what gaps).",
    "allowance, permits_sold (Mt CO2e), transfer, cost_after_trade (billion USD_2015/yr) per allocation rule "
    "(variable): illustrations of equity principles, not negotiated shares.",
)
DATA_COLUMNS = ("submission_id", "model", "scenario", "region", "variable", "unit", "year", "value")
INDICATOR_COLUMNS = (
    "submission_id",
    "model",
    "scenario",
    "region",
    "kind",
    "variable",
    "year_from",
    "year_to",
    "value",
    "unit",
    "note",
)
STORED_FINDING_COLUMNS = ("submission_id", *FINDING_COLUMNS)
GAP_COLUMNS = ("submission_id", "model", "scenario", "region", "kind", "variable", "note")
# what -> (current view, stored table, columns, sort order)
EXPORTS: dict[str, tuple[str, str, tuple[str, ...], str]] = {
    "data": ("current_data", "data", DATA_COLUMNS, "model, scenario, region, variable, year"),
    "indicators": (
        "current_indicators",
        "indicators",
        INDICATOR_COLUMNS,
        "model, scenario, region, kind, variable, year_from, year_to",
    ),
    "gaps": (
        "current_indicator_gaps",
        "indicator_gaps",
        GAP_COLUMNS,
        "model, scenario, region, kind, variable",
    ),
    "findings": (
        "findings",
        "findings",
        STORED_FINDING_COLUMNS,
        "submission_id, path NULLS FIRST, line NULLS LAST, rule",
    ),
}
FORMATS = ("csv", "parquet", "xlsx")
for _columns in (DATA_COLUMNS, INDICATOR_COLUMNS, STORED_FINDING_COLUMNS, PAIR_COLUMNS):
    register_csv_header(_columns)  # an earlier export of these is ours, and may be replaced without --force
BASES = ("raw", "harmonised")  # data and indicators: as submitted, or harmonised (`milepost ingest --harmonise`)
SNAPSHOT_TABLES = (
    ("data", "current_data", DATA_COLUMNS, "scenario, region, variable, year"),
    ("indicators", "current_indicators", INDICATOR_COLUMNS, "scenario, region, kind, variable, year_from, year_to"),
    ("scenarios", "current_scenarios", ("submission_id", "model", "scenario", "reference", "attributes"), "scenario"),
    # the indicator kinds left out of a scenario for a missing input: a snapshot without them reads as complete
    ("gaps", "current_indicator_gaps", GAP_COLUMNS, "scenario, region, kind, variable"),
)


@dataclass
class Filters:
    """Row filters of an export; each is a list of accepted values (empty = no filter)."""

    model: Sequence[str] = ()
    scenario: Sequence[str] = ()
    region: Sequence[str] = ()
    variable: Sequence[str] = ()
    submission: Sequence[int] = ()
    basis: str = "raw"  # one of BASES; only data, indicators and gaps have one

    def where(self, with_basis: bool = False) -> tuple[str, list[Any]]:
        """A WHERE clause with `?` placeholders, and its parameters; `with_basis` adds the basis filter."""
        clauses: list[str] = []
        params: list[Any] = []
        if with_basis:
            clauses.append("basis = ?")
            params.append(self.basis)
        for column, given in (
            ("model", self.model),
            ("scenario", self.scenario),
            ("region", self.region),
            ("variable", self.variable),
            ("submission_id", self.submission),
        ):
            values = list(given)
            if values:
                clauses.append(f"{column} IN ({', '.join('?' * len(values))})")
                params += values
        return (" WHERE " + " AND ".join(clauses)) if clauses else "", params

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {k: list(v) for k, v in self.__dict__.items() if v and k != "basis"}
        return {**out, "basis": self.basis}


def export_query(what: str, filters: Filters, con: duckdb.DuckDBPyConnection | None = None) -> tuple[str, list[Any]]:
    """The SELECT of an export: current rows (or, with a submission filter, that submission's stored rows).

    With `con`, a column that a database of an older schema does not have yet (not migrated: readers do not
    migrate) is exported empty. Data and indicators are those of `filters.basis`; a database of a schema before
    harmonised values existed holds raw ones only.
    """
    if what not in EXPORTS:
        raise UsageError(f"--what must be one of {', '.join([*EXPORTS, 'pairs'])}, not {what!r}")
    if filters.basis not in BASES:
        raise UsageError(f"--basis must be one of {', '.join(BASES)}, not {filters.basis!r}")
    view, table, columns, order = EXPORTS[what]
    with_basis = what in ("data", "indicators", "gaps")
    if what == "gaps" and con is not None and not stored_columns(con, table):
        # a database not migrated to schema 6 yet (readers do not migrate) has no gaps table: nothing to export
        empty = ", ".join(f"NULL::VARCHAR AS {c}" for c in columns)
        return f"SELECT {empty} WHERE false", []
    if with_basis and con is not None and "basis" not in stored_columns(con, "data"):
        if filters.basis != "raw":
            raise UsageError(
                "the database holds no harmonised values: it was written before they existed "
                "(`milepost ingest --harmonise` migrates it and stores them)"
            )
        with_basis = False
    elif with_basis:
        view = f"{view}_by_basis"  # current_data_by_basis, current_indicators_by_basis ...: every basis
    # A submission filter asks for history: read the table, not the current view.
    source = table if filters.submission else view
    where, params = filters.where(with_basis=with_basis)
    select = select_columns(con, source, columns) if con is not None else ", ".join(columns)
    return f"SELECT {select} FROM {source}{where} ORDER BY {order}", params  # noqa: S608 - names from this module; filters bound as parameters


def export(
    db: str | Path,
    what: str,
    fmt: str,
    output: str | Path,
    filters: Filters | None = None,
    on_warning: Callable[[str], None] | None = None,
    pairing: PairRule | None = None,
    *,
    force: bool = False,
    raw_text: bool = False,
    progress: Callable[[int, int], None] | None = None,
) -> int:
    """Write the rows of `what` (data | indicators | gaps | findings | pairs) matching `filters` to `output`;
    returns the count. Pairs follow `pairing` (default: the outcome-class rule, see milepost.validate.store.pairs).

    The output is never the database itself, nor (without `force`) a file Milepost did not write, and it is
    written whole or not at all (`milepost.validate.outputs`). Text cells a spreadsheet would run as formulas
    are written as text in XLSX and get a leading `'` in CSV, unless `raw_text` (`milepost.validate.cells`).
    `on_warning` hears (once) when the stored indicators follow older conventions (see `recompute`);
    `progress(done, total)` hears how far an XLSX export has come.
    """
    filters = filters or Filters()
    if fmt not in FORMATS:
        raise UsageError(f"--format must be one of {', '.join(FORMATS)}, not {fmt!r}")
    output = Path(output)
    if not output.parent.is_dir():
        raise UsageError(f"the folder of {output} does not exist")
    if what == "pairs" and filters.submission:
        raise UsageError("--submission does not apply to pairs: pairs are read from the current scenarios")
    check_target(output, inputs=[db], force=force)
    sql: str
    params: list[Any] | dict[str, Any]
    with reading(db) as con:
        if what == "pairs":
            if filters.basis != "raw" and "basis" not in stored_columns(con, "data"):
                raise UsageError(
                    "the database holds no harmonised values: it was written before they existed "
                    "(`milepost ingest --harmonise` migrates it and stores them)"
                )
            sql, params = pair_rows_sql(
                pairing or PairRule(), filters.model, filters.scenario, filters.region, filters.variable,
                basis=filters.basis,
            )  # fmt: skip
        else:
            sql, params = export_query(what, filters, con)
        if what in ("indicators", "gaps", "pairs"):
            reason = outdated_reason(con)
            if reason is not None and on_warning is not None:
                on_warning(f"Warning: {reason}.")
        if fmt != "xlsx":
            if fmt == "csv":
                if not raw_text:
                    sql = formula_safe_query(con, sql, params)
                options = "FORMAT csv, HEADER"
            else:
                options = f"FORMAT parquet, COMPRESSION zstd, KV_METADATA {{'{MARK}': 'export'}}"
            with replacing(output) as tmp:
                # COPY reports the rows it wrote, so the query runs once; it writes our temporary file in place.
                try:
                    copied = con.execute(
                        f"COPY ({sql}) TO {literal(str(tmp))} ({options}, USE_TMP_FILE false)", params
                    ).fetchall()
                except duckdb.IOException as e:
                    raise OutputError(f"cannot write {output}: {one_line(e)}") from None
            return int(copied[0][0])
        n = int(con.execute(f"SELECT count(*) FROM ({sql})", params).fetchall()[0][0])  # noqa: S608 - names from this module; filters bound as parameters
        if n > XLSX_MAX_ROWS:
            raise UsageError(
                f"{n:,} rows do not fit in an Excel sheet (at most {XLSX_MAX_ROWS:,}); "
                "use --format csv or parquet, or filter with --model/--scenario/--region/--variable"
            )
        note = (pairing or PairRule()).describe() if what == "pairs" else None
        _write_xlsx(con, sql, params, output, what, filters, db, note, n, progress)
    return n


def formula_safe_query(con: duckdb.DuckDBPyConnection, sql: str, params: list[Any] | dict[str, Any]) -> str:
    """`sql` with every text column passed through `cells.neutralise_sql`; other columns as they are."""
    described = con.execute(f"SELECT * FROM ({sql}) LIMIT 0", params).description  # noqa: S608 - our own query
    columns = []
    for name, type_code, *_ in described:
        column = identifier(name)
        text = str(type_code) == "VARCHAR"
        columns.append(f"{neutralise_sql(column)} AS {column}" if text else column)
    # A projection keeps the order of the rows the ordered query gives it.
    return f"SELECT {', '.join(columns)} FROM ({sql})"  # noqa: S608 - column names quoted by sql.identifier


def _write_xlsx(
    con: duckdb.DuckDBPyConnection,
    sql: str,
    params: list[Any] | dict[str, Any],
    output: Path,
    what: str,
    filters: Filters,
    db: str | Path,
    note: str | None = None,
    total: int = 0,
    progress: Callable[[int, int], None] | None = None,
) -> None:
    from openpyxl import Workbook

    # write_only streams rows to the file instead of building every cell object in memory.
    wb = Workbook(write_only=True)
    with building(wb, output):
        ws = wb.create_sheet(what)
        cur = con.execute(sql, params)
        header = [d[0] for d in cur.description]
        ws.append(header)
        ws.freeze_panes = "A2"
        done = 0
        while True:
            chunk = cur.fetchmany(10_000)
            if not chunk:
                break
            for row in chunk:
                ws.append(safe_row(ws, list(row)))
            done += len(chunk)
            if progress is not None:
                progress(done, total)
        about = wb.create_sheet("about")
        about.append(["milepost export", what])
        about.append(safe_row(about, ["database", str(db)]))
        about.append(safe_row(about, ["filters", json.dumps(filters.to_dict(), ensure_ascii=False)]))
        if note:
            about.append(safe_row(about, ["rule", note]))
        about.append(["exported at (UTC)", time.strftime("%Y-%m-%d %H:%M:%S", time.gmtime())])
        for line in CAUTIONS:
            about.append(["caution", line])
        if what == "indicators":
            for line in INDICATOR_BASIS:
                about.append(["basis", line])
        save_workbook(wb, output, "export")


# ---------------------------------------------------------------- snapshot


def _remove_dead_snapshot_folders(out_dir: Path) -> None:
    # A snapshot killed with SIGKILL leaves OUT.tmp-PID behind; a live one (another process) keeps its folder.
    from milepost.validate.outputs import owner_gone

    head = f"{out_dir.name}.tmp-"
    with contextlib.suppress(OSError):
        for p in out_dir.parent.iterdir():
            pid = p.name[len(head) :]
            if (
                p.name.startswith(head)
                and pid.isascii()
                and pid.isdigit()
                and p.is_dir()
                and not p.is_symlink()
                and owner_gone(int(pid))
            ):
                shutil.rmtree(p, ignore_errors=True)


def snapshot(db: str | Path, out_dir: str | Path) -> dict[str, Any]:
    """Write the current data, indicators, scenarios and indicator gaps as Parquet partitioned by model, plus
    manifest.json.

    Layout: OUT/<table>/model=<name>/data_0.parquet (hive partitioning; names URL-encoded), OUT/manifest.json with
    every file's sha256 and row count and the contract name(s) and hash(es). Returns the manifest.
    """
    from milepost.validate import __version__

    out_dir = Path(out_dir)
    if out_dir.exists() and (not out_dir.is_dir() or any(out_dir.iterdir())):
        raise UsageError(f"{out_dir} exists and is not an empty folder; choose a new folder for the snapshot")
    if not out_dir.parent.is_dir():
        raise UsageError(f"the folder of {out_dir} does not exist")
    # Build beside the target and rename at the end, so a half-written snapshot never carries the real name.
    work = out_dir.with_name(f"{out_dir.name}.tmp-{os.getpid()}")
    shutil.rmtree(work, ignore_errors=True)
    _remove_dead_snapshot_folders(out_dir)
    try:
        with writing(out_dir), reading(db) as con:
            work.mkdir()
            total = int(con.execute("SELECT count(*) FROM current_data").fetchall()[0][0])
            if total == 0:
                raise UsageError(f"{db} has no accepted data to snapshot")
            tables: dict[str, Any] = {}
            for name, view, columns, order in SNAPSHOT_TABLES:
                if not stored_columns(con, view):
                    # a database not migrated to schema 6 yet (readers do not migrate) has no gaps view
                    tables[name] = {"rows": 0, "source": None, "partition_by": ["model"], "columns": list(columns)}
                    continue
                rows = int(con.execute(f"SELECT count(*) FROM {view}").fetchall()[0][0])  # noqa: S608 - names from this module; filters bound as parameters
                tables[name] = {"rows": rows, "source": view, "partition_by": ["model"], "columns": list(columns)}
                if rows:
                    try:
                        con.execute(
                            f"COPY (SELECT {select_columns(con, view, columns)} FROM {view} ORDER BY model, {order}) "  # noqa: S608 - names from this module; filters bound as parameters
                            f"TO {literal(str(work / name))} (FORMAT parquet, COMPRESSION zstd, PARTITION_BY (model))"
                        )
                    except duckdb.IOException as e:
                        raise OutputError(f"cannot write the snapshot into {out_dir}: {one_line(e)}") from None
            contracts = [
                {"name": n, "hash": h}
                for n, h in con.execute(
                    "SELECT DISTINCT b.contract_name, b.contract_hash FROM submissions AS b "
                    "WHERE b.id IN (SELECT submission_id FROM current_versions) ORDER BY 1, 2"
                ).fetchall()
            ]
            submissions = [
                r[0] for r in con.execute("SELECT DISTINCT submission_id FROM current_versions ORDER BY 1").fetchall()
            ]
            version = schema_version(con)
            outdated = outdated_reason(con)
            files = []
            for path in sorted(p for p in work.rglob("*.parquet")):
                rel = path.relative_to(work).as_posix()
                rows = int(con.execute("SELECT count(*) FROM read_parquet(?)", [str(path)]).fetchall()[0][0])
                files.append({"path": rel, "sha256": sha256_of(path), "bytes": path.stat().st_size, "rows": rows})
        manifest = {
            "kind": "milepost-snapshot",
            "created_at": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
            "milepost_version": __version__,
            "schema_version": version,
            "database": str(db),
            "contract_hash": contracts[0]["hash"] if len(contracts) == 1 else None,
            "contracts": contracts,
            "submissions": submissions,
            "partitioning": "hive",
            "tables": tables,
            "files": files,
            "cautions": list(CAUTIONS),
            "indicators_outdated": outdated,
        }
        with writing(out_dir):
            (work / "manifest.json").write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
            if out_dir.exists():
                out_dir.rmdir()
            os.replace(work, out_dir)
    except BaseException:
        shutil.rmtree(work, ignore_errors=True)
        raise
    return manifest


# ---------------------------------------------------------------- diff

KEY = ("model", "scenario", "region", "variable", "year")


@dataclass
class Diff:
    """Rows of submission `b` against submission `a`: added, removed, changed beyond tolerance, and unchanged."""

    a: int
    b: int
    relative: float
    absolute: float
    counts: dict[str, int]
    added: list[dict[str, Any]] = field(default_factory=list)
    removed: list[dict[str, Any]] = field(default_factory=list)
    changed: list[dict[str, Any]] = field(default_factory=list)
    limit: int = 0
    only_a: list[str] = field(default_factory=list)  # "model | scenario" present in a only
    only_b: list[str] = field(default_factory=list)
    common_only: bool = False
    models: tuple[str | None, str | None] = (None, None)  # the model of a and of b
    versions: tuple[int | None, int | None] = (None, None)  # their versions (the `submission_versions` view)

    def to_dict(self) -> dict[str, Any]:
        return {
            "a": self.a,
            "b": self.b,
            "models": list(self.models),
            "versions": list(self.versions),
            "tolerance": {"relative": self.relative, "absolute": self.absolute},
            "common_only": self.common_only,
            "scenarios_only_in_a": self.only_a,
            "scenarios_only_in_b": self.only_b,
            "counts": self.counts,
            "limit": self.limit,
            "added": self.added,
            "removed": self.removed,
            "changed": self.changed,
        }

    @property
    def identical(self) -> bool:
        return not (self.counts["added"] or self.counts["removed"] or self.counts["changed"])


def diff(
    db: str | Path,
    a: int,
    b: int,
    relative: float,
    absolute: float,
    limit: int = 100,
    common_only: bool = False,
    any_model: bool = False,
) -> Diff:
    """Compare the stored rows of two submissions by (model, scenario, region, variable, year).

    A value counts as changed when |b - a| > max(relative * |a|, absolute), the same rule as the contract's sum
    tolerance (sum_relative, sum_absolute); a different unit also counts as changed. `limit` caps the rows listed
    per category (0 = all); the counts are always complete. Rows of `a`'s scenarios that `b` does not hold are
    `untouched`, not removed: a submission replaces only the scenarios it holds (a partial revision leaves the
    others current). With `common_only`, only the (model, scenario) pairs present in both are compared. Both
    submissions must be of the same model unless `any_model`.
    """
    if relative < 0 or absolute < 0:
        raise UsageError("tolerances must not be negative")
    with reading(db) as con:
        info = {
            int(i): (st, m, v)
            for i, st, m, v in con.execute(
                "SELECT b.id, b.status, b.model, v.version FROM submissions AS b "  # noqa: S608 - the view or its definition in database.sql
                f"JOIN {view_or_definition(con, 'submission_versions')} AS v ON v.submission_id = b.id "
                "WHERE b.id IN (?, ?)",
                [a, b],
            ).fetchall()
        }
        for sid in (a, b):
            if sid not in info:
                raise UsageError(f"there is no submission {sid} in {db}")
            if info[sid][0] == "rejected":
                raise UsageError(f"submission {sid} was rejected: it has no stored rows to compare")
        if info[a][1] != info[b][1] and not any_model:
            raise UsageError(
                f"submission {a} is of model {info[a][1]}, {b} of model {info[b][1]}: diff compares versions of one "
                "model (give --any-model to compare across models)"
            )
        key = ", ".join(KEY)
        pairs = "SELECT DISTINCT model, scenario FROM scenarios WHERE submission_id = ?"
        con.execute(
            f"CREATE TEMP TABLE diff_pairs AS SELECT *, 'a' AS side FROM ({pairs}) "  # noqa: S608 - names from this module; filters bound as parameters
            f"UNION ALL SELECT *, 'b' FROM ({pairs})",
            [a, b],
        )
        only = {
            side: [
                f"{m} | {s}"
                for m, s in con.execute(
                    "SELECT model, scenario FROM diff_pairs AS p WHERE side = ? AND NOT EXISTS "
                    "(SELECT 1 FROM diff_pairs AS q WHERE q.side <> p.side AND q.model = p.model "
                    "AND q.scenario = p.scenario) ORDER BY 1, 2",
                    [side],
                ).fetchall()
            ]
            for side in ("a", "b")
        }
        common = (
            ("AND (model, scenario) IN (SELECT (model, scenario) FROM diff_pairs GROUP BY ALL HAVING count(*) = 2)")
            if common_only
            else ""
        )
        # the values as submitted: harmonised rows (basis 'harmonised') are derived from them, not compared
        raw = "basis = 'raw' AND " if "basis" in stored_columns(con, "data") else ""
        stored = f"SELECT {key}, unit, value FROM data WHERE {raw}submission_id = ?"  # noqa: S608 - names from this module
        con.execute(
            f"""
            CREATE TEMP TABLE diff_rows AS
            SELECT coalesce(x.model, y.model) AS model, coalesce(x.scenario, y.scenario) AS scenario,
                   coalesce(x.region, y.region) AS region, coalesce(x.variable, y.variable) AS variable,
                   coalesce(x.year, y.year) AS year, x.unit AS unit_a, y.unit AS unit_b,
                   x.value AS value_a, y.value AS value_b,
                   CASE WHEN x.model IS NULL THEN 'added'
                        WHEN y.model IS NULL AND (x.model, x.scenario) NOT IN
                             (SELECT (model, scenario) FROM diff_pairs WHERE side = 'b') THEN 'untouched'
                        WHEN y.model IS NULL THEN 'removed'
                        WHEN x.unit IS DISTINCT FROM y.unit
                          OR abs(y.value - x.value) > greatest(? * abs(x.value), ?) THEN 'changed'
                        ELSE 'same' END AS change
            FROM ({stored} {common}) AS x
            FULL OUTER JOIN ({stored} {common}) AS y
              USING ({key})""",  # noqa: S608 - names from this module; filters bound as parameters
            [relative, absolute, a, b],
        )
        counts = {k: 0 for k in ("added", "removed", "changed", "same", "untouched")}
        counts.update(
            {c: int(n) for c, n in con.execute("SELECT change, count(*) FROM diff_rows GROUP BY 1").fetchall()}
        )
        out = Diff(
            a,
            b,
            relative,
            absolute,
            counts,
            limit=limit,
            only_a=only["a"],
            only_b=only["b"],
            common_only=common_only,
            models=(info[a][1], info[b][1]),
            versions=(info[a][2], info[b][2]),
        )
        cap = f" LIMIT {int(limit)}" if limit else ""
        for change, columns in (
            ("added", "unit_b AS unit, value_b AS value"),
            ("removed", "unit_a AS unit, value_a AS value"),
            ("changed", "unit_a, unit_b, value_a, value_b, value_b - value_a AS delta"),
        ):
            cur = con.execute(f"SELECT {key}, {columns} FROM diff_rows WHERE change = ? ORDER BY {key}{cap}", [change])  # noqa: S608 - names from this module; filters bound as parameters
            names = [d[0] for d in cur.description]
            setattr(out, change, [dict(zip(names, r, strict=True)) for r in cur.fetchall()])
    return out


# what the CLI and the dashboard show for a submission without a version (a rejected one: it never became data)
NO_VERSION = "rejected, no version"


def version_label(version: int | None) -> str:
    """A submission's version as both the CLI and the dashboard write it: `v3`, or `NO_VERSION` for none."""
    return f"v{int(version)}" if version is not None else NO_VERSION


RowT = TypeVar("RowT", bound=Mapping[Any, Any])


def listed(rows: Sequence[RowT], show_all: bool = False) -> list[RowT]:
    """The submissions a list shows: every one, or (the default) without the rejected attempts that were retried."""
    return list(rows) if show_all else [r for r in rows if not r["retried"]]


def submissions(db: str | Path) -> list[dict[str, Any]]:
    """Every submission, oldest first, with its version per model (the `submission_versions` view) and scenarios.
    `retried`: a rejected submission after which the same model (or the same files) was submitted again, so the
    attempt is history rather than something to act on (`milepost submissions` folds those away, see `listed`)."""
    with reading(db) as con:
        return submission_rows(con)


def submission_rows(con: duckdb.DuckDBPyConnection) -> list[dict[str, Any]]:
    """`submissions` on an open connection (the dashboard's cached read-only one)."""
    cur = con.execute(f"""
        SELECT b.id, b.model, b.status, v.version, b.superseded_by, b.rows, b.errors, b.warnings, b.notes,
               b.status = 'rejected' AND EXISTS (SELECT 1 FROM submissions AS n WHERE n.id > b.id
                   AND (n.model = b.model OR n.sha256 = b.sha256)) AS retried,
               b.submitted_at, b.submitted_by, b.note,
               b.contract_name, b.contract_hash, b.milepost_version, b.sha256, b.files,
               (SELECT list(s.scenario ORDER BY s.scenario) FROM scenarios AS s WHERE s.submission_id = b.id)
                   AS scenarios,
               (SELECT list(c.scenario ORDER BY c.scenario) FROM current_versions AS c
                 WHERE c.submission_id = b.id) AS current_scenarios
        FROM submissions AS b JOIN {view_or_definition(con, "submission_versions")} AS v
          ON v.submission_id = b.id ORDER BY b.id""")  # noqa: S608 - the view or its definition in database.sql
    names = [d[0] for d in cur.description]
    out = []
    for row in cur.fetchall():
        rec = dict(zip(names, row, strict=True))
        rec["files"] = json.loads(rec["files"]) if rec["files"] else []
        rec["scenarios"] = rec["scenarios"] or []
        rec["current_scenarios"] = rec["current_scenarios"] or []
        rec["submitted_at"] = (
            rec["submitted_at"].isoformat(sep=" ", timespec="seconds") if rec["submitted_at"] else None
        )
        out.append(rec)
    return out
