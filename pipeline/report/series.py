"""Thinning long daily series for charts: one point per week, month, ... so an SVG stays small.

A chart of thirty years of daily data has ~7,800 points per line, more than a page can show. The
report keeps the *last observation* of each calendar period (not an average, so every plotted point
is a value that was actually observed), choosing the finest period that leaves at most
``max_points`` points.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["PERIODS", "choose_period", "period_keys", "period_start", "thin_frame", "thin_index"]

#: the periods tried, finest first; the name appears in chart captions ("one point per week")
PERIODS = ("day", "week", "month", "quarter", "year")


def _days(dates: object) -> np.ndarray:
    return np.asarray(pd.to_datetime(pd.Series(dates)).to_numpy().astype("datetime64[D]"))


def period_keys(dates: object, period: str) -> np.ndarray:
    """An integer key per date, equal for dates in the same ``period`` (weeks start on Monday).

    ``dates``: array-like of dates, shape ``(N,)``; returns int64 ``(N,)``.
    """
    d = _days(dates)
    days = d.astype(np.int64)
    if period == "day":
        return days
    if period == "week":
        # 1970-01-01 was a Thursday: shifting by 3 days makes each key a Monday-to-Sunday week
        return (days + 3) // 7
    months = d.astype("datetime64[M]").astype(np.int64)
    if period == "month":
        return months
    if period == "quarter":
        return months // 3
    if period == "year":
        return months // 12
    raise ValueError(f"unknown period {period!r}; allowed: {', '.join(PERIODS)}")


def choose_period(dates: object, max_points: int) -> str:
    """The finest period of :data:`PERIODS` that gives at most ``max_points`` distinct periods."""
    d = _days(dates)
    for period in PERIODS:
        if np.unique(period_keys(d, period)).size <= max_points:
            return period
    return PERIODS[-1]


def thin_index(dates: object, period: str) -> np.ndarray:
    """Positions of the last observation of each ``period`` in ``dates`` (sorted ascending).

    Returns int64 positions, ascending; all positions when ``period`` is ``"day"`` and dates are
    distinct days.
    """
    keys = period_keys(dates, period)
    if keys.size == 0:
        return np.zeros(0, dtype=np.int64)
    last = np.r_[keys[1:] != keys[:-1], True]
    return np.flatnonzero(last).astype(np.int64)


def thin_frame(frame: pd.DataFrame, date_col: str, period: str, by: list[str] | None = None) -> pd.DataFrame:
    """The rows of ``frame`` that are the last of their ``period`` within each ``by`` group.

    The input is not changed; the result is sorted by ``by`` then ``date_col``, with a fresh index.
    """
    if frame.empty:
        return frame.copy()
    keys = list(by or [])
    ordered = frame.sort_values([*keys, date_col], kind="stable").reset_index(drop=True)
    period_key = period_keys(ordered[date_col].to_numpy(), period)
    boundary = np.r_[period_key[1:] != period_key[:-1], True]
    for k in keys:
        values = ordered[k].to_numpy()
        boundary |= np.r_[values[1:] != values[:-1], True]
    return ordered.loc[boundary].reset_index(drop=True)


def period_start(keys: object, period: str) -> np.ndarray:
    """The first day of each period key made by :func:`period_keys` (datetime64[D])."""
    k = np.asarray(keys, dtype=np.int64)
    if period == "day":
        return k.astype("datetime64[D]")
    if period == "week":
        return (k * 7 - 3).astype("datetime64[D]")
    if period == "month":
        return k.astype("datetime64[M]").astype("datetime64[D]")
    if period == "quarter":
        return (k * 3).astype("datetime64[M]").astype("datetime64[D]")
    if period == "year":
        return (k * 12).astype("datetime64[M]").astype("datetime64[D]")
    raise ValueError(f"unknown period {period!r}; allowed: {', '.join(PERIODS)}")
