"""The error hierarchy: every error a user can cause is a ``SweepshellError``.

Each error carries the offending field, the bad value and what is allowed, so that the
command line prints exactly one clean line and exits with code 2.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "ConfigError",
    "ParameterError",
    "QueryError",
    "RunStoppedError",
    "StoreDamagedError",
    "StoreMismatchError",
    "StoreNotFoundError",
    "StoreSchemaError",
    "SweepshellError",
    "UnknownModelError",
]


class SweepshellError(Exception):
    """Root of every error a user can cause; ``str(err)`` is one line naming the fix.

    Parameters
    ----------
    message
        One line: what is wrong, the bad value, what is allowed and how to fix it.
    field
        The input that was wrong (a config key, a parameter name, a path), if any.
    value
        The offending value, if any.
    allowed
        A short description of what would have been accepted, if any.
    """

    exit_code = 2

    def __init__(self, message: str, *, field: str | None = None, value: Any = None,
                 allowed: str | None = None) -> None:
        super().__init__(message)
        self.field = field
        self.value = value
        self.allowed = allowed


class ConfigError(SweepshellError, ValueError):
    """A sweep file or an override is malformed or incomplete."""


class ParameterError(SweepshellError, ValueError):
    """A model parameter is unknown, missing or outside its bounds."""


class UnknownModelError(SweepshellError, KeyError):
    """No model is registered under the requested name."""

    def __str__(self) -> str:  # KeyError would quote the message
        return str(self.args[0])


class StoreMismatchError(SweepshellError, ValueError):
    """An existing store was made by another model, version, parameters, axes or settings."""


class StoreSchemaError(SweepshellError, ValueError):
    """A folder is not a sweepshell store, or its schema version is unknown."""


class StoreDamagedError(SweepshellError, ValueError):
    """A store's metadata or chunks are damaged; the message names what and the remedy."""


class RunStoppedError(SweepshellError, RuntimeError):
    """A run stopped on a fault outside the input (disk full, file-size limit, scheduler lost).

    The store stays consistent and the claims are released: running the same command again
    continues. Exit code 3.
    """

    exit_code = 3


class StoreNotFoundError(SweepshellError, FileNotFoundError):
    """No store at the given path."""


class QueryError(SweepshellError, ValueError):
    """A query expression or field list is malformed."""
