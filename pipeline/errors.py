"""Every error a user can cause, in one hierarchy; the command line catches :class:`AfterwardError` once.

Each message is one line that names what was wrong and what to do. ``exit_code`` is the command's
exit status for it: 2 for bad usage or a bad config, 1 for everything else.

    AfterwardError
    ├── ConfigError        a bad afterward.toml (key, value, convention)         exit 2
    ├── TenorError         a tenor label that cannot be read                     exit 2
    ├── ArgumentError      an argument that cannot be read or is refused         exit 2
    │                      (a malformed date, a query that writes)
    ├── UserError          a request that cannot be carried out (a missing file) exit 1
    ├── ModelInputError    data or settings the term-structure model cannot use  exit 2
    │                      (pipeline.term_structure.errors)
    ├── ForecastRequestError  a forecast load refused before anything changed    exit 2
    ├── KnownAtError       an --as-known-at / --known-since time that cannot be used exit 2
    └── StoreError         the store cannot be used as asked                     exit 1
        ├── StoreLocked    another process holds its write lock
        ├── StoreMissing   no store at the configured path
        └── RunInProgress  another afterward job holds its run lock
"""

from __future__ import annotations

__all__ = ["AfterwardError", "ArgumentError", "ConfigError", "ForecastRequestError", "KnownAtError",
           "RunInProgress", "StoreError", "StoreLocked", "StoreMissing", "TenorError", "UserError"]


class AfterwardError(Exception):
    """Anything a user can cause; the message is one line."""

    exit_code = 1


class ConfigError(AfterwardError, ValueError):
    """A bad configuration; the message names the key and what is allowed."""

    exit_code = 2


class TenorError(AfterwardError, ValueError):
    """A tenor label that cannot be read."""

    exit_code = 2


class ArgumentError(AfterwardError, ValueError):
    """An argument that cannot be read (a malformed date) or is refused (a query that would write);
    the message names the argument and what is allowed. Times for as-known-at: :class:`KnownAtError`."""

    exit_code = 2


class UserError(AfterwardError, RuntimeError):
    """A request that cannot be carried out as asked (a missing or unreadable file, say)."""


class ForecastRequestError(AfterwardError):
    """A forecast load that cannot be carried out as asked (a bad name, curve, units or file): nothing
    is changed."""

    exit_code = 2


class KnownAtError(AfterwardError, ValueError):
    """A time for ``--as-known-at`` or ``--known-since`` that is malformed, in the future or before
    the first load."""

    exit_code = 2


class StoreError(AfterwardError, RuntimeError):
    """A problem with the store that the user can act on."""


class StoreLocked(StoreError):
    """Another process holds the store's write lock."""


class StoreMissing(StoreError):
    """No store at the configured path."""


class RunInProgress(StoreError):
    """Another afterward job holds the store's run lock."""
