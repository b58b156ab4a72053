"""`milepost dashboard`: its options, its refusal without a database, and a real headless start."""

from __future__ import annotations

import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

from typer.testing import CliRunner

from milepost.validate.cli import app
from milepost.validate.cli.dashboard import streamlit_command


def test_help_lists_the_options():
    res = CliRunner().invoke(app, ["dashboard", "--help"])
    assert res.exit_code == 0
    for option in ("--db", "--port", "--address", "--contract"):
        assert option in res.stdout


def test_missing_database_exits_with_the_database_code(tmp_path: Path):
    res = CliRunner().invoke(app, ["dashboard", "--db", str(tmp_path / "nothing.duckdb")])
    assert res.exit_code == 3
    assert "Error: no database at" in res.stderr and "milepost ingest" in res.stderr


def test_command_line_is_headless_without_telemetry(tmp_path: Path):
    argv, env = streamlit_command(tmp_path / "x.duckdb", 8765)
    pairs = dict(zip(argv[5::2], argv[6::2], strict=True))
    assert argv[1:4] == ["-m", "streamlit", "run"] and argv[4].endswith("app.py")
    assert pairs["--server.headless"] == "true" and pairs["--browser.gatherUsageStats"] == "false"
    assert pairs["--server.port"] == "8765" and pairs["--server.address"] == "127.0.0.1"
    assert pairs["--server.maxUploadSize"] == "50"
    assert env["MILEPOST_DB"] == str((tmp_path / "x.duckdb").resolve())


def test_the_command_serves_the_app(demo_db: Path):
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    proc = subprocess.Popen(
        [sys.executable, "-m", "milepost.validate", "dashboard", "--db", str(demo_db), "--port", str(port)],
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
    )
    try:
        deadline = time.monotonic() + 60
        health = None
        while time.monotonic() < deadline and proc.poll() is None:
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/_stcore/health", timeout=2) as r:
                    health = r.read()
                    break
            except OSError:
                time.sleep(0.2)
        assert health == b"ok"
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=5) as r:
            assert r.status == 200 and b"<html" in r.read().lower()
    finally:
        proc.terminate()
        out = proc.communicate(timeout=15)[0].decode(errors="replace")
    assert f"Milepost dashboard on http://127.0.0.1:{port}" in out
    assert "usage statistics" not in out.lower()  # telemetry notice is printed only when stats are gathered
