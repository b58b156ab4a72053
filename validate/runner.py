"""The check run: read every file once into DuckDB, run every check family as SQL, collect the findings."""

from __future__ import annotations

import functools
import os
import re
import time
from collections.abc import Sequence
from concurrent.futures import Future
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import duckdb

from milepost.schema.contract import Contract
from milepost.validate import __version__
from milepost.validate.checks import ROW_CHECKS, TABLE_CHECKS, Context
from milepost.validate.checks.structure import file_findings
from milepost.validate.checks.units import warm_registry
from milepost.validate.findings import (
    FINDING_COLUMNS,
    FINDING_TYPES,
    RULES,
    SEVERITIES,
    Finding,
    finding_columns_ddl,
    findings_from,
)
from milepost.validate.progress import Stages
from milepost.validate.readers import KEY_TEXT, InputFile, read_file
from milepost.validate.sql import enum_type, insert_rows, literal
from milepost.validate.wide import locate_findings

FINDINGS_PER_RULE = 1000


@dataclass
class CheckResult:
    """What a check run found. The full findings stay in `con` (TEMP table `findings`); `findings` holds the first
    FINDINGS_PER_RULE of each rule, `counts` the true totals by severity, `rule_counts` by (rule, severity)."""

    contract: Contract
    inputs: list[InputFile]
    findings: list[Finding]
    counts: dict[str, int]
    rule_counts: list[tuple[str, str, int]]
    rows: int
    con: duckdb.DuckDBPyConnection
    scenario_attributes: str | None = None  # TEMP table of the scenarios tables' rows (one per scenario), if given
    truncated: bool = False
    version: str = __version__
    usable_rows: int = 0
    timings: dict[str, float] = field(default_factory=dict)

    @functools.cached_property
    def scenarios(self) -> Any:
        """One row per (model, scenario) of the usable data, with `reference` and any other attributes given.
        Built on first use: a plain check never needs pandas."""
        pairs = "SELECT DISTINCT CAST(model AS VARCHAR) AS model, CAST(scenario AS VARCHAR) AS scenario FROM checked"
        if self.scenario_attributes is None:
            return self.con.execute(
                f"SELECT *, NULL::VARCHAR AS reference FROM ({pairs}) ORDER BY 1, 2"  # noqa: S608 - names from the code
            ).df()
        return self.con.execute(
            f"SELECT p.model, p.scenario, a.* EXCLUDE (model, scenario) FROM ({pairs}) p "  # noqa: S608 - names from the code
            f"LEFT JOIN {self.scenario_attributes} a USING (model, scenario) ORDER BY 1, 2"
        ).df()

    def passed(self, fail_on: str = "error") -> bool:
        """True when nothing reaches the fail level ('error', or 'warning' = warnings count too)."""
        levels = SEVERITIES[: SEVERITIES.index(fail_on) + 1]
        return not any(self.counts.get(s, 0) for s in levels)


PENDING = "pending"  # a digest still being computed when read_file runs


def _hash_in_background(files: Sequence[Path]) -> list[Future[str] | None]:
    """Each file's sha256 in a thread of its own while DuckDB reads: hashlib works without the GIL, so the
    digest (a tenth of a clean check's time at 2M rows, measured) overlaps the reading instead of preceding it.
    Only regular files: opening a named pipe would wait for a writer (read_file reports such paths)."""
    from concurrent.futures import ThreadPoolExecutor

    from milepost.validate.readers import not_a_file, sha256_of

    pool = ThreadPoolExecutor(1, thread_name_prefix="sha256")
    futures = [None if not_a_file(p) else pool.submit(sha256_of, p) for p in files]
    pool.shutdown(wait=False)  # the queued digests still run; nothing waits here
    return futures


def _digest(future: Future[str] | None) -> str:
    if future is None:
        return ""
    try:
        return future.result()
    except OSError:  # the read reports why the file cannot be read
        return ""


