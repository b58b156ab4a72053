"""Milepost's exceptions and exit codes. Bad submission data is never an exception: it becomes findings.

Every error Milepost raises on purpose is a `MilepostError`; its `exit_code` is what the command line exits with
after printing `Error: <message>` on one line (see `milepost.validate.cli.common.handle_errors`).

    error                 raised when                                                          exit code
    MilepostError         (base class; not raised itself)                                      2
    ├── UsageError        a command was called with arguments that cannot work                 2
    ├── ContractError     a contract folder cannot be read or resolved (schema/contract.py)    2
    ├── UnitError         a unit string cannot be parsed or converted (schema/units.py)        2
    ├── ReadError         a file cannot be read as a table; the runner turns it into an        2
    │   │                 `unreadable-file` finding, so it never reaches the command line
    │   └── LimitExceeded a file goes beyond a limit of the run (schema/limits.py): a          2
    │                     `limit-exceeded` finding
    ├── IndicatorSpecError  schema/indicators.toml cannot be used (store/indicators)           2
    ├── IndicatorDataError  rows that cannot be interpolated (store/indicators)                2
    ├── LoadError         the database cannot be opened, read, migrated, locked or written     3
    │   └── LockTimeout   another writer held the database lock longer than the wait allowed   3
    └── OutputError       a report, export, snapshot or template file (or standard output)    4
                          cannot be written: no space, no permission, a full device

Exit codes of every command:

    0   EXIT_OK        done; nothing at the fail level
    1   EXIT_FINDINGS  findings at the fail level (`check`, `contract lint`), or the submission was rejected
    2   EXIT_USAGE     a usage error or an invalid contract (also the code of Typer's own option errors)
    3   EXIT_DATABASE  the database could not be opened, read, locked or written (LoadError, LockTimeout)
    4   EXIT_OUTPUT    an output file could not be written (OutputError)
    70  EXIT_INTERNAL  an unexpected error, i.e. a bug: one line on stderr names the log file with the traceback
    130                interrupted (Ctrl+C)

`UnitError`, `IndicatorSpecError` and `IndicatorDataError` are also `ValueError`s, as they were before they joined
this tree. This module imports nothing, so the contract layer (`milepost.schema`) can use it
without a cycle.
"""

from __future__ import annotations

EXIT_OK = 0
EXIT_FINDINGS = 1
EXIT_USAGE = 2
EXIT_DATABASE = 3
EXIT_OUTPUT = 4
EXIT_INTERNAL = 70  # EX_SOFTWARE of sysexits.h
EXIT_INTERRUPTED = 130


class MilepostError(Exception):
    """Base class of every error Milepost raises on purpose."""

    exit_code = EXIT_USAGE


class UsageError(MilepostError):
    """A command was called with arguments that cannot work."""


class ContractError(MilepostError):
    """A contract folder that cannot be read or resolved (missing file, bad TOML, wrong type)."""


class UnitError(MilepostError, ValueError):
    """A unit string that cannot be parsed or converted."""


class ReadError(MilepostError):
    """A file that cannot be read as a submission table."""


class LimitExceeded(ReadError):
    """A file that goes beyond a limit of the check run (rows, columns, cell length, unzipped size)."""


class IndicatorSpecError(MilepostError, ValueError):
    """An indicators.toml that cannot be used: bad TOML, unknown kind or key, or a period shape a kind refuses."""


class IndicatorDataError(MilepostError, ValueError):
    """Input rows that cannot be interpolated: the same series and year reported with different values."""


class LoadError(MilepostError):
    """The database cannot be opened, read, migrated or written."""

    exit_code = EXIT_DATABASE


class LockTimeout(LoadError):
    """Another writer held the database lock longer than the wait allowed."""


class OutputError(MilepostError):
    """An output file (report, export, snapshot, template) or standard output cannot be written."""

    exit_code = EXIT_OUTPUT


def one_line(exc: BaseException) -> str:
    """An exception's message on one line (DuckDB's run over several, with the failing SQL)."""
    return " ".join(str(exc).split())
