"""Contender forecasts and their outcomes, from the forward outcome record.

A *contender* is a forecast, made on an as-of date, of the zero rate for tenor M on the target date
``roll(as_of + start)``, in the curve's own compounding and day count, realised by exactly the rule
that realises forwards (:mod:`pipeline.realize`). The built-in contenders come straight from the
outcome rows of the forwards (one row per realised forward):

``forward``
    the implied forward (``forward_rate``);
``no_change``
    the as-of spot zero rate for tenor M (``spot_rate``);
``premium_adjusted``
    the forward less the trailing term premium *known on the as-of date*: the mean ``error_bp`` of
    the last ``window`` outcomes of the same (curve, start, tenor) cell whose ``observed_on`` is on
    or before the as-of date (ordered by ``observed_on``, then ``as_of``; all of them while fewer
    than ``window`` are known). Absent on days with fewer than ``min_history`` known outcomes. A rate
    realised after the as-of date never enters it: only outcomes already observed are summed, and
    each cell is summed on its own, so changing any later rate leaves the forecast bit for bit the
    same.

Frames out have the columns of the ``contender_outcomes`` view (:data:`CONTENDER_OUTCOME_COLUMNS`):
rates in decimals, ``error_bp = (forecast_rate - realized_rate) * 1e4``; dates ``datetime64``.
The other contenders (a user's file, ``model_expected``, ``forward@METHOD``) are forecasts on the
same keys: :func:`attach_outcomes` realises those on the forward grid by the forwards' own outcomes,
:func:`realize_forecasts` realises any others through :func:`pipeline.realize.realize`.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from pipeline.compounding import from_continuous
from pipeline.dates import BusinessCalendar, add_months, as_days, maturity_dates, year_fraction
from pipeline.realize import realize
from pipeline.tenors import Tenor

__all__ = [
    "BUILTIN",
    "CONTENDER_OUTCOME_COLUMNS",
    "FORECAST_COLUMNS",
    "attach_outcomes",
    "builtin_contenders",
    "is_user_name",
    "model_expected_forecasts",
    "realize_forecasts",
    "trailing_premium",
]

BUILTIN = ("forward", "no_change", "premium_adjusted", "model_expected")
CONTENDER_OUTCOME_COLUMNS = (
    "curve", "contender", "as_of", "start_months", "tenor_months", "target_date", "observed_on",
    "forecast_rate", "realized_rate", "error_bp",
)
FORECAST_COLUMNS = ("curve", "contender", "as_of", "start_months", "tenor_months", "forecast_rate")
_NEEDED = ("curve", "as_of", "start_months", "tenor_months", "target_date", "observed_on", "forward_rate",
           "realized_rate", "spot_rate")
_USER_NAME = re.compile(r"[a-z][a-z0-9_]*")
_CELL = ["curve", "start_months", "tenor_months"]


def is_user_name(name: str) -> bool:
    """True for a name a user's forecast file may take: ``[a-z][a-z0-9_]*`` and not a built-in."""
    return bool(_USER_NAME.fullmatch(name)) and name not in BUILTIN