def _contract_tables(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    con.execute(
        "CREATE OR REPLACE TEMP TABLE c_variables (variable VARCHAR, unit VARCHAR, sign VARCHAR, "
        "regions VARCHAR, required BOOLEAN)"
    )
    insert_rows(
        con,
        "c_variables",
        [*((c, "VARCHAR") for c in ("variable", "unit", "sign", "regions")), ("required", "BOOLEAN")],
        [(v.name, v.unit, v.sign, v.regions, v.required) for v in contract.variables.values()],
    )
    con.execute("CREATE OR REPLACE TEMP TABLE c_parts (total VARCHAR, part VARCHAR, factor DOUBLE)")
    parts = [(v.name, p.variable, p.factor) for v in contract.variables.values() for p in v.parts]
    insert_rows(con, "c_parts", [("total", "VARCHAR"), ("part", "VARCHAR"), ("factor", "DOUBLE")], parts)
    con.execute("CREATE OR REPLACE TEMP TABLE c_part_counts AS SELECT total, count(*) AS n FROM c_parts GROUP BY 1")
    regions = set(contract.region_names())
    if contract.countries:
        from milepost.schema.contract import iso3_codes

        regions |= iso3_codes()
    con.execute("CREATE OR REPLACE TEMP TABLE c_regions (region VARCHAR)")
    insert_rows(con, "c_regions", [("region", "VARCHAR")], [(r,) for r in sorted(regions)])
    con.execute("CREATE OR REPLACE TEMP TABLE c_region_parts (parent VARCHAR, part VARCHAR)")
    rparts = [(r.name, p) for r in contract.regions.values() for p in r.parts]
    insert_rows(con, "c_region_parts", [("parent", "VARCHAR"), ("part", "VARCHAR")], rparts)
    con.execute(
        "CREATE OR REPLACE TEMP TABLE c_region_counts AS SELECT parent, count(*) AS n FROM c_region_parts GROUP BY 1"
    )
    con.execute(
        "CREATE OR REPLACE TEMP TABLE c_reference (region VARCHAR, variable VARCHAR, year INTEGER, value DOUBLE)"
    )
    # unknown variables and units that do not convert are left out here; contract lint reports them
    ref = [(r.region, r.variable, r.year, r.value) for r in contract.references_in_contract_units()]
    columns = [("region", "VARCHAR"), ("variable", "VARCHAR"), ("year", "INTEGER"), ("value", "DOUBLE")]
    insert_rows(con, "c_reference", columns, ref)
    con.execute(
        "CREATE OR REPLACE TEMP TABLE c_bounds (variable VARCHAR, region VARCHAR, year_from INTEGER, "
        "year_to INTEGER, low DOUBLE, high DOUBLE)"
    )
    insert_rows(
        con,
        "c_bounds",
        [(c, "VARCHAR") for c in ("variable", "region")]
        + [(c, "INTEGER") for c in ("year_from", "year_to")]
        + [(c, "DOUBLE") for c in ("low", "high")],
        [(b.variable, b.region, b.year_from, b.year_to, b.low, b.high) for b in contract.bounds],
    )


def _obs_view(con: duckdb.DuckDBPyConnection, inputs: list[InputFile]) -> None:
    con.execute("CREATE OR REPLACE TEMP TABLE c_inputs (src INTEGER, path VARCHAR, sheet VARCHAR)")
    insert_rows(
        con,
        "c_inputs",
        [("src", "INTEGER"), ("path", "VARCHAR"), ("sheet", "VARCHAR")],
        [(i, inp.path, inp.sheet) for i, inp in enumerate(inputs)],
    )
    parts = []
    for i, inp in enumerate(inputs):
        if inp.kind == "data" and inp.table:
            sheet = literal(inp.sheet) if inp.sheet else "NULL::VARCHAR"
            # CSV tables leave `line` empty: rows are stored in file order, so the row id gives it for free.
            # A bare row id or line column, where one will do: a filter on lines then narrows the scan to a range.
            written, rows = con.execute(f"SELECT count(line), count(*) FROM {inp.table}").fetchall()[0]  # noqa: S608 - generated names
            line = "rowid + 2" if not written else "line" if written == rows else "coalesce(line, rowid + 2)"
            parts.append(
                f"SELECT {i} AS src, {literal(inp.path)} AS path, {sheet} AS sheet, {line} AS line, "  # noqa: S608 - names from the code; user text via validate.sql
                f"* EXCLUDE (line) FROM {inp.table}"
            )
    if not parts:
        parts = [
            "SELECT NULL::INTEGER AS src, NULL::VARCHAR AS path, NULL::VARCHAR AS sheet, NULL::BIGINT AS line, "
            + ", ".join(f"NULL::VARCHAR AS {c}" for c in ("model", "scenario", "region", "variable", "unit"))
            + ", NULL::INTEGER AS year, NULL::VARCHAR AS year_raw, NULL::DOUBLE AS value, "
            "NULL::VARCHAR AS value_raw WHERE false"
        ]
    con.execute("CREATE OR REPLACE TEMP VIEW obs AS " + " UNION ALL ".join(parts))


KEY = "model, scenario, region, variable, year"


def _enum_type(con: duckdb.DuckDBPyConnection, sql: str) -> str:
    return enum_type(sorted(r[0] for r in con.execute(sql).fetchall()))


def _build_checked(con: duckdb.DuckDBPyConnection, contract: Contract) -> None:
    """`checked`: the usable rows in contract units, one per key (the first occurrence wins); `dups`: repeated keys."""
    # Key columns become ENUMs of the values seen: the same text to every reader, but grouping and joining on
    # them (duplicates, sums) runs on small integers, several times faster than on strings.
    # Regions and variables only of the contract's: rows with other names never reach `checked`, and 300,000
    # made-up variable names would make an ENUM whose every cast costs a search.
    known = {"region": "SELECT region FROM c_regions", "variable": "SELECT variable FROM c_variables"}
    enum = {
        c: _enum_type(
            con,
            f"SELECT value FROM combo_values WHERE col = '{c}' AND value IS NOT NULL"  # noqa: S608 - names from the code; user text via validate.sql
            + (f" AND value IN ({known[c]})" if c in known else ""),
        )
        for c in ("model", "scenario", "region", "variable")
    }
    enum["unit"] = _enum_type(con, "SELECT DISTINCT target FROM unit_map WHERE target IS NOT NULL")
    keys = (
        f"SELECT o.src, o.line, o.model::{enum['model']} AS model, o.scenario::{enum['scenario']} AS scenario, "
        f"o.region::{enum['region']} AS region, o.variable::{enum['variable']} AS variable, "
    )
    rows = f"o.value IS NOT NULL AND o.year BETWEEN {contract.first_year} AND {contract.last_year}"
    # Usually every key combination is known and in contract units: then no row needs the lookups (a fifth of
    # this step's time), which the key combinations tell at a glance.
    odd = con.execute(
        "SELECT count(*) FROM combos c LEFT JOIN unit_map m USING (variable, unit) LEFT JOIN c_regions r "
        "USING (region) WHERE m.status IS DISTINCT FROM 'same' OR r.region IS NULL OR c.model IS NULL "
        "OR c.scenario IS NULL OR trim(c.model) = '' OR trim(c.scenario) = ''"
    ).fetchall()[0][0]
    if odd == 0:
        sql = f"{keys}o.unit::{enum['unit']} AS unit, o.year, o.value FROM obs o WHERE {rows}"
    else:
        # a blank model or scenario cell leaves its row out; with none among the distinct names, no row is tested
        blank = con.execute(
            "SELECT count(*) FROM combo_values "
            "WHERE col IN ('model', 'scenario') AND (value IS NULL OR trim(value) = '')"
        ).fetchall()[0][0]
        named = " AND trim(o.model) <> '' AND trim(o.scenario) <> ''" if blank else ""
        sql = (
            f"{keys}m.target::{enum['unit']} AS unit, o.year, o.value * m.factor AS value "
            "FROM obs o JOIN unit_map m ON o.variable = m.variable AND o.unit = m.unit AND m.status <> 'wrong' "
            f"JOIN c_regions r ON o.region = r.region WHERE {rows}{named}"
        )
    # `checked` carries each row's source and line, so its row order means nothing; without keeping it DuckDB
    # writes the copy in parallel (measured: half the time of this statement).
    _unordered(con, f"CREATE OR REPLACE TEMP TABLE checked AS {sql}")
    # The contract's part lists in the same ENUM types, so sum joins never cast.
    con.execute(
        f"CREATE OR REPLACE TEMP TABLE e_parts AS SELECT * FROM (SELECT TRY_CAST(total AS "  # noqa: S608 - names from the code; user text via validate.sql
        f"{enum['variable']}) AS total, TRY_CAST(part AS {enum['variable']}) AS part, factor FROM c_parts) "
        "WHERE total IS NOT NULL AND part IS NOT NULL"
    )
    con.execute(
        f"CREATE OR REPLACE TEMP TABLE e_region_parts AS SELECT * FROM (SELECT TRY_CAST(parent AS "  # noqa: S608 - names from the code; user text via validate.sql
        f"{enum['region']}) AS parent, TRY_CAST(part AS {enum['region']}) AS part FROM c_region_parts) "
        "WHERE parent IS NOT NULL AND part IS NOT NULL"
    )
    con.execute(
        f"CREATE OR REPLACE TEMP TABLE e_variables AS SELECT * FROM (SELECT TRY_CAST(variable AS "  # noqa: S608 - names from the code; user text via validate.sql
        f"{enum['variable']}) AS variable, regions, unit FROM c_variables) WHERE variable IS NOT NULL"
    )
    # Repeats are rare: find the keys with a narrow aggregate, then look only at their rows.
    repeats = con.execute(_repeats_sql(contract)).fetchall()[0][0]
    only = "" if repeats else " LIMIT 0"
    con.execute(
        f"CREATE OR REPLACE TEMP TABLE dup_keys AS SELECT * FROM (SELECT {KEY} FROM checked "  # noqa: S608 - names from the code; user text via validate.sql
        f"GROUP BY ALL HAVING count(*) > 1){only}"
    )
    con.execute(
        "CREATE OR REPLACE TEMP TABLE dups AS SELECT c.model, c.scenario, c.region, c.variable, c.year, "  # noqa: S608 - names from the code; user text via validate.sql
        "any_value(c.unit) AS unit, count(*) AS n, min(c.value) AS vmin, max(c.value) AS vmax, "
        "arg_min(c.src, (c.src, c.line)) AS src, arg_min(c.line, (c.src, c.line)) AS line, "
        "arg_max(c.src, (c.src, c.line)) AS src_last, arg_max(c.line, (c.src, c.line)) AS line_last "
        f"FROM checked c SEMI JOIN dup_keys k USING ({KEY}) GROUP BY c.model, c.scenario, c.region, c.variable, c.year"
    )
    if con.execute("SELECT count(*) FROM dups").fetchall()[0][0]:
        con.execute(
            "DELETE FROM checked c USING dups d WHERE c.model = d.model AND c.scenario = d.scenario "
            "AND c.region = d.region AND c.variable = d.variable AND c.year = d.year "
            "AND (c.src, c.line) <> (d.src, d.line)"
        )


def _repeats_sql(contract: Contract) -> str:
    """SQL counting the rows of `checked` whose key came before (0: no key repeats). Each series (model,
    scenario, region, variable) ORs one bit per year into a 128-bit integer: the series repeats a year exactly
    when it has more rows than bits set. Grouping by the four ENUM columns builds one group per series, where
    counting distinct keys built one per row (measured: a fifth of the time at 2M rows). A year range wider
    than the integer counts distinct key hashes (equal keys have equal hashes; a collision only sends the run
    to the exact grouping)."""
    span = contract.last_year - contract.first_year
    if 0 <= span <= 126:  # HUGEINT is signed: bit 127 would overflow
        return (
            "SELECT coalesce(sum(n - bit_count(b)), 0) FROM (SELECT count(*) AS n, "  # noqa: S608 - names and integers from the code
            f"bit_or(1::HUGEINT << (year - {int(contract.first_year)})) AS b FROM checked "
            "GROUP BY model, scenario, region, variable)"
        )
    return f"SELECT count(*) - count(DISTINCT hash({KEY})) FROM checked"  # noqa: S608 - names from the code


def _unordered(con: duckdb.DuckDBPyConnection, sql: str) -> None:
    """Run `sql` without DuckDB keeping the insertion order, then restore the connection's setting."""
    keep = con.execute("SELECT current_setting('preserve_insertion_order')").fetchall()[0][0]
    con.execute("SET preserve_insertion_order = false")
    try:
        con.execute(sql)
    finally:
        con.execute(f"SET preserve_insertion_order = {'true' if keep else 'false'}")


_RULE = re.compile(r"'([a-z0-9-]+)' AS rule\b")


# The order in which findings are kept when a rule has more than the store holds, and listed when it has more than
# a report shows: by line (findings about a series or a sum have none and come last), then file, year and key. A
# plain LIMIT keeps whichever rows the scan met first, and a join or an aggregate meets them in no fixed order; the
# whole key, NULLs last, makes the kept findings the same on every run. The line comes first so that the rows up to
# the last kept line can be picked out before a check's joins and message text.
ORDER_KEY = "line, path, sheet, year, model, scenario, region, variable, column_name"


class _Store:
    """Inserts findings into the TEMP table `findings`, at most `cap` per rule, the first in `ORDER_KEY` order;
    `totals` counts every one, so a million empty cells cost a million counts, not a million stored rows."""

    def __init__(self, con: duckdb.DuckDBPyConnection, severity: str, cap: int) -> None:
        self.con, self.severity, self.cap = con, severity, cap
        self.totals: dict[tuple[str, str], int] = {}
        self.stored: dict[str, int] = {}

    def _add(self, counts: dict[tuple[str, str], int]) -> None:
        for key, n in counts.items():
            self.totals[key] = self.totals.get(key, 0) + n

    def insert(self, sql: str) -> None:
        # Most checks leave severity to the rule table; one names a finer one itself (the spelling-only unit note).
        if " AS severity" not in sql:
            sql = f"SELECT NULL::VARCHAR AS severity, * FROM ({sql})"  # noqa: S608 - names from the code; user text via validate.sql
        rules = set(_RULE.findall(sql))
        sql = f"SELECT * REPLACE ({self.severity} AS severity) FROM ({sql})"  # noqa: S608 - names from the code; user text via validate.sql
        room = {r: self.cap - self.stored.get(r, 0) for r in rules}
        tentative = None
        if len(rules) == 1:
            # One rule: insert up to the room left in one pass; under it, that was every finding of the check.
            rule = next(iter(rules))
            if room[rule] > 0:
                at = self.con.execute("SELECT coalesce(max(rowid) + 1, 0) FROM findings").fetchall()[0][0]
                limited = f"INSERT INTO findings BY NAME SELECT * FROM ({sql}) LIMIT ?"  # noqa: S608 - names from the code; user text via validate.sql
                n = self.con.execute(limited, [room[rule]]).fetchall()[0][0]
                if n < room[rule]:
                    self._count_inserted(rule, int(n))
                    return
                # Full: the first `room` in order have lines no later than the last of these (when every one has
                # a line), so they are found among far fewer rows than the check reads, if they are not these.
                full, last = self.con.execute(
                    "SELECT count(line) = count(*), max(line) FROM findings WHERE rowid >= ?", [at]
                ).fetchall()[0]
                tentative = (rule, int(at), int(last) if full and last is not None else None)
        # Counting reads only the rule column (DuckDB drops the unused message text), so a check with millions of
        # findings stores its first `cap` without ever building the rest.
        # With a LIMIT's rows in, the same pass counts the findings up to their last line: as many as went in, and
        # they are the first in order (a scan in file order gives that; a join or an aggregate seldom does).
        upto = "NULL"
        if tentative is not None and tentative[2] is not None:
            upto = f"count(*) FILTER (WHERE line <= {tentative[2]})"
        counts = self.con.execute(f"SELECT rule, severity, count(*), {upto} FROM ({sql}) GROUP BY ALL").fetchall()  # noqa: S608 - names and integers from the code; user text via validate.sql
        self._add({(r, sev): int(n) for r, sev, n, _ in counts})
        per_rule: dict[str, int] = {}
        for rule, _, n, _ in counts:
            per_rule[rule] = per_rule.get(rule, 0) + int(n)
        over = sorted(r for r, n in per_rule.items() if n > room.get(r, self.cap))
        if tentative is not None:
            rule, at, last = tentative
            if rule in over and sum(k or 0 for *_, k in counts) != room[rule]:
                self.con.execute("DELETE FROM findings WHERE rowid >= ?", [at])
                self._insert_first(sql, rule, room[rule], last)
            self.stored[rule] = self.cap
            return
        if len(over) < len(per_rule):
            keep = f"WHERE rule NOT IN ({', '.join(literal(r) for r in over)})" if over else ""
            self.con.execute(f"INSERT INTO findings BY NAME SELECT * FROM ({sql}) {keep}")  # noqa: S608 - names from the code; user text via validate.sql
            for r, n in per_rule.items():
                if r not in over:
                    self.stored[r] = self.stored.get(r, 0) + n
        for rule in over:
            if room.get(rule, self.cap) > 0:
                self._insert_first(sql, rule, room.get(rule, self.cap), None)
            self.stored[rule] = self.cap

    def _insert_first(self, sql: str, rule: str, room: int, last: int | None) -> None:
        """Store the first `room` findings of `rule` in `ORDER_KEY` order. `last`: a line that at least `room` of
        them have reached; without it a pass over the lines alone finds the `room`-th smallest. The bound reaches
        the check's scan of the rows (as a row-id range for a CSV), so only the rows up to it are joined and
        given messages."""
        # every finding column, NULL where the check leaves one out, so the order key can name them all
        empty = ", ".join(f"NULL::{FINDING_TYPES.get(c, 'VARCHAR')} AS {c}" for c in FINDING_COLUMNS)
        sql = f"SELECT {empty} WHERE false UNION ALL BY NAME ({sql})"
        if last is None:
            found = self.con.execute(
                f"SELECT line FROM ({sql}) WHERE rule = ? AND line IS NOT NULL ORDER BY line LIMIT 1 OFFSET ?",  # noqa: S608 - names from the code; user text via validate.sql
                [rule, room - 1],
            ).fetchall()
            last = int(found[0][0]) if found else None  # None: fewer lines than room, all of them are kept
        upto = f" AND line <= {int(last)}" if last is not None else ""
        self.con.execute(
            f"INSERT INTO findings BY NAME SELECT * FROM ({sql}) WHERE rule = ?{upto} ORDER BY {ORDER_KEY} LIMIT ?",  # noqa: S608 - names and integers from the code; user text via validate.sql
            [rule, room],
        )

    def _count_inserted(self, rule: str, n: int) -> None:
        """Count the `n` findings of `rule` just inserted (every finding of its check) by severity."""
        self.stored[rule] = self.stored.get(rule, 0) + n
        if n:
            rows = self.con.execute(
                "SELECT severity, count(*) FROM (SELECT severity FROM findings WHERE rule = ? "
                "ORDER BY rowid DESC LIMIT ?) GROUP BY 1",
                [rule, n],
            ).fetchall()
            self._add({(rule, sev): int(k) for sev, k in rows})

    def insert_findings(self, found: list[Finding], severity: dict[str, str]) -> None:
        """Findings made in Python (file problems, scenarios tables), under the same cap."""
        rows = []
        for f in found:
            sev = severity.get(f.rule, f.severity)
            if self.stored.get(f.rule, 0) < self.cap:
                rows.append(tuple(f.to_dict()[c] if c != "severity" else sev for c in FINDING_COLUMNS))
                self.stored[f.rule] = self.stored.get(f.rule, 0) + 1
            self.totals[(f.rule, sev)] = self.totals.get((f.rule, sev), 0) + 1
        insert_rows(self.con, "findings", [(c, FINDING_TYPES.get(c, "VARCHAR")) for c in FINDING_COLUMNS], rows)


def _scenario_attributes(con: duckdb.DuckDBPyConnection, inputs: list[InputFile]) -> tuple[str | None, list[Finding]]:
    """The scenarios tables given (validated), merged into the TEMP table `s_attributes` (one row per model and
    scenario, the first table's first row winning); None when there are none. Their rows also go into the TEMP
    table `s_listed` (path, sheet, line, model, scenario, reference) the scenario checks read."""
    con.execute(
        "CREATE OR REPLACE TEMP TABLE s_listed (path VARCHAR, sheet VARCHAR, line BIGINT, model VARCHAR, "
        "scenario VARCHAR, reference VARCHAR)"
    )
    tables = [i for i in inputs if i.kind == "scenarios" and i.scenarios_table]
    if not tables:
        return None, []
    from milepost.validate.scenario_table import repeated_rows

    findings: list[Finding] = []
    parts = []
    for k, inp in enumerate(tables):
        table = str(inp.scenarios_table)
        findings += repeated_rows(con, table, inp.path, inp.sheet)
        columns = {r[0] for r in con.execute(f"DESCRIBE {table}").fetchall()}
        reference = "reference" if "reference" in columns else "NULL::VARCHAR"
        con.execute(
            f"INSERT INTO s_listed SELECT ?, ?, line, model, scenario, {reference} FROM {table}",  # noqa: S608 - generated names
            [inp.path, inp.sheet],
        )
        parts.append(f"SELECT {k} AS k_, * FROM {table}")  # noqa: S608 - generated names
    con.execute(
        "CREATE OR REPLACE TEMP TABLE s_attributes AS SELECT * EXCLUDE (k_, line, rn_) FROM (SELECT *, "  # noqa: S608 - generated names
        "row_number() OVER (PARTITION BY model, scenario ORDER BY k_, line) AS rn_ FROM ("
        + " UNION ALL BY NAME ".join(parts)
        + ")) WHERE rn_ = 1"
    )
    if "reference" not in {r[0] for r in con.execute("DESCRIBE s_attributes").fetchall()}:
        con.execute("ALTER TABLE s_attributes ADD COLUMN reference VARCHAR")
    return "s_attributes", findings


def run_check(
    paths: Sequence[str | Path],
    contract: Contract,
    *,
    con: duckdb.DuckDBPyConnection | None = None,
    progress: bool = False,
    findings_per_rule: int = FINDINGS_PER_RULE,
    digests: Sequence[str] | None = None,
    known_scenarios: Sequence[tuple[str, str, str | None]] = (),
) -> CheckResult:
    """Check submission files against a contract. Bad data becomes findings; this raises only for broken programs.
    `digests`: the files' sha256, in the order of `paths`, when the caller has computed them already.
    `known_scenarios`: (model, scenario, reference) stored already (ingest passes the database's current ones), so
    a reference may name a scenario submitted before."""
    if con is None:
        from milepost.validate.store.database import connect_memory

        con = connect_memory()
    files = [Path(p) for p in paths]
    con.execute(f"CREATE OR REPLACE TEMP TABLE findings ({finding_columns_ddl()})")
    limits = contract.limits
    timings: dict[str, float] = {}
    clock = [time.perf_counter()]

    def lap(name: str) -> None:
        now = time.perf_counter()
        timings[name] = timings.get(name, 0.0) + now - clock[0]
        clock[0] = now

    with Stages("Reading", 4, enabled=progress, started=clock[0]) as stages:
        step = stages.step
        _contract_tables(con, contract)
        lap("contract tables")
        inputs: list[InputFile] = []
        hashing = None if digests else _hash_in_background(files)
        for n, path in enumerate(files):
            got = read_file(con, path, f"obs_{os.getpid()}_{n}", digests[n] if digests else PENDING, limits)
            if hashing is not None:
                digest = _digest(hashing[n])
                for inp in got:
                    inp.sha256 = digest if inp.sha256 == PENDING else inp.sha256
            inputs += got
        lap("read")
        step("checking rows")
        _obs_view(con, inputs)
        # One pass for every distinct key combination: name, unit and empty-cell checks look here first and
        # touch the rows only when something is wrong.
        con.execute(
            "CREATE OR REPLACE TEMP TABLE combos AS SELECT src, model, scenario, region, variable, unit, "
            "count(*) AS n FROM obs GROUP BY ALL"
        )
        # The distinct cells of each key column: a few hundred names where `combos` holds a row per series, so
        # the tests that ask whether any name is blank, odd or unknown read these (measured: 0.11 s -> 0.01 s).
        per_column = [f"SELECT DISTINCT '{c}' AS col, {c} AS value FROM combos" for c in KEY_TEXT]  # noqa: S608 - names from the code
        con.execute("CREATE OR REPLACE TEMP TABLE combo_values AS " + " UNION ALL ".join(per_column))
        lap("combos")
        ctx = Context(con, contract, inputs)
        warm_registry(ctx)
        attributes, scen_findings = _scenario_attributes(con, inputs)
        con.execute("CREATE OR REPLACE TEMP TABLE s_known (model VARCHAR, scenario VARCHAR, reference VARCHAR)")
        insert_rows(
            con,
            "s_known",
            [("model", "VARCHAR"), ("scenario", "VARCHAR"), ("reference", "VARCHAR")],
            [tuple(k) for k in known_scenarios or []],
        )
        pre = file_findings(ctx)
        store = _Store(con, _severity_case(contract), limits.findings_stored_per_rule)
        for check in ROW_CHECKS:
            for sql in check(ctx):
                store.insert(sql)
            lap(check.__name__)
        step("checking sums and coverage")
        _build_checked(con, contract)
        lap("checked")
        for check in TABLE_CHECKS:
            for sql in check(ctx):
                store.insert(sql)
            lap(check.__name__)
        step("collecting findings")
        extra = pre + scen_findings
        store.insert_findings(extra, effective_severity(contract))
        locate_findings(con, inputs)
    rule_counts = sorted((r, s, n) for (r, s), n in store.totals.items() if n)
    counts = {s: 0 for s in SEVERITIES}
    for _, s, n in rule_counts:
        counts[s] = counts.get(s, 0) + n
    findings = findings_from(
        con.execute(
            "SELECT * EXCLUDE (rn) FROM (SELECT *, row_number() OVER (PARTITION BY rule ORDER BY "  # noqa: S608 - names from the code
            f"{ORDER_KEY}) AS rn FROM findings) WHERE rn <= ? "
            "ORDER BY path NULLS FIRST, line NULLS LAST, rule, model, scenario, region, variable, year",
            [int(findings_per_rule)],
        )
    )
    usable = con.execute("SELECT count(*) FROM checked").fetchall()[0][0]
    lap("collect")
    return CheckResult(
        contract=contract,
        inputs=inputs,
        findings=findings,
        counts=counts,
        rule_counts=rule_counts,
        rows=sum(i.rows for i in inputs if i.kind == "data"),
        con=con,
        scenario_attributes=attributes,
        truncated=any(n > findings_per_rule for _, _, n in rule_counts),
        usable_rows=int(usable),
        timings=timings,
    )


def effective_severity(contract: Contract) -> dict[str, str]:
    """Each rule's severity under this contract: the default from RULES unless the contract overrides it."""
    return {
        r.id: (contract.severity[r.id] if contract.severity.get(r.id) in SEVERITIES else r.severity)
        for r in RULES.values()
    }


def _severity_case(contract: Contract) -> str:
    """SQL giving each finding its severity: a contract override, else the check's own, else the rule's default."""
    eff = effective_severity(contract)
    by_rule = "CASE rule " + " ".join(f"WHEN {literal(r)} THEN {literal(s)}" for r, s in eff.items()) + " END"
    forced = ", ".join(literal(k) for k in contract.severity if k in eff) or "NULL"
    return f"CASE WHEN rule IN ({forced}) THEN {by_rule} ELSE coalesce(severity, {by_rule}) END"
