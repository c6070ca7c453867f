"""Zero-rate tables and implied-forward surfaces from a :class:`~pipeline.curves.CurveSet`.

Both functions return long pandas frames for the days the curve set could build (``ok``), in the
curve's own compounding and day count (``*_cc`` columns: continuous compounding, same day count).
Dates are computed for all days at once per tenor or per month offset; rates come from the one
primitive, the discount factor.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.compounding import from_continuous
from pipeline.config import CurveConfig
from pipeline.dates import maturity_dates, year_fraction
from pipeline.tenors import Tenor, parse_tenor

__all__ = ["ForwardGrid", "ZeroGrid", "forward_grid", "forward_surface", "zero_grid", "zero_rate_table"]


@dataclass(frozen=True)
class ZeroGrid:
    """Zero rates of ``N`` built days at ``T`` tenors, as arrays (the shape the store writes).

    ``as_of`` ``(N,)`` datetime64[D]; ``tenor`` ``T`` canonical labels; ``tenor_months`` ``T``
    whole months or ``None`` (day-based tenors); ``maturity_date`` ``(N, T)`` datetime64[D];
    ``year_fraction``, ``zero_rate`` (decimal, the curve's compounding), ``zero_rate_cc``
    (continuous) and ``discount_factor``: ``(N, T)`` floats.
    """

    as_of: np.ndarray
    tenor: tuple[str, ...]
    tenor_months: tuple[int | None, ...]
    maturity_date: np.ndarray
    year_fraction: np.ndarray
    zero_rate: np.ndarray
    zero_rate_cc: np.ndarray
    discount_factor: np.ndarray

    def __len__(self) -> int:
        return self.maturity_date.size

    def frame(self) -> pd.DataFrame:
        """The long frame of :func:`zero_rate_table`: one row per (as_of, tenor), days outer."""
        n, k = self.maturity_date.shape
        months = pd.array(list(self.tenor_months), dtype="Int64")
        return pd.DataFrame(
            {
                "as_of": np.repeat(self.as_of, k),
                "tenor": pd.Series(np.tile(np.array(self.tenor, dtype=object), n), dtype="str"),
                "tenor_months": pd.array(np.tile(months, n), dtype="Int64") if k else pd.array([], "Int64"),
                "maturity_date": self.maturity_date.reshape(-1),
                "year_fraction": self.year_fraction.reshape(-1),
                "zero_rate": self.zero_rate.reshape(-1),
                "zero_rate_cc": self.zero_rate_cc.reshape(-1),
                "discount_factor": self.discount_factor.reshape(-1),
            }
        )


@dataclass(frozen=True)
class ForwardGrid:
    """Implied forwards of ``N`` built days over a grid of ``G`` (start, tenor) cells, as arrays.

    ``as_of`` ``(N,)`` datetime64[D]; ``start_months``, ``tenor_months`` ``(G,)`` int64, the cells
    in grid order (starts outer, tenors inner); ``start_date``, ``end_date`` ``(N, G)``
    datetime64[D]; ``forward_rate`` (decimal, the curve's compounding) and ``forward_rate_cc``
    (continuous) ``(N, G)`` over ``year_fraction(start_date, end_date)`` on the curve's day count.
    """

    as_of: np.ndarray
    start_months: np.ndarray
    tenor_months: np.ndarray
    start_date: np.ndarray
    end_date: np.ndarray
    forward_rate: np.ndarray
    forward_rate_cc: np.ndarray

    def __len__(self) -> int:
        return self.forward_rate.size

    def frame(self) -> pd.DataFrame:
        """The long frame of :func:`forward_surface`: one row per (as_of, cell), days outer."""
        n, g = self.forward_rate.shape
        return pd.DataFrame(
            {
                "as_of": np.repeat(self.as_of, g),
                "start_months": np.tile(self.start_months, n),
                "tenor_months": np.tile(self.tenor_months, n),
                "start_date": self.start_date.reshape(-1),
                "end_date": self.end_date.reshape(-1),
                "forward_rate": self.forward_rate.reshape(-1),
                "forward_rate_cc": self.forward_rate_cc.reshape(-1),
            }
        )


def zero_rate_table(curves, tenors: Sequence[Tenor | str], cfg: CurveConfig) -> pd.DataFrame:
    """One row per (as_of, tenor) for every ok day, ``T`` tenors in the order given.

    Columns: ``as_of``, ``tenor`` (canonical label), ``tenor_months`` (Int64, NA for day-based
    tenors), ``maturity_date`` (``maturity_dates(as_of, tenor, cfg.calendar)``), ``year_fraction``
    (``cfg.day_count``), ``zero_rate`` (decimal, ``cfg.compounding``), ``zero_rate_cc`` (continuous)
    and ``discount_factor``. The same numbers as :func:`zero_grid`, in long form.
    """
    return zero_grid(curves, tenors, cfg).frame()


def zero_grid(curves, tenors: Sequence[Tenor | str], cfg: CurveConfig) -> ZeroGrid:
    """Zero rates of every ok day of ``curves`` at ``tenors`` as a :class:`ZeroGrid` (see
    :func:`zero_rate_table` for the conventions)."""
    parsed = [parse_tenor(t) for t in tenors]
    days = curves.as_of[curves.ok]
    idx = np.flatnonzero(curves.ok)
    n, k = days.shape[0], len(parsed)
    mat = np.empty((n, k), dtype="datetime64[D]")
    for j, t in enumerate(parsed):  # a handful of tenors
        mat[:, j] = maturity_dates(days, t, cfg.calendar)
    tau = year_fraction(days[:, None], mat, cfg.day_count)
    ln_d = curves.ln_discount_rows(idx, tau)
    with np.errstate(invalid="ignore", divide="ignore"):
        zcc = np.where(tau > 0.0, -ln_d / np.where(tau > 0.0, tau, 1.0), np.nan)
    if np.any(tau == 0.0):
        full = np.full((len(curves.as_of), k), np.nan)
        full[idx] = tau
        zcc = np.where(tau == 0.0, curves.zero_rate(np.zeros_like(full), "continuous")[idx], zcc)
    return ZeroGrid(days, tuple(t.label for t in parsed), tuple(t.months for t in parsed), mat, tau,
                    from_continuous(zcc, cfg.compounding, tau), zcc, np.exp(ln_d))


def forward_surface(
    curves,
    cfg: CurveConfig,
    starts: Sequence[Tenor | str] | None = None,
    tenors: Sequence[Tenor | str] | None = None,
) -> pd.DataFrame:
    """One row per (as_of, start_months, tenor_months) for every ok day over ``starts x tenors``
    (default ``cfg.forward_starts x cfg.forward_tenors``; both must be whole months).

    ``start_date = maturity_dates(as_of, S months)``, ``end_date = maturity_dates(as_of, S+M months)``
    on ``cfg.calendar`` (CONTRACT: ``roll(t + months)``). ``forward_rate`` is the rate in
    ``cfg.compounding`` over ``tau = year_fraction(start_date, end_date, cfg.day_count)`` implied by
    ``D(start) / D(end)``; ``forward_rate_cc`` the continuous rate over the same ``tau``. The same
    numbers as :func:`forward_grid`, in long form.
    """
    return forward_grid(curves, cfg, starts, tenors).frame()


def forward_grid(
    curves,
    cfg: CurveConfig,
    starts: Sequence[Tenor | str] | None = None,
    tenors: Sequence[Tenor | str] | None = None,
) -> ForwardGrid:
    """The forward surface of every ok day of ``curves`` as a :class:`ForwardGrid` (see
    :func:`forward_surface` for the conventions)."""
    s_months = _months(cfg.forward_starts if starts is None else starts, allow_zero=True)
    m_months = _months(cfg.forward_tenors if tenors is None else tenors, allow_zero=False)
    idx = np.flatnonzero(curves.ok)
    days = curves.as_of[idx]
    n = days.shape[0]
    offsets = np.unique(np.concatenate([s_months, (s_months[:, None] + m_months[None, :]).reshape(-1)]))
    dates = np.empty((n, offsets.size), dtype="datetime64[D]")
    for j, mo in enumerate(offsets):  # one pass per distinct month offset
        dates[:, j] = maturity_dates(days, Tenor(int(mo), "M"), cfg.calendar)
    tau_off = year_fraction(days[:, None], dates, cfg.day_count)
    ln_d = curves.ln_discount_rows(idx, tau_off)

    s_grid = np.repeat(s_months, m_months.size)
    m_grid = np.tile(m_months, s_months.size)
    i_start = np.searchsorted(offsets, s_grid)
    i_end = np.searchsorted(offsets, s_grid + m_grid)
    start_date, end_date = dates[:, i_start], dates[:, i_end]
    tau = year_fraction(start_date, end_date, cfg.day_count)
    with np.errstate(invalid="ignore", divide="ignore"):
        fcc = (ln_d[:, i_start] - ln_d[:, i_end]) / tau
    return ForwardGrid(days, s_grid.astype(np.int64), m_grid.astype(np.int64), start_date, end_date,
                       from_continuous(fcc, cfg.compounding, tau), fcc)


def _months(tenors: Sequence[Tenor | str], *, allow_zero: bool) -> np.ndarray:
    out = []
    for t in tenors:
        p = parse_tenor(t, allow_zero=allow_zero)
        if p.months is None:
            raise ValueError(f"forward grid tenor {p.label} is not a whole number of months")
        out.append(p.months)
    return np.asarray(out, dtype=np.int64)
