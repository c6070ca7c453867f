"""The month-end panel: continuously compounded zero rates at whole months, one row per month.

From each day's built curve the panel reads the zero rate to exact times ``n/12`` years,
``n = 1 .. N`` months, on the curve's own day count (``y(n) = -ln D(n/12) / (n/12)``, a decimal).
``N`` is ``max_months`` (``model.max_months``, default 120) but at most the longest quoted tenor, so
the panel never leans on extrapolation past the quotes.

A month is *observed* when the curve set holds at least one built (``ok``) day in it; its row is the
last such day (for a ``frequency = "monthly"`` curve that is its one observation). A month between
the first and the last observed month with no built day is *missing*: it is not filled, it has no
row, and it is named in :attr:`TermPanel.skipped_months`. Everything downstream (excess returns,
regressions, the model's VAR) pairs only months that are calendar neighbours, so a gap is skipped,
never bridged.

With a ``calendar``, the last month counts only once it has closed: its last built day must be the
month's last business day. Otherwise it is left out and named in :attr:`TermPanel.open_month`
(a month in progress would move its "month end" every day). Daily values (:attr:`TermPanel.days`,
:attr:`TermPanel.daily_zero_cc`) keep every built day, the open month's included.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.curves.base import CurveSet
from pipeline.dates import BusinessCalendar, as_days
from pipeline.tenors import Tenor, parse_tenor
from pipeline.term_structure.errors import ModelInputError

__all__ = ["DEFAULT_MAX_MONTHS", "TERM_PANEL_COLUMNS", "TermPanel", "closed_month_ends", "longest_tenor_months",
           "term_panel", "term_panel_from_yields"]

DEFAULT_MAX_MONTHS = 120
TERM_PANEL_COLUMNS = ("curve", "as_of", "maturity_months", "zero_rate_cc")
_MONTH = "datetime64[M]"


@dataclass(frozen=True)
class TermPanel:
    """Month-end zero rates of one curve.

    ``as_of`` ``(T,)`` datetime64[D]: the last built day of each observed month, increasing, at most
    one per calendar month. ``zero_cc`` ``(T, N)``: decimal, continuously compounded, at ``n/12``
    years (curve day count), column ``n-1`` for ``n`` months. ``days`` ``(D,)`` and
    ``daily_zero_cc`` ``(D, N)``: the same rates on every built day (for daily model values).
    ``skipped_months``: ``"YYYY-MM"`` of the months inside the span with no built day.
    ``open_month``: the last month left out because it had not closed (``None`` if none).
    ``longest_tenor_months``: the longest quoted tenor (``None`` when not known).
    """

    curve: str
    as_of: np.ndarray
    zero_cc: np.ndarray
    days: np.ndarray
    daily_zero_cc: np.ndarray
    skipped_months: tuple[str, ...] = ()
    open_month: str | None = None
    longest_tenor_months: int | None = None

    @property
    def max_months(self) -> int:
        """``N``, the longest maturity in the panel (months)."""
        return int(self.zero_cc.shape[1])

    @property
    def maturity_months(self) -> np.ndarray:
        """``(N,)`` int64: ``1 .. N``."""
        return np.arange(1, self.max_months + 1, dtype=np.int64)

    @property
    def months(self) -> np.ndarray:
        """``(T,)`` datetime64[M]: the calendar month of each row."""
        return self.as_of.astype(_MONTH)

    def follows(self) -> np.ndarray:
        """``(T-1,)`` bool: row ``t+1`` is the calendar month right after row ``t`` (a usable pair)."""
        m = self.months.astype(np.int64)
        return np.diff(m) == 1

    def grid(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The panel on every calendar month of its span: ``(months (M,), as_of (M,), zero_cc (M, N))``
        with ``NaT`` / NaN rows for skipped months, so that a shift by ``h`` rows is ``h`` months."""
        if self.as_of.size == 0:
            return np.array([], dtype=_MONTH), np.array([], dtype="datetime64[D]"), self.zero_cc.copy()
        months = np.arange(self.months[0], self.months[-1] + 1)
        pos = (self.months - months[0]).astype(np.int64)
        dates = np.full(months.shape, np.datetime64("NaT"), dtype="datetime64[D]")
        dates[pos] = self.as_of
        y = np.full((months.size, self.max_months), np.nan)
        y[pos] = self.zero_cc
        return months, dates, y

    def frame(self) -> pd.DataFrame:
        """The ``term_panel`` view: one row per (as_of, maturity_months), dates outer."""
        t, n = self.zero_cc.shape
        return pd.DataFrame(
            {
                "curve": pd.Series([self.curve] * (t * n), dtype="str"),
                "as_of": np.repeat(self.as_of, n),
                "maturity_months": np.tile(self.maturity_months, t),
                "zero_rate_cc": self.zero_cc.reshape(-1),
            },
            columns=list(TERM_PANEL_COLUMNS),
        )