def _require(frame: pd.DataFrame, columns: tuple[str, ...], what: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise ValueError(f"{what} is missing column(s) {', '.join(missing)}")


def _cells(frame: pd.DataFrame) -> list[np.ndarray]:
    """Row positions of each (curve, start, tenor) cell."""
    if frame.empty:
        return []
    return [np.asarray(v) for v in frame.groupby(_CELL, sort=True).indices.values()]


def trailing_premium(at: pd.DataFrame, history: pd.DataFrame, window: int, min_history: int,
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Trailing term premium known on each row's as-of date, and how many outcomes it rests on.

    ``at`` has ``curve, as_of, start_months, tenor_months`` (any rows: realised or pending
    forwards); ``history`` the forward outcomes ``curve, as_of, start_months, tenor_months,
    observed_on, error_bp`` (bp). For row i, with ``k`` the number of outcomes of its cell whose
    ``observed_on <= as_of_i``, the premium is the mean ``error_bp`` of the last ``min(k, window)``
    of them (ordered by observed_on, then as_of), in bp; NaN when ``k < min_history``. Returns
    ``(premium_bp, k)`` aligned with ``at``. Vectorised within a cell (a loop over cells only).
    """
    w, m = int(window), int(min_history)
    if w < 1 or m < 1:
        raise ValueError(f"window and min_history must be >= 1, got {window} and {min_history}")
    _require(at, ("curve", "as_of", "start_months", "tenor_months"), "at")
    _require(history, ("curve", "as_of", "start_months", "tenor_months", "observed_on", "error_bp"), "history")
    premium = np.full(len(at), np.nan)
    known = np.zeros(len(at), dtype=np.int64)
    hist_cells = history.groupby(_CELL, sort=False).indices
    h_obs = as_days(history["observed_on"].to_numpy())
    h_asof = as_days(history["as_of"].to_numpy())
    h_err = history["error_bp"].to_numpy(dtype=float)
    a_days = as_days(at["as_of"].to_numpy())
    for key, rows in at.groupby(_CELL, sort=False).indices.items():
        hrows = hist_cells.get(key)
        if hrows is None:
            continue
        order = hrows[np.lexsort((h_asof[hrows], h_obs[hrows]))]
        cs = np.zeros(order.size + 1)
        np.cumsum(h_err[order], out=cs[1:])  # this cell's errors only: another cell never enters the sums
        k = np.searchsorted(h_obs[order], a_days[rows], side="right")
        use = np.minimum(k, w)
        with np.errstate(invalid="ignore", divide="ignore"):
            p = (cs[k] - cs[k - use]) / use
        premium[rows] = np.where(k >= m, p, np.nan)
        known[rows] = k
    return premium, known


def _sorted(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.sort_values(["curve", "contender", "as_of", "start_months", "tenor_months"],
                             kind="stable", ignore_index=True)


def builtin_contenders(outcomes: pd.DataFrame, *, window: int = 250, min_history: int = 60) -> pd.DataFrame:
    """The ``forward``, ``no_change`` and ``premium_adjusted`` rows of ``contender_outcomes``.

    ``outcomes`` is the forward outcome record (the ``outcomes`` view: ``curve, as_of,
    start_months, tenor_months, target_date, observed_on, forward_rate, realized_rate, spot_rate``
    and ``error_bp`` in bp; rates decimal, curve's compounding and day count). ``window`` is
    ``audit.premium_window_days`` (outcomes, not calendar days), ``min_history``
    ``compare.min_history``. Returns :data:`CONTENDER_OUTCOME_COLUMNS`, sorted by the view's key.
    """
    _require(outcomes, _NEEDED + ("error_bp",), "outcomes")
    n = len(outcomes)
    fwd = outcomes["forward_rate"].to_numpy(dtype=float)
    spot = outcomes["spot_rate"].to_numpy(dtype=float)
    premium, _ = trailing_premium(outcomes, outcomes, window, min_history)
    have = np.flatnonzero(np.isfinite(premium))
    # Three blocks of rows over the same outcomes, put in the view's key order by one lexsort (the
    # names' codes are in alphabetical order, as a sort of the strings would put them).
    names = ("forward", "no_change", "premium_adjusted")
    rows = np.concatenate([np.arange(n), np.arange(n), have])
    who = np.repeat(np.arange(3), [n, n, have.size])
    forecast = np.concatenate([fwd, spot, fwd[have] - premium[have] / 1e4])
    curve_code, curve_names = pd.factorize(outcomes["curve"], sort=True)
    as_of = as_days(outcomes["as_of"].to_numpy())
    start = outcomes["start_months"].to_numpy(dtype=np.int64)
    tenor = outcomes["tenor_months"].to_numpy(dtype=np.int64)
    order = np.lexsort((tenor[rows], start[rows], as_of.view(np.int64)[rows], who, curve_code[rows]))
    r, forecast = rows[order], forecast[order]
    realized = outcomes["realized_rate"].to_numpy(dtype=float)[r]
    return pd.DataFrame({
        "curve": pd.array([str(c) for c in curve_names], dtype="str").take(curve_code[r]),
        "contender": pd.array(names, dtype="str").take(who[order]),
        "as_of": as_of[r],
        "start_months": start[r],
        "tenor_months": tenor[r],
        "target_date": as_days(outcomes["target_date"].to_numpy())[r],
        "observed_on": as_days(outcomes["observed_on"].to_numpy())[r],
        "forecast_rate": forecast,
        "realized_rate": realized,
        "error_bp": (forecast - realized) * 1e4,
    })


def attach_outcomes(forecasts: pd.DataFrame, outcomes: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Realise forecasts on the forward grid by the forwards' own outcomes (same key, same target).

    ``forecasts`` has :data:`FORECAST_COLUMNS` (decimal rates in the curve's compounding and day
    count); ``outcomes`` the forward outcome record. Returns ``(realised, unmatched)``: the
    ``contender_outcomes`` rows of the forecasts whose (curve, as_of, start, tenor) forward has been
    realised, and the forecasts that have none (pending, or off the grid: see
    :func:`realize_forecasts`).
    """
    _require(forecasts, FORECAST_COLUMNS, "forecasts")
    _require(outcomes, _NEEDED, "outcomes")
    key = ["curve", "as_of", "start_months", "tenor_months"]
    f = forecasts.assign(as_of=as_days(forecasts["as_of"].to_numpy()))
    o = outcomes[key + ["target_date", "observed_on", "realized_rate"]].assign(
        as_of=as_days(outcomes["as_of"].to_numpy()))
    merged = f.merge(o, on=key, how="left", validate="many_to_one")
    hit = merged["realized_rate"].notna().to_numpy()
    rows = np.flatnonzero(hit)
    real = merged.iloc[rows].reset_index(drop=True)
    out = pd.DataFrame({
        "curve": real["curve"].to_numpy(),
        "contender": real["contender"].astype(object).to_numpy(),
        "as_of": real["as_of"].to_numpy(),
        "start_months": real["start_months"].to_numpy(dtype=np.int64),
        "tenor_months": real["tenor_months"].to_numpy(dtype=np.int64),
        "target_date": as_days(real["target_date"].to_numpy()),
        "observed_on": as_days(real["observed_on"].to_numpy()),
        "forecast_rate": real["forecast_rate"].to_numpy(dtype=float),
        "realized_rate": real["realized_rate"].to_numpy(dtype=float),
    })
    out["error_bp"] = (out["forecast_rate"].to_numpy() - out["realized_rate"].to_numpy()) * 1e4
    return _sorted(out), forecasts.iloc[np.flatnonzero(~hit)].reset_index(drop=True)


def realize_forecasts(forecasts: pd.DataFrame, zeros: pd.DataFrame, observed_days: np.ndarray,
                      calendar: BusinessCalendar, tolerance_days: int) -> pd.DataFrame:
    """Realise one curve's forecasts (any start and tenor) by the forwards' rule.

    The target is ``roll(as_of + start months)`` (modified following on ``calendar``); the realised
    rate is the zero rate for the tenor on the first observed day within ``tolerance_days``
    (:func:`pipeline.realize.realize`, whose ``zeros`` must hold every tenor on every needed day).
    Forecasts not yet realisable are left out (pending, never guessed). Returns
    :data:`CONTENDER_OUTCOME_COLUMNS`.
    """
    _require(forecasts, FORECAST_COLUMNS, "forecasts")
    as_of = as_days(forecasts["as_of"].to_numpy())
    start = forecasts["start_months"].to_numpy(dtype=np.int64)
    fw = pd.DataFrame({
        "curve": forecasts["curve"].to_numpy(),
        "as_of": as_of,
        "start_months": start,
        "tenor_months": forecasts["tenor_months"].to_numpy(dtype=np.int64),
        "start_date": calendar.roll(add_months(as_of, start)),
        "forward_rate": forecasts["forecast_rate"].to_numpy(dtype=float),
        "_row": np.arange(len(forecasts)),
    })
    done = realize(fw, zeros, observed_days, calendar, tolerance_days)
    # realize keeps the order of its input rows and leaves out the pending ones
    kept = np.flatnonzero(np.isin(np.arange(len(forecasts)), _realised_rows(fw, done)))
    src = done.assign(contender=forecasts["contender"].to_numpy()[kept])
    out = pd.DataFrame({c: src[c].to_numpy() for c in ("curve", "contender", "as_of", "start_months",
                                                        "tenor_months", "target_date", "observed_on")})
    out["forecast_rate"] = src["forward_rate"].to_numpy(dtype=float)
    out["realized_rate"] = src["realized_rate"].to_numpy(dtype=float)
    out["error_bp"] = (out["forecast_rate"].to_numpy() - out["realized_rate"].to_numpy()) * 1e4
    return _sorted(out)


def _realised_rows(fw: pd.DataFrame, done: pd.DataFrame) -> np.ndarray:
    key = ["curve", "as_of", "start_months", "tenor_months"]
    m = fw[key + ["_row"]].merge(done[key].assign(_hit=True), on=key, how="inner")
    return m["_row"].to_numpy()


def model_expected_forecasts(keys: pd.DataFrame, risk_neutral: pd.DataFrame, *, compounding: str, day_count: str,
                             calendar: BusinessCalendar) -> pd.DataFrame:
    """The ``model_expected`` forecasts of one curve's forward cells: the model's risk-neutral forward.

    ``keys`` has ``curve, as_of, start_months, tenor_months`` (the cells to forecast: S, M in
    months); ``risk_neutral`` the model's daily real-time ``curve, as_of, maturity_months,
    risk_neutral_yield`` (continuous decimals a year at exact n/12-year times on the curve's day
    count; rows of the ``model_term_premium`` view with ``fit = 'realtime'``). Prices of risk set
    to zero, the model's yield of maturity n is the average expected short rate to n (plus a
    convexity term), so the continuous forward from S to S+M months,
    ``(rn(S+M) (S+M) - rn(S) S) / M`` (``rn(0) = 0``), is the model's expected M-month rate S months
    ahead. It is converted to the curve's ``compounding`` over ``tau = year_fraction(start_date,
    end_date, day_count)`` of the forward's own dates (``maturity_dates`` of S and S+M months on
    ``calendar``), as the forwards are. A key is left out when its as-of day has no model row or
    S+M exceeds the model's longest maturity. Returns :data:`FORECAST_COLUMNS`, vectorised (a loop
    over the distinct month offsets only).
    """
    _require(keys, ("curve", "as_of", "start_months", "tenor_months"), "keys")
    _require(risk_neutral, ("as_of", "maturity_months", "risk_neutral_yield"), "risk_neutral")
    empty = pd.DataFrame({c: [] for c in FORECAST_COLUMNS})
    if keys.empty or risk_neutral.empty:
        return empty
    r_days = as_days(risk_neutral["as_of"].to_numpy())
    days = np.unique(r_days)
    mat = risk_neutral["maturity_months"].to_numpy(dtype=np.int64)
    top = int(mat.max())
    rn = np.full((days.size, top + 1), np.nan)
    rn[:, 0] = 0.0  # rn(0) * 0 = 0: a forward starting today is the model's spot yield
    rn[np.searchsorted(days, r_days), mat] = risk_neutral["risk_neutral_yield"].to_numpy(dtype=float)
    as_of = as_days(keys["as_of"].to_numpy())
    s = keys["start_months"].to_numpy(dtype=np.int64)
    m = keys["tenor_months"].to_numpy(dtype=np.int64)
    row = np.clip(np.searchsorted(days, as_of), 0, days.size - 1)
    ok = (days[row] == as_of) & (s >= 0) & (m > 0) & (s + m <= top)
    row, s, m, as_of = row[ok], s[ok], m[ok], as_of[ok]
    with np.errstate(invalid="ignore"):
        f_cc = (rn[row, s + m] * (s + m) - rn[row, s] * s) / m
    tau = np.empty(row.size)
    for a, b in np.unique(np.stack([s, s + m], axis=1), axis=0):  # one pass per distinct (S, S+M)
        sel = (s == a) & (s + m == b)
        d0 = maturity_dates(as_of[sel], Tenor(int(a), "M"), calendar)
        d1 = maturity_dates(as_of[sel], Tenor(int(b), "M"), calendar)
        tau[sel] = year_fraction(d0, d1, day_count)
    rate = from_continuous(f_cc, compounding, tau)
    keep = np.isfinite(rate)
    src = keys.iloc[np.flatnonzero(ok)[keep]]
    out = pd.DataFrame({
        "curve": src["curve"].to_numpy(),
        "contender": np.full(int(keep.sum()), "model_expected", dtype=object),
        "as_of": as_of[keep],
        "start_months": s[keep],
        "tenor_months": m[keep],
        "forecast_rate": rate[keep],
    })
    return out.sort_values(["curve", "as_of", "start_months", "tenor_months"], kind="stable", ignore_index=True)
