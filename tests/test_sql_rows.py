"""validate.sql.insert_rows: one statement for many rows, the same table as DuckDB's own row-by-row INSERT."""

from __future__ import annotations

import duckdb

from milepost.validate.sql import insert_rows

COLUMNS = [("name", "VARCHAR"), ("n", "INTEGER"), ("x", "DOUBLE"), ("flag", "BOOLEAN"), ("note", "VARCHAR")]
ROWS = [
    ("o'hara", 1, 0.1, True, None),
    ('a"b', None, -2.5e300, False, "x"),
    ("", 2_000_000_000, None, None, "ü €"),
    *[(f"s{i}", i, i / 3, i % 2 == 0, None if i % 3 else "r") for i in range(2_000)],
]


def test_rows_inserted_in_one_statement_equal_duckdbs_executemany():
    con = duckdb.connect()
    ddl = ", ".join(f"{n} {t}" for n, t in COLUMNS)
    con.execute(f"CREATE TABLE a ({ddl})")
    con.execute(f"CREATE TABLE b ({ddl})")
    insert_rows(con, "a", COLUMNS, ROWS)
    # reference: DuckDB's executemany, one parameterised INSERT per row
    con.executemany("INSERT INTO b VALUES (?, ?, ?, ?, ?)", ROWS)
    ordered = "SELECT * FROM {} ORDER BY ALL"
    assert con.execute(ordered.format("a")).fetchall() == con.execute(ordered.format("b")).fetchall()
    assert con.execute("SELECT count(*) FROM a").fetchall()[0][0] == len(ROWS)


def test_no_rows_insert_nothing_and_a_column_subset_leaves_the_rest_default():
    con = duckdb.connect()
    con.execute("CREATE TABLE t (a VARCHAR, b INTEGER DEFAULT 7)")
    insert_rows(con, "t", [("a", "VARCHAR")], [])
    assert con.execute("SELECT count(*) FROM t").fetchall()[0][0] == 0
    insert_rows(con, "t", [("a", "VARCHAR")], [("x",), (None,)])
    assert sorted(con.execute("SELECT a, b FROM t").fetchall(), key=str) == [("x", 7), (None, 7)]
