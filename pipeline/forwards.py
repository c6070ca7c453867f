"""Zero-rate tables and implied-forward surfaces from a :class:`~pipeline.curves.CurveSet`.

Both functions return long pandas frames for the days the curve set could build (``ok``), in the
curve's own compounding and day count (``*_cc`` columns: continuous compounding, same day count).
Dates are computed for all days at once per tenor or per month offset; rates come from the one
primitive, the discount factor.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from pipeline.compounding import from_continuous
from pipeline.config import CurveConfig
from pipeline.dates import maturity_dates, year_fraction
from pipeline.tenors import Tenor, parse_tenor

__all__ = ["forward_surface", "zero_rate_table"]


def zero_rate_table(curves, tenors: Sequence[Tenor | str], cfg: CurveConfig) -> pd.DataFrame:
    """One row per (as_of, tenor) for every ok day, ``T`` tenors in the order given.

    Columns: ``as_of``, ``tenor`` (canonical label), ``tenor_months`` (Int64, NA for day-based
    tenors), ``maturity_date`` (``maturity_dates(as_of, tenor, cfg.calendar)``), ``year_fraction``
    (``cfg.day_count``), ``zero_rate`` (decimal, ``cfg.compounding``), ``zero_rate_cc`` (continuous)
    and ``discount_factor``.
    """
    parsed = [parse_tenor(t) for t in tenors]
    days = curves.as_of[curves.ok]
    idx = np.flatnonzero(curves.ok)
    n, k = days.shape[0], len(parsed)
    mat = np.empty((n, k), dtype="datetime64[D]")
    for j, t in enumerate(parsed):  # a handful of tenors
        mat[:, j] = maturity_dates(days, t, cfg.calendar)
    tau = year_fraction(days[:, None], mat, cfg.day_count)
    full = np.full((len(curves.as_of), k), np.nan)
    full[idx] = tau
    ln_d = curves.ln_discount(full)[idx]
    with np.errstate(invalid="ignore", divide="ignore"):
        zcc = np.where(tau > 0.0, -ln_d / np.where(tau > 0.0, tau, 1.0), np.nan)
    if np.any(tau == 0.0):
        zcc = np.where(tau == 0.0, curves.zero_rate(np.zeros_like(full), "continuous")[idx], zcc)
    months = pd.array([t.months for t in parsed], dtype="Int64")
    return pd.DataFrame(
        {
            "as_of": np.repeat(days, k),
            "tenor": pd.Series(np.tile(np.array([t.label for t in parsed], dtype=object), n), dtype="str"),
            "tenor_months": pd.array(np.tile(months, n), dtype="Int64") if k else pd.array([], "Int64"),
            "maturity_date": mat.reshape(-1),
            "year_fraction": tau.reshape(-1),
            "zero_rate": from_continuous(zcc, cfg.compounding, tau).reshape(-1),
            "zero_rate_cc": zcc.reshape(-1),
            "discount_factor": np.exp(ln_d).reshape(-1),
        }
    )


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
    ``D(start) / D(end)``; ``forward_rate_cc`` the continuous rate over the same ``tau``.
    """
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
    full = np.full((len(curves.as_of), offsets.size), np.nan)
    full[idx] = tau_off
    ln_d = curves.ln_discount(full)[idx]

    s_grid = np.repeat(s_months, m_months.size)
    m_grid = np.tile(m_months, s_months.size)
    i_start = np.searchsorted(offsets, s_grid)
    i_end = np.searchsorted(offsets, s_grid + m_grid)
    start_date, end_date = dates[:, i_start], dates[:, i_end]
    tau = year_fraction(start_date, end_date, cfg.day_count)
    with np.errstate(invalid="ignore", divide="ignore"):
        fcc = (ln_d[:, i_start] - ln_d[:, i_end]) / tau
    g = s_grid.size
    return pd.DataFrame(
        {
            "as_of": np.repeat(days, g),
            "start_months": np.tile(s_grid, n).astype(np.int64),
            "tenor_months": np.tile(m_grid, n).astype(np.int64),
            "start_date": start_date.reshape(-1),
            "end_date": end_date.reshape(-1),
            "forward_rate": from_continuous(fcc, cfg.compounding, tau).reshape(-1),
            "forward_rate_cc": fcc.reshape(-1),
        }
    )


def _months(tenors: Sequence[Tenor | str], *, allow_zero: bool) -> np.ndarray:
    out = []
    for t in tenors:
        p = parse_tenor(t, allow_zero=allow_zero)
        if p.months is None:
            raise ValueError(f"forward grid tenor {p.label} is not a whole number of months")
        out.append(p.months)
    return np.asarray(out, dtype=np.int64)