def longest_tenor_months(tenors: Iterable[Tenor | str]) -> int:
    """The longest month- or year-based tenor of ``tenors`` in months (day-based tenors are shorter
    than a month and do not count); 0 when there is none."""
    months = [parse_tenor(t).months for t in tenors]
    return max([m for m in months if m is not None], default=0)


def _panel_width(max_months: int, longest: int | None, curve: str) -> int:
    if int(max_months) != max_months or max_months < 1:
        raise ModelInputError(f"curve {curve!r}: max_months must be a whole number of months >= 1, got {max_months}")
    n = int(max_months) if longest is None else min(int(max_months), int(longest))
    if n < 1:
        raise ModelInputError(f"curve {curve!r}: no tenor of a month or longer is quoted; the panel needs one")
    return n


def term_panel_from_yields(
    as_of: object,
    zero_cc: np.ndarray,
    curve: str = "",
    *,
    calendar: BusinessCalendar | None = None,
    longest_tenor_months: int | None = None,
) -> TermPanel:
    """The panel from daily zero rates already read at whole months.

    ``as_of`` ``(D,)`` dates, ``zero_cc`` ``(D, N)`` decimals (continuous, column ``n-1`` = ``n``
    months). A day with any non-finite rate counts as not observed. Days need not be sorted;
    a repeated day is an error. Inputs are not modified.
    """
    days = as_days(as_of).reshape(-1)
    y = np.asarray(zero_cc, dtype=float)
    if y.ndim != 2 or y.shape[0] != days.shape[0]:
        raise ValueError(f"zero_cc must be (D, N) with D = {days.shape[0]}, got {y.shape}")
    order = np.argsort(days, kind="stable")
    days, y = days[order], y[order]
    if days.size > 1 and np.any(days[1:] == days[:-1]):
        raise ValueError(f"curve {curve!r}: a day appears twice in the panel input")
    good = np.all(np.isfinite(y), axis=1)
    days, y = days[good], y[good]
    months = days.astype(_MONTH)
    last = np.ones(days.shape, dtype=bool)
    last[:-1] = months[1:] != months[:-1]
    end_rows = np.flatnonzero(last)
    open_month = None
    if calendar is not None and end_rows.size:
        final = days[end_rows[-1]]
        month_end = calendar.month_ends(final.astype(_MONTH).astype("datetime64[D]"), final + 31)[:1]
        if month_end.size and final < month_end[0]:
            open_month = str(final.astype(_MONTH))
            end_rows = end_rows[:-1]
    skipped: tuple[str, ...] = ()
    if end_rows.size:
        span = np.arange(months[end_rows[0]], months[end_rows[-1]] + 1)
        skipped = tuple(str(m) for m in np.setdiff1d(span, months[end_rows]))
    return TermPanel(
        curve=curve,
        as_of=days[end_rows].copy(),
        zero_cc=y[end_rows].copy(),
        days=days.copy(),
        daily_zero_cc=y.copy(),
        skipped_months=skipped,
        open_month=open_month,
        longest_tenor_months=longest_tenor_months,
    )


def term_panel(
    curves: CurveSet,
    longest_tenor_months: int,
    max_months: int = DEFAULT_MAX_MONTHS,
    curve: str = "",
    *,
    calendar: BusinessCalendar | None = None,
) -> TermPanel:
    """The month-end panel of a built :class:`~pipeline.curves.CurveSet`, all days at once.

    ``longest_tenor_months``: the curve's longest quoted tenor (:func:`longest_tenor_months` of the
    config's ``tenors``); ``N = min(max_months, longest_tenor_months)``. Zero rates come from the
    curve set's discount factors at ``t = n/12`` on its own day count (one vectorised evaluation
    ``(D, N)``); days that are not ``ok`` are not observed. ``calendar`` (the curve's business-day
    calendar) lets the last month wait until it closes; see the module notes.

    What a step passes: the :class:`CurveSet` it builds for the curve's days (``build_curves`` on
    the stored quotes, or ``curves_from_nodes`` / ``nss_curves`` on the stored nodes).
    """
    n = _panel_width(max_months, longest_tenor_months, curve)
    t = np.arange(1, n + 1, dtype=float) / 12.0
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        y = curves.zero_rate(t, "continuous") if len(curves) else np.empty((0, n))
    y = np.where(curves.ok[:, None], y, np.nan)
    return term_panel_from_yields(curves.as_of, y, curve, calendar=calendar,
                                  longest_tenor_months=int(longest_tenor_months))


def closed_month_ends(days: object, calendar: BusinessCalendar | None = None) -> np.ndarray:
    """The month ends a panel of built ``days`` would hold ``(M,)`` datetime64[D]: the last day of
    each month, the last month only once closed (see the module notes). The same rule as
    :func:`term_panel_from_yields`, on the days alone (what a job checks before recomputing)."""
    d = np.unique(as_days(days).reshape(-1))
    return term_panel_from_yields(d, np.empty((d.size, 0)), calendar=calendar).as_of
