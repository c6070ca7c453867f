"""Realisation: match each forward with the zero rate observed on its target date.

A forward seen on as-of date ``t`` for start ``S`` and tenor ``M`` months targets
``start_date = roll(t + S months)``. Its realised counterpart is the zero rate for tenor ``M`` on
the curve observed on the target date, or, if that day was not observed, on the first day observed
within ``tolerance_days`` business days after it (kept as ``observed_on``). Nothing is ever
interpolated in time: a forward with no observation in that window is not returned.

Unrealised forwards are of two kinds (see :func:`forward_status`):

``awaiting``
    the tolerance window reaches past the last day observed so far: an observation may still come
    in the ordinary course of the daily run;
``gap``
    the whole window lies on or before the last observed day and none of its days was observed
    (missing or rejected files): only a late load of one of those days can realise it.

Both are *pending* in the contract's sense (``status`` counts them); the split tells the user
whether waiting will help.

The tolerance window of a target ``d`` is ``[d, busday_offset(d, tolerance_days, roll="following")]``
on the curve's calendar: ``tolerance_days`` business days after the target (after rolling it
forward, should it not be a business day itself).

Everything here is vectorised over the rows; nothing loops over forwards or days.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipeline.dates import BusinessCalendar, as_days

__all__ = [
    "OUTCOME_COLUMNS",
    "due_forwards",
    "due_target_window",
    "forward_status",
    "pending_count",
    "realize",
]

OUTCOME_COLUMNS = (
    "as_of", "start_months", "tenor_months", "target_date", "observed_on",
    "forward_rate", "realized_rate", "spot_rate", "error_bp", "rw_error_bp",
)
_FORWARD_COLUMNS = ("as_of", "start_months", "tenor_months", "start_date", "forward_rate")
_ZERO_COLUMNS = ("as_of", "tenor_months", "zero_rate")
_TENOR_KEY = 1 << 16  # tenor months in a lookup key: day * 65536 + months


def _require(frame: pd.DataFrame, columns: tuple[str, ...], name: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise ValueError(f"{name} is missing column(s) {', '.join(missing)}")


def _days(values: object) -> np.ndarray:
    return as_days(np.asarray(values))


def _observed(observed_days: object) -> np.ndarray:
    # Sorted and unique, as searchsorted needs; np.unique returns a new array (input untouched).
    return np.unique(_days(observed_days))


def _deadlines(targets: np.ndarray, calendar: BusinessCalendar, tolerance_days: int) -> np.ndarray:
    """Last day of each target's tolerance window (computed once per distinct target)."""
    if tolerance_days < 0:
        raise ValueError(f"tolerance_days must be >= 0, got {tolerance_days}")
    uniq, inverse = np.unique(targets, return_inverse=True)
    return calendar.add_business_days(uniq, int(tolerance_days))[inverse]


