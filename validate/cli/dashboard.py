"""`milepost dashboard`: serve the reviewer dashboard (Streamlit) on a local port, reading the database read-only."""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Annotated

import typer

from milepost.validate.cli.common import echo, fail, handle_errors

MAX_UPLOAD_MB = 50


def app_path() -> Path:
    """The dashboard's Streamlit entrypoint inside the installed package."""
    import milepost.dashboard

    return Path(milepost.dashboard.__file__).parent / "app.py"


def streamlit_command(
    db: Path, port: int, address: str = "127.0.0.1", contract: Path | None = None
) -> tuple[list[str], dict[str, str]]:
    """The `streamlit run` command line and environment that serve the dashboard headless, without telemetry."""
    argv = [
        sys.executable,
        "-m",
        "streamlit",
        "run",
        str(app_path()),
        "--server.headless",
        "true",
        "--server.port",
        str(port),
        "--server.address",
        address,
        "--server.maxUploadSize",
        str(MAX_UPLOAD_MB),
        "--server.fileWatcherType",
        "none",
        "--server.runOnSave",
        "false",
        "--browser.gatherUsageStats",
        "false",
        "--client.toolbarMode",
        "minimal",
    ]
    env = {**os.environ, "MILEPOST_DB": str(db.resolve()), "STREAMLIT_BROWSER_GATHER_USAGE_STATS": "false"}
    if contract is not None:
        env["MILEPOST_CONTRACT"] = str(contract.resolve())
    return argv, env


def register(app: typer.Typer) -> None:
    """Add the `dashboard` command to the milepost CLI."""

    @app.command("dashboard")
    @handle_errors
    def dashboard_cmd(
        db: Annotated[
            Path | None,
            typer.Option(
                "--db",
                help="Database file (default: $MILEPOST_DB, else ./milepost.duckdb). Opened read-only.",
                dir_okay=False,
            ),
        ] = None,
        port: Annotated[int, typer.Option("--port", "-p", help="Port to serve on.", min=1, max=65535)] = 8501,
        address: Annotated[
            str,
            typer.Option(
                "--address", help="Interface to listen on (0.0.0.0 = every interface; mind who can reach it)."
            ),
        ] = "127.0.0.1",
        contract: Annotated[
            Path | None,
            typer.Option(
                "--contract",
                "-c",
                file_okay=False,
                help="Contract folder for reference values and the "
                "self-check (default: the bundled contract the database "
                "names).",
            ),
        ] = None,
    ) -> None:
        """Serve the reviewer dashboard: screen scenarios by a milestone value, compare rates and costs per band."""
        from milepost.validate.store.database import Reader, default_db_path

        path = default_db_path(db)
        # Open it once here, as the dashboard will: a missing, damaged or foreign file stops the command with exit
        # code 3 instead of an error page in the browser.
        Reader(path).close()
        if contract is not None and not (contract / "contract.toml").is_file():
            fail(f"contract folder {contract} has no contract.toml")
        argv, env = streamlit_command(path, port, address, contract)
        echo(f"Milepost dashboard on http://{address}:{port}  (database {path}, read-only; Ctrl+C stops)")
        sys.stdout.flush()
        # become the server process, so Ctrl+C and a terminating parent reach streamlit without a middleman
        os.execve(argv[0], argv, env)  # noqa: S606 - streamlit via this interpreter, argv built above, no shell
