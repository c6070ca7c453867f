"""What reading one file gives back: :class:`ReadResult`, and its empty and refused forms."""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd


@dataclass
class ReadResult:
    """What a reader found in one file.

    ``rows``: ``line`` (int), ``as_of`` (datetime64[D]), ``tenor`` (canonical label), ``value``
    (float, in the file's units), ``curve`` (str or None, from a long layout's ``curve`` column),
    ``raw`` (the source line). ``rejected``: ``line``, ``raw``, ``reason``. ``error`` is set when the
    file could not be read at all; then both frames are empty.
    """

    rows: pd.DataFrame
    rejected: pd.DataFrame
    layout: str | None = None
    error: str | None = None
    columns: list[str] = field(default_factory=list)

    @property
    def rows_read(self) -> int:
        return len(self.rows) + len(self.rejected)


_EMPTY_ROWS: pd.DataFrame | None = None
_EMPTY_REJECTED: pd.DataFrame | None = None


def empty_rows() -> pd.DataFrame:
    """A new frame of no quote rows, with the columns and types of :attr:`ReadResult.rows`."""
    global _EMPTY_ROWS
    if _EMPTY_ROWS is None:
        _EMPTY_ROWS = _new_empty_rows()
    return _EMPTY_ROWS.copy()


def empty_rejected() -> pd.DataFrame:
    """A new frame of no rejected rows, with the columns and types of :attr:`ReadResult.rejected`."""
    # most files have no rejected rows, and building an empty frame costs about a millisecond
    global _EMPTY_REJECTED
    if _EMPTY_REJECTED is None:
        _EMPTY_REJECTED = _new_empty_rejected()
    return _EMPTY_REJECTED.copy()


def _new_empty_rows() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "line": pd.Series([], dtype="int64"),
            "as_of": pd.Series([], dtype="datetime64[s]"),
            "tenor": pd.Series([], dtype="object"),
            "value": pd.Series([], dtype="float64"),
            "curve": pd.Series([], dtype="object"),
            "raw": pd.Series([], dtype="object"),
        }
    )


def _new_empty_rejected() -> pd.DataFrame:
    return pd.DataFrame(
        {"line": pd.Series([], dtype="int64"), "raw": pd.Series([], dtype="object"),
         "reason": pd.Series([], dtype="object")}
    )


def refuse(reason: str) -> ReadResult:
    """The result for a file that cannot be read at all: no rows, ``error`` set to ``reason``."""
    return ReadResult(empty_rows(), empty_rejected(), None, reason)

