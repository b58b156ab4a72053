"""Milepost's exceptions: raised for broken programs, contracts or databases, never for bad submission data.

    MilepostError
    ├── ReadError        a file that cannot be read at all (used inside readers; the runner turns it into a finding)
    ├── LoadError        the database cannot be opened, migrated or written
    │   └── LockTimeout  another writer held the database longer than we were willing to wait
    └── UsageError       a command was called with arguments that cannot work

Contract problems raise `milepost.schema.contract.ContractError`, which the CLI treats like UsageError (exit 2).
"""


class MilepostError(Exception):
    """Base class of every error Milepost raises on purpose."""


class ReadError(MilepostError):
    """A file that cannot be read as a submission table."""


class LoadError(MilepostError):
    """The database cannot be opened, migrated or written."""


class LockTimeout(LoadError):
    """Another writer held the database lock longer than the wait allowed."""


class UsageError(MilepostError):
    """A command was called with arguments that cannot work."""
