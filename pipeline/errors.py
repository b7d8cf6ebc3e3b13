"""Errors and quarantine reason codes shared by the whole pipeline."""

from __future__ import annotations

from enum import StrEnum


class InputError(Exception):
    """A fatal problem with an input, named by file, line and field where they are known.

    The CLI turns it into a one-line message and a non-zero exit; the library never exits.
    """

    def __init__(self, message: str, *, file: str | None = None, line: int | None = None,
                 field: str | None = None) -> None:
        self.file = file
        self.line = line
        self.field = field
        self.reason = message
        where = ":".join(str(p) for p in (file, line) if p is not None)
        prefix = f"{where}: " if where else ""
        suffix = f" (field '{field}')" if field else ""
        super().__init__(f"{prefix}{message}{suffix}")


class DatabaseLockedError(InputError):
    """Another process holds the write lock on the database file."""


class QuarantineReason(StrEnum):
    """Why a row was set aside instead of stored. Stored as text in `quarantine.reason`."""

    MALFORMED_LINE = "malformed_line"
    MISSING_FIELD = "missing_field"
    UNPARSABLE_FIELD = "unparsable_field"
    UNKNOWN_UNIT = "unknown_unit"
    OUT_OF_RANGE = "out_of_range"
    NONEXISTENT_LOCAL_TIME = "nonexistent_local_time"
    AMBIGUOUS_LOCAL_TIME = "ambiguous_local_time"
    FUTURE_TIMESTAMP = "future_timestamp"
    BEFORE_IN_SERVICE = "before_in_service"
    UNKNOWN_LOT = "unknown_lot"
    UNKNOWN_INSTRUMENT = "unknown_instrument"
    UNKNOWN_CHECK_TYPE = "unknown_check_type"
    UNKNOWN_OUTCOME = "unknown_outcome"