def _first_observation(
    targets: np.ndarray, observed: np.ndarray, deadlines: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """First observed day on or after each target, and whether it falls within the deadline."""
    if observed.size == 0:
        return targets.copy(), np.zeros(targets.shape, dtype=bool)
    pos = np.searchsorted(observed, targets, side="left")
    first = observed[np.minimum(pos, observed.size - 1)]  # meaningless where pos == size: masked
    return first, (pos < observed.size) & (first <= deadlines)


def _keys(days: np.ndarray, tenor_months: np.ndarray) -> np.ndarray:
    months = np.asarray(tenor_months, dtype=np.int64)
    if months.size and (months.min() < 0 or months.max() >= _TENOR_KEY):
        raise ValueError("tenor_months out of range")
    return days.astype(np.int64) * _TENOR_KEY + months


def _lookup(zero_keys: np.ndarray, zero_rates: np.ndarray, keys: np.ndarray, what: str) -> np.ndarray:
    """Zero rate for each (day, tenor) key; raises naming the first key the zeros frame lacks."""
    if zero_keys.size == 0:
        if keys.size:
            raise ValueError(f"no zero rates given for the {what} dates")
        return np.empty(0)
    pos = np.minimum(np.searchsorted(zero_keys, keys), zero_keys.size - 1)
    hit = zero_keys[pos] == keys
    if not hit.all():
        bad = keys[~hit][0]
        day = np.datetime64(int(bad // _TENOR_KEY), "D")
        raise ValueError(f"no zero rate for tenor {int(bad % _TENOR_KEY)} months on {day} ({what} date)")
    return zero_rates[pos]


def realize(
    forwards: pd.DataFrame,
    zeros: pd.DataFrame,
    observed_days: np.ndarray,
    calendar: BusinessCalendar,
    tolerance_days: int,
) -> pd.DataFrame:
    """Outcomes of the forwards that can be realised now, one row per such forward.

    Parameters
    ----------
    forwards
        One curve's forwards: ``as_of, start_months, tenor_months, start_date, forward_rate``
        (``end_date`` and other columns are ignored; a ``curve`` column is carried through).
        Rates are decimals in the curve's own compounding and day count.
    zeros
        Built zero curves of the same curve: ``as_of, tenor_months, zero_rate`` (decimals, same
        compounding and day count), holding every forward tenor on every day needed: each
        forward's as-of date (the no-change forecast) and each observation day used.
    observed_days
        Days whose curve was observed and built, as anything :func:`pipeline.dates.as_days` reads;
        days held back by an open ``reject`` finding must already be left out.
    calendar, tolerance_days
        The curve's business-day calendar and ``realize.tolerance_days``.

    Returns
    -------
    DataFrame with columns :data:`OUTCOME_COLUMNS` (``curve`` first if given): ``target_date`` is
    the forward's ``start_date``; ``observed_on`` the first observed day in its tolerance window;
    ``realized_rate`` the zero rate for ``tenor_months`` on ``observed_on``; ``spot_rate`` the zero
    rate for ``tenor_months`` on ``as_of``; ``error_bp = (forward_rate - realized_rate) * 1e4`` and
    ``rw_error_bp = (spot_rate - realized_rate) * 1e4``. Date columns are datetime64. Rows keep the
    order of ``forwards``. Forwards with no observation in their window are left out (pending).

    Raises ``ValueError`` if a needed zero rate is missing from ``zeros`` or a column is missing.
    """
    _require(forwards, _FORWARD_COLUMNS, "forwards")
    _require(zeros, _ZERO_COLUMNS, "zeros")
    observed = _observed(observed_days)
    target = _days(forwards["start_date"])
    first, ok = _first_observation(target, observed, _deadlines(target, calendar, tolerance_days))

    rows = np.flatnonzero(ok)
    as_of = _days(forwards["as_of"])[rows]
    tenor = forwards["tenor_months"].to_numpy(dtype=np.int64)[rows]
    observed_on = first[rows]

    # Restrict the zeros to the days needed before sorting, so one new day costs the same
    # whatever the length of the history.
    zero_days = _days(zeros["as_of"])
    needed = np.union1d(as_of, observed_on)
    keep = np.isin(zero_days, needed)
    zk = _keys(zero_days[keep], zeros["tenor_months"].to_numpy(dtype=np.int64)[keep])
    zr = zeros["zero_rate"].to_numpy(dtype=float)[keep]
    order = np.argsort(zk, kind="stable")
    zk, zr = zk[order], zr[order]
    if zk.size > 1 and (np.diff(zk) == 0).any():
        dup = zk[1:][np.diff(zk) == 0][0]
        raise ValueError(
            f"zeros holds more than one rate for tenor {int(dup % _TENOR_KEY)} months on "
            f"{np.datetime64(int(dup // _TENOR_KEY), 'D')}"
        )
    realized = _lookup(zk, zr, _keys(observed_on, tenor), "observation")
    spot = _lookup(zk, zr, _keys(as_of, tenor), "as-of")
    fwd = forwards["forward_rate"].to_numpy(dtype=float)[rows]

    out = {}
    if "curve" in forwards.columns:
        out["curve"] = forwards["curve"].to_numpy()[rows]
    out.update(
        as_of=as_of,
        start_months=forwards["start_months"].to_numpy(dtype=np.int64)[rows],
        tenor_months=tenor,
        target_date=target[rows],
        observed_on=observed_on,
        forward_rate=fwd,
        realized_rate=realized,
        spot_rate=spot,
        error_bp=(fwd - realized) * 1e4,
        rw_error_bp=(spot - realized) * 1e4,
    )
    return pd.DataFrame(out)


def forward_status(
    forwards: pd.DataFrame,
    observed_days: np.ndarray,
    calendar: BusinessCalendar,
    tolerance_days: int,
    last_day: object | None = None,
) -> np.ndarray:
    """Status of each forward: ``"realisable"``, ``"awaiting"`` or ``"gap"`` (see the module notes).

    ``last_day`` is the last day the curve is known up to (default: the last observed day); a
    forward with no observation in its window is ``awaiting`` if its window ends after
    ``last_day``, else ``gap``. Returns an object array of shape (len(forwards),).
    """
    observed = _observed(observed_days)
    target = _days(forwards["start_date"])
    deadlines = _deadlines(target, calendar, tolerance_days)
    _, ok = _first_observation(target, observed, deadlines)
    if last_day is None:
        if observed.size == 0:
            return np.where(ok, "realisable", "awaiting").astype(object)
        last = observed[-1]
    else:
        last = as_days(last_day)
    return np.where(ok, "realisable", np.where(deadlines > last, "awaiting", "gap")).astype(object)


def pending_count(
    forwards: pd.DataFrame,
    observed_days: np.ndarray,
    calendar: BusinessCalendar,
    tolerance_days: int,
    last_day: object | None = None,
) -> dict[str, int]:
    """Counts of unrealised forwards: ``{"awaiting": a, "gap": g, "pending": a + g}``."""
    status = forward_status(forwards, observed_days, calendar, tolerance_days, last_day)
    awaiting = int((status == "awaiting").sum())
    gap = int((status == "gap").sum())
    return {"awaiting": awaiting, "gap": gap, "pending": awaiting + gap}


def due_target_window(
    new_days: np.ndarray, calendar: BusinessCalendar, tolerance_days: int
) -> tuple[np.datetime64, np.datetime64]:
    """Closed range of target dates whose tolerance window can contain one of ``new_days``.

    A superset (a few days wide at each end): use it to narrow a query on ``start_date``, then
    :func:`due_forwards` for the exact selection.
    """
    days = _observed(new_days)
    if days.size == 0:
        raise ValueError("new_days is empty")
    # Any target on or before the business day tolerance+1 business days before the first new
    # day has its whole window before that day.
    before = calendar.add_business_days(calendar.roll(days[0], "preceding"), -(int(tolerance_days) + 1))
    return before + np.timedelta64(1, "D"), days[-1]


def due_forwards(
    forwards: pd.DataFrame,
    new_days: np.ndarray,
    calendar: BusinessCalendar,
    tolerance_days: int,
    observed_days: np.ndarray | None = None,
) -> pd.DataFrame:
    """The forwards that one or more newly observed days can realise (rows of ``forwards``).

    Without ``observed_days``: every forward whose tolerance window contains a day of
    ``new_days``. With ``observed_days`` (all observed days, old and new): only those whose
    *first* observation in the window is one of ``new_days``, i.e. the ones the new days newly
    realise or, for a day loaded late into a gap or restated, re-derive; a forward already realised
    on an earlier observed day is left out. Pass the result to :func:`realize`.
    """
    days = _observed(new_days)
    if days.size == 0:
        return forwards.iloc[:0]
    lo, hi = due_target_window(days, calendar, tolerance_days)
    target = _days(forwards["start_date"])
    cand = np.flatnonzero((target >= lo) & (target <= hi))
    t = target[cand]
    deadlines = _deadlines(t, calendar, tolerance_days)
    _, hit = _first_observation(t, days, deadlines)
    if observed_days is not None:
        everything = np.union1d(_observed(observed_days), days)
        first, ok = _first_observation(t, everything, deadlines)
        hit &= ok & np.isin(first, days)
    return forwards.iloc[cand[hit]]
