"""Frames in and out of the store through Arrow: the shapes the pipeline's functions take.

Reading shapes data (a pivot of days x tenors) but computes nothing financial.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

__all__ = ["QuotePanel", "append_frame", "last_quoted_day", "read_frame", "read_quote_panel"]


@dataclass
class QuotePanel:
    """One curve's current quotes as a days x tenors panel.

    ``as_of`` ``(D,)`` datetime64[D], sorted; ``tenors`` ``T`` canonical labels in the order asked;
    ``rates`` ``(D, T)`` decimals as quoted, NaN = missing; ``recorded_at`` ``(D,)`` the latest
    recorded_at among each day's quotes (when the day last changed).
    """

    as_of: np.ndarray
    tenors: list[str]
    rates: np.ndarray
    recorded_at: np.ndarray

    def __len__(self) -> int:
        return len(self.as_of)

    def select(self, mask: np.ndarray) -> QuotePanel:
        return QuotePanel(self.as_of[mask], self.tenors, self.rates[mask], self.recorded_at[mask])


def read_frame(con: duckdb.DuckDBPyConnection, query: str, params: list | None = None, *,
               date_as_object: bool = True) -> pd.DataFrame:
    """A query's result as a pandas frame, through Arrow.

    DATE columns arrive as Python ``datetime.date`` objects by default; ``date_as_object=False``
    gives ``datetime64`` columns instead, which is what numeric code wants: turning a million date
    objects into ``datetime64`` afterwards costs about a second a column.
    """
    return con.sql(query, params=params or None).to_arrow_table().to_pandas(date_as_object=date_as_object)


def read_quote_panel(con: duckdb.DuckDBPyConnection, curve: str, tenors: list[str],
                     first: object = None, last: object = None, *, as_of_ts: datetime | None = None) -> QuotePanel:
    """The current quotes of ``curve`` (or as known at ``as_of_ts``) pivoted to days x ``tenors``."""
    source = "quotes" if as_of_ts is None else "quotes_as_of(?)"
    params: list = [] if as_of_ts is None else [as_of_ts]
    where = ["curve = ?"]
    params.append(curve)
    if first is not None:
        where.append("as_of >= CAST(? AS DATE)")
        params.append(str(first))
    if last is not None:
        where.append("as_of <= CAST(? AS DATE)")
        params.append(str(last))
    t = con.sql(
        f"SELECT as_of, tenor, rate, recorded_at FROM {source} WHERE {' AND '.join(where)}", params=params
    ).to_arrow_table()
    if t.num_rows == 0:
        return QuotePanel(np.array([], dtype="datetime64[D]"), list(tenors), np.zeros((0, len(tenors))),
                          np.array([], dtype="datetime64[us]"))
    days = t["as_of"].to_numpy().astype("datetime64[D]")
    uniq, day_idx = np.unique(days, return_inverse=True)
    col = {label: j for j, label in enumerate(tenors)}
    tenor_idx = np.array([col.get(x, -1) for x in t["tenor"].to_pylist()], dtype=np.int64)
    rates = np.full((len(uniq), len(tenors)), np.nan)
    keep = tenor_idx >= 0
    rates[day_idx[keep], tenor_idx[keep]] = t["rate"].to_numpy()[keep]
    rec = t["recorded_at"].to_numpy().astype("datetime64[us]")
    latest = np.full(len(uniq), np.datetime64("NaT"), dtype="datetime64[us]")
    order = np.lexsort((rec, day_idx))
    # the last entry of each day in (day, recorded_at) order is that day's latest version
    last_of_day = np.r_[day_idx[order][1:] != day_idx[order][:-1], True]
    latest[day_idx[order][last_of_day]] = rec[order][last_of_day]
    return QuotePanel(uniq, list(tenors), rates, latest)


def append_frame(con: duckdb.DuckDBPyConnection, table: str, frame: pd.DataFrame | pa.Table,
                 columns: list[str]) -> int:
    """Insert ``frame``'s ``columns`` (in the table's column order) through Arrow; returns the row count."""
    arrow = frame if isinstance(frame, pa.Table) else pa.Table.from_pandas(frame[columns], preserve_index=False)
    if arrow.num_rows == 0:
        return 0
    staged = arrow.select(columns)  # noqa: F841 - read by DuckDB by its name
    con.execute(f"INSERT INTO {table} ({', '.join(columns)}) SELECT {', '.join(columns)} FROM staged")
    return arrow.num_rows


def last_quoted_day(con: duckdb.DuckDBPyConnection, curve: str) -> object:
    """The latest as-of date with a current quote of ``curve`` (None for an empty curve)."""
    row = con.execute("SELECT max(as_of) FROM quotes WHERE curve = ?", [curve]).fetchall()
    return row[0][0] if row else None
