"""The forecast audit: how well each forward forecast the rate realised on its target date.

Input is the outcome record of :func:`pipeline.realize.realize` (plus ``curve`` and ``inverted``);
output is one row of statistics per curve x start x tenor x regime (:func:`summarize`), a
trailing-window term premium with a HAC band (:func:`term_premium`) and a plain-language line per
horizon (:func:`verdict`). Errors are in basis points, rates in decimals.

Choices made here (the contract leaves them open):

* **Overlap.** Forecasts made on consecutive days of the same horizon share most of their future,
  so their errors are serially correlated (MA(h-1) under the null). ``h`` is
  :func:`overlap_horizon`; every HAC figure uses Newey-West (Bartlett) with ``max(h-1, 0)`` lags.
* **Too few outcomes.** A (curve, start, tenor, regime) with no outcome gets no row. With ``n >= 1``
  the row carries n, dates, mean, median, RMSE, MAE, the no-change RMSE and ratio and the hit rate
  (``std_error_bp`` needs n >= 2). The HAC figures (``hac_t, hac_se_bp, dm_*, mz_*, fb_*``) need
  ``n >= MIN_OBS`` (8) and ``h < n`` (the sample must hold more than one forecast period; the
  Harvey-Leybourne-Newbold factor is undefined otherwise); they are NaN otherwise. With
  ``n < 2h`` they rest on fewer than two independent periods: read them with care.
* **Diebold-Mariano** uses the Harvey, Leybourne & Newbold (1997) small-sample form: the DM
  statistic times ``sqrt((n + 1 - 2h + h(h-1)/n)/n)``, two-sided p-value from Student's t with
  ``n - 1`` degrees of freedom. Negative ``dm_stat``: the forwards had the smaller squared error.
  With forwards identical to the spot (start 0) the loss differential is zero and DM is NaN.
* **Overlap-honest inference** (:func:`overlap_inference`). ``n_effective = n / h`` is the number of
  non-overlapping forecast periods the sample holds; ``indicative`` is ``n_effective < 10``. The
  Bartlett HAC t with ``h - 1`` lags over-rejects at heavy overlap, so beside the plain figures
  (``dm_pvalue``, and ``hac_t`` read against the normal) there are fixed-b p-values from the
  overlap-aware null of :mod:`pipeline.audit.fixed_b`: ``hac_pvalue`` of ``hac_t``, and
  ``dm_pvalue_fixed_b`` of the DM statistic *before* the HLN factor (``dm_stat / hln_factor(n, h)``:
  the null is that of the Bartlett t itself, and the factor is a small-sample correction of the
  normal reference that the fixed-b null already makes). The verdict judges significance by these.
* **Mincer-Zarnowitz** ``realized = a + b * forward`` (decimals; ``mz_alpha`` is a decimal rate),
  ``mz_pvalue`` is the chi-square(2) Wald test of ``a = 0, b = 1`` with the HAC covariance.
  **Fama-Bliss** ``realized - spot = a + b * (forward - spot)``; ``fb_beta_se`` is HAC, ``fb_r2`` the
  centred R^2. Both NaN when the regressor does not vary (below 1e-12, i.e. rounding noise).
* **Hit rate** is the share of outcomes with ``sign(forward - spot) == sign(realized - spot)`` among
  those where the forward predicted a move (``|forward - spot| > 1e-12``); a realised change within
  1e-12 of zero counts as a miss. NaN when no outcome predicted a move.
* **Regimes.** ``inverted`` is the curve's state at the as-of date; ``normal`` is its complement
  (missing values count in ``all`` only). A missing ``inverted`` column means never inverted.
* **Date window.** ``first`` / ``last`` select outcomes by ``as_of`` (forecasts made in the window).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from pipeline.audit.fixed_b import critical_value, pvalue_two_sided
from pipeline.audit.hac import diebold_mariano, hac_mean, hac_ols, hln_factor, rolling_mean_hac_se, wald_pvalue
from pipeline.dates import as_days

__all__ = [
    "INDICATIVE_BELOW",
    "MIN_OBS",
    "OVERLAP_COLUMNS",
    "SUMMARY_COLUMNS",
    "TERM_PREMIUM_COLUMNS",
    "interval_half_width",
    "overlap_horizon",
    "overlap_inference",
    "premium_band_critical",
    "summarize",
    "term_premium",
    "verdict",
]

MIN_OBS = 8
TIE = 1e-12  # decimals: a forward-spot or realised-spot difference below this is rounding noise
INDICATIVE_BELOW = 10.0  # non-overlapping forecast periods: with fewer, a cell's figures are indicative only

# appended after the contract's columns (sql/014 adds them to the stored result)
OVERLAP_COLUMNS = ("n_effective", "hac_pvalue", "dm_pvalue_fixed_b", "indicative")

SUMMARY_COLUMNS = (
    "curve", "start_months", "tenor_months", "regime", "n", "first_as_of", "last_as_of",
    "mean_error_bp", "median_error_bp", "std_error_bp", "rmse_bp", "mae_bp", "hac_t", "hac_se_bp",
    "lags", "rw_rmse_bp", "rmse_ratio", "dm_stat", "dm_pvalue", "mz_alpha", "mz_beta", "mz_pvalue",
    "fb_beta", "fb_beta_se", "fb_r2", "hit_rate", *OVERLAP_COLUMNS,
)
TERM_PREMIUM_COLUMNS = (
    "curve", "as_of", "start_months", "tenor_months", "window_days", "premium_bp", "lower_bp", "upper_bp",
)
_OUTCOME_COLUMNS = (
    "curve", "as_of", "start_months", "tenor_months", "target_date", "forward_rate", "realized_rate",
    "spot_rate", "error_bp", "rw_error_bp",
)
_VALUE_COLUMNS = ("forward_rate", "realized_rate", "spot_rate", "error_bp", "rw_error_bp")
_NAN = float("nan")


def overlap_horizon(as_of: np.ndarray, target_date: np.ndarray) -> int:
    """Median number of observations from an as-of date to its target date, at least 1.

    For each outcome, the count of the series' as-of dates in ``(as_of, target_date]``: how many
    later forecasts of the series were made before this one was settled. Targets beyond the last
    as-of date of the series are counted on at the series' average spacing, so a sample that
    ends before its forecasts settle (the last ``h`` outcomes of any record) is not taken for
    a shorter horizon. ``as_of`` and ``target_date`` are equal-length date arrays.
    """
    a, t = as_days(np.asarray(as_of)), as_days(np.asarray(target_date))
    if a.size and (a[1:] >= a[:-1]).all():  # already sorted (as summarize passes it): skip the sort
        dates = a[np.concatenate([[True], a[1:] != a[:-1]])]
    else:
        dates = np.unique(a)
    if dates.size == 0:
        return 1
    count = (np.searchsorted(dates, t, side="right") - np.searchsorted(dates, a, side="right")).astype(float)
    if dates.size > 1:
        spacing = (dates[-1] - dates[0]).astype(np.int64) / (dates.size - 1)
        beyond = np.maximum((t - dates[-1]).astype(np.int64), 0)
        count += beyond / spacing
    return max(int(np.floor(np.median(count) + 0.5)), 1)


def overlap_inference(n: int, h: int, hac_t: float, dm_stat: float) -> dict[str, Any]:
    """The overlap-honest figures of a cell of ``n`` outcomes with overlap horizon ``h``.

    ``n_effective = n / h`` (non-overlapping forecast periods), ``hac_pvalue`` the two-sided fixed-b
    p-value of ``hac_t`` and ``dm_pvalue_fixed_b`` that of the Diebold-Mariano statistic with its
    HLN factor taken out again (``dm_stat / hln_factor(n, h)``, the Bartlett HAC t of the loss
    differential), both from :func:`pipeline.audit.fixed_b.pvalue_two_sided` (NaN where the
    statistic is NaN or the overlap is beyond its table, ``h / n > 0.9``); ``indicative`` is
    ``n_effective < INDICATIVE_BELOW``.
    """
    n, h = int(n), max(int(h), 1)
    n_eff = n / h
    hac_p = pvalue_two_sided(float(hac_t), n, h) if _finite(hac_t) else _NAN
    dm_p = _NAN
    if _finite(dm_stat):
        k = hln_factor(n, h)
        if np.isfinite(k) and k > 0:
            dm_p = pvalue_two_sided(float(dm_stat) / k, n, h)
    return {"n_effective": float(n_eff), "hac_pvalue": float(hac_p), "dm_pvalue_fixed_b": float(dm_p),
            "indicative": bool(n_eff < INDICATIVE_BELOW)}


def _sign(x: np.ndarray) -> np.ndarray:
    return np.where(x > TIE, 1, np.where(x < -TIE, -1, 0))


def _stats(as_of, target, fwd, real, spot, err, rw) -> dict[str, Any]:
    """Statistics of one (curve, start, tenor, regime) cell; arrays ordered by as-of date."""
    n = err.size
    h = overlap_horizon(as_of, target)
    lags = max(h - 1, 0)
    rmse = float(np.sqrt(np.mean(err * err)))
    rw_rmse = float(np.sqrt(np.mean(rw * rw)))
    predicted = _sign(fwd - spot)
    moved = predicted != 0
    out: dict[str, Any] = {
        "n": n,
        "first_as_of": as_of[0],
        "last_as_of": as_of[-1],
        "mean_error_bp": float(err.mean()),
        "median_error_bp": float(np.median(err)),
        "std_error_bp": float(err.std(ddof=1)) if n >= 2 else _NAN,
        "rmse_bp": rmse,
        "mae_bp": float(np.mean(np.abs(err))),
        "hac_t": _NAN,
        "hac_se_bp": _NAN,
        "lags": lags,
        "rw_rmse_bp": rw_rmse,
        "rmse_ratio": rmse / rw_rmse if rw_rmse > 0 else _NAN,
        "dm_stat": _NAN,
        "dm_pvalue": _NAN,
        "mz_alpha": _NAN,
        "mz_beta": _NAN,
        "mz_pvalue": _NAN,
        "fb_beta": _NAN,
        "fb_beta_se": _NAN,
        "fb_r2": _NAN,
        "hit_rate": float(np.mean(predicted[moved] == _sign(real - spot)[moved])) if moved.any() else _NAN,
    }
    if n < MIN_OBS or h >= n or np.ptp(err) <= TIE * 1e4:
        # too few outcomes, or errors without variation (start 0: the forward is the spot itself)
        out.update(overlap_inference(n, h, _NAN, _NAN))
        return out
    mean, se = hac_mean(err, lags)
    out["hac_se_bp"] = se
    out["hac_t"] = mean / se if se > 0 else _NAN
    if np.abs(fwd - spot).max() > TIE:  # identical forecasts leave nothing to test
        out["dm_stat"], out["dm_pvalue"] = diebold_mariano(err, rw, h, lags)
    ones = np.ones(n)
    if np.ptp(fwd) > TIE:
        params, cov, _ = hac_ols(real, np.column_stack([ones, fwd]), lags)
        out["mz_alpha"], out["mz_beta"] = float(params[0]), float(params[1])
        out["mz_pvalue"] = wald_pvalue(params, cov, np.array([0.0, 1.0]))[1]
    spread = fwd - spot
    if np.ptp(spread) > TIE:
        params, cov, r2 = hac_ols(real - spot, np.column_stack([ones, spread]), lags)
        out["fb_beta"], out["fb_beta_se"], out["fb_r2"] = float(params[1]), float(np.sqrt(cov[1, 1])), r2
    out.update(overlap_inference(n, h, out["hac_t"], out["dm_stat"]))
    return out


def _ordered_groups(frame: pd.DataFrame) -> tuple[dict[str, np.ndarray], np.ndarray, np.ndarray]:
    """Columns as arrays sorted by (curve, start, tenor, as_of), and each group's [start, stop)."""
    curve_codes, curve_names = pd.factorize(frame["curve"], sort=True)
    start = frame["start_months"].to_numpy(dtype=np.int64)
    tenor = frame["tenor_months"].to_numpy(dtype=np.int64)
    as_of = as_days(frame["as_of"].to_numpy())
    order = np.lexsort((as_of, tenor, start, curve_codes))
    cols = {
        "curve_code": curve_codes[order],
        "start_months": start[order],
        "tenor_months": tenor[order],
        "as_of": as_of[order],
    }
    cols["curve"] = np.asarray(curve_names, dtype=object)[cols["curve_code"]]
    n = order.size
    if n == 0:
        return cols, np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    change = np.flatnonzero(
        (np.diff(cols["curve_code"]) != 0) | (np.diff(cols["start_months"]) != 0)
        | (np.diff(cols["tenor_months"]) != 0)
    ) + 1
    bounds_lo = np.concatenate([[0], change])
    bounds_hi = np.concatenate([change, [n]])
    cols["_order"] = order
    return cols, bounds_lo, bounds_hi


def summarize(outcomes: pd.DataFrame, *, first: object = None, last: object = None) -> pd.DataFrame:
    """Forecast-error statistics per (curve, start_months, tenor_months, regime).

    ``outcomes`` has columns ``curve, as_of, start_months, tenor_months, target_date,
    forward_rate, realized_rate, spot_rate, error_bp, rw_error_bp`` and optionally ``inverted``
    (bool), one row per forward (as-of date) of each horizon. ``first`` / ``last`` (inclusive,
    optional) restrict the as-of dates. Returns the columns :data:`SUMMARY_COLUMNS`, regimes in the
    order all, inverted, normal; see the module notes for definitions and the small-sample rules.
    Errors and standard errors in bp; ``mz_alpha`` in decimals; ``lags`` the Newey-West lag.
    """
    missing = [c for c in _OUTCOME_COLUMNS if c not in outcomes.columns]
    if missing:
        raise ValueError(f"outcomes is missing column(s) {', '.join(missing)}")
    frame = outcomes
    if first is not None or last is not None:
        days = as_days(outcomes["as_of"].to_numpy())
        keep = np.ones(days.size, dtype=bool)
        if first is not None:
            keep &= days >= as_days(first)
        if last is not None:
            keep &= days <= as_days(last)
        frame = outcomes.loc[keep]
    cols, lo, hi = _ordered_groups(frame)
    if lo.size == 0:
        return pd.DataFrame({c: [] for c in SUMMARY_COLUMNS})
    order = cols["_order"]
    target = as_days(frame["target_date"].to_numpy())[order]
    values = {c: frame[c].to_numpy(dtype=float)[order] for c in _VALUE_COLUMNS}
    if "inverted" in frame.columns:
        inv = frame["inverted"].astype("boolean")  # nullable: a missing state is in neither regime
        is_inv = inv.fillna(False).to_numpy(dtype=bool)[order]
        is_norm = (~inv).fillna(False).to_numpy(dtype=bool)[order]
    else:
        is_inv = np.zeros(order.size, dtype=bool)
        is_norm = np.ones(order.size, dtype=bool)

    rows = []
    for g0, g1 in zip(lo, hi, strict=True):
        span = np.arange(g0, g1)
        for regime, idx in (("all", span), ("inverted", span[is_inv[g0:g1]]),
                            ("normal", span[is_norm[g0:g1]])):
            if idx.size == 0:
                continue
            row = {
                "curve": cols["curve"][g0],
                "start_months": int(cols["start_months"][g0]),
                "tenor_months": int(cols["tenor_months"][g0]),
                "regime": regime,
            }
            row.update(_stats(cols["as_of"][idx], target[idx], *(values[c][idx] for c in _VALUE_COLUMNS)))
            rows.append(row)
    out = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    out["n"] = out["n"].astype(np.int64)
    out["lags"] = out["lags"].astype(np.int64)
    out["indicative"] = out["indicative"].astype(bool)
    return out


def interval_half_width(se: np.ndarray, n: np.ndarray, lags: np.ndarray) -> np.ndarray:
    """Half-widths of 95 % intervals ``mean -/+ c * se`` of ``audit_summary`` rows: ``c`` the
    fixed-b 5 % critical value of ``n`` outcomes with overlap ``h = lags + 1`` (the row's own
    Newey-West lags), 1.96 without overlap; NaN where it is undefined (``h`` above 0.9 n) or ``se``
    is. Arrays of one shape (rows), bp in, bp out."""
    se, n, lags = (np.asarray(a) for a in (se, n, lags))
    out = np.full(se.shape, np.nan)
    for key in {(int(a), int(b)) for a, b in zip(n.ravel(), lags.ravel(), strict=True)
                if np.isfinite(a) and np.isfinite(b)}:  # a handful of distinct (n, lags) pairs
        at = (n == key[0]) & (lags == key[1])
        out[at] = critical_value(key[0], key[1] + 1) * se[at].astype(float)
    return out


def premium_band_critical(window_days: int, h: int) -> float:
    """The 5 % two-sided critical value of a term-premium window (``window_days`` outcomes whose
    overlap is ``h``): fixed-b (:func:`pipeline.audit.fixed_b.critical_value`); NaN where ``h`` is
    above 0.9 of the window. At ``h = 1`` it is the normal's 1.96."""
    return critical_value(int(window_days), max(int(h), 1))


def term_premium(outcomes: pd.DataFrame, window_days: int) -> pd.DataFrame:
    """Trailing-window ex-post term premium with a HAC 95 % band, per (curve, start, tenor).

    For each as-of date with at least ``window_days`` outcomes of its horizon up to and including
    it, ``premium_bp`` is the mean ``error_bp`` of the last ``window_days`` outcomes (by as-of
    date) and ``lower_bp`` / ``upper_bp`` are ``premium_bp -/+ c * se``, where ``se`` is the
    Newey-West (Bartlett) standard error of that window's mean with ``max(h-1, 0)`` lags, ``h`` the
    :func:`overlap_horizon` of the horizon's whole record, capped at ``window_days - 1``, and ``c``
    the overlap-aware fixed-b 5 % critical value of a window of ``window_days`` outcomes with
    overlap ``h`` (:func:`pipeline.audit.fixed_b.critical_value`; 1.96 without overlap, wider as
    ``h / window_days`` grows). Where a window holds too little for one (``h`` above 0.9 of the
    window: about one forecast period or less) the band is NaN: no honest 95 % band exists there.
    ``window_days`` counts outcomes (observation days), not calendar days. Computed from cumulative
    sums (no loop over dates). Columns :data:`TERM_PREMIUM_COLUMNS`.
    """
    w = int(window_days)
    if w < 1:
        raise ValueError(f"window_days must be >= 1, got {window_days}")
    missing = [c for c in ("curve", "as_of", "start_months", "tenor_months", "target_date", "error_bp")
               if c not in outcomes.columns]
    if missing:
        raise ValueError(f"outcomes is missing column(s) {', '.join(missing)}")
    cols, lo, hi = _ordered_groups(outcomes)
    if lo.size == 0:
        return pd.DataFrame({c: [] for c in TERM_PREMIUM_COLUMNS})
    order = cols["_order"]
    target = as_days(outcomes["target_date"].to_numpy())[order]
    err = outcomes["error_bp"].to_numpy(dtype=float)[order]
    pieces: dict[str, list[np.ndarray]] = {c: [] for c in ("idx", "mean", "half")}
    for g0, g1 in zip(lo, hi, strict=True):
        if g1 - g0 < w:
            continue
        h = overlap_horizon(cols["as_of"][g0:g1], target[g0:g1])
        mean, se = rolling_mean_hac_se(err[g0:g1], w, min(max(h - 1, 0), w - 1))
        pieces["idx"].append(np.arange(g0 + w - 1, g1))
        pieces["mean"].append(mean)
        pieces["half"].append(premium_band_critical(w, h) * se)
    if not pieces["idx"]:
        return pd.DataFrame({c: [] for c in TERM_PREMIUM_COLUMNS})
    idx = np.concatenate(pieces["idx"])
    mean = np.concatenate(pieces["mean"])
    half = np.concatenate(pieces["half"])
    return pd.DataFrame({
        "curve": cols["curve"][idx],
        "as_of": cols["as_of"][idx],
        "start_months": cols["start_months"][idx],
        "tenor_months": cols["tenor_months"][idx],
        "window_days": np.full(idx.size, w, dtype=np.int64),
        "premium_bp": mean,
        "lower_bp": mean - half,
        "upper_bp": mean + half,
    })


def _label(months: int) -> str:
    months = int(months)
    if months > 0 and months % 12 == 0:
        return f"{months // 12}Y"
    return f"{months}M"


def _finite(x: object) -> bool:
    try:
        return bool(np.isfinite(float(x)))  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return False


def _p_text(p: float) -> str:
    # beyond p = 0.001 the fixed-b tail is an extrapolation of its table: no more digits are shown
    if p < 0.001:
        return "< 0.001"
    return f"= {p:.2g}" if p < 0.05 else f"= {p:.2f}"


def _sample_text(row: Mapping[str, Any], n: int) -> tuple[str, bool]:
    """(``n = 489, about 2 independent periods`` (``no overlap`` when h = 1), whether the row is
    indicative only: fewer than :data:`INDICATIVE_BELOW` periods); ``n = 489`` alone and False for
    a row without ``n_effective``."""
    n_eff = row.get("n_effective", _NAN)
    text = f"n = {n:,}"
    if not _finite(n_eff):
        return text, False
    k = float(n_eff)
    indicative = row.get("indicative")
    if indicative is None or pd.isna(indicative):
        indicative = k < INDICATIVE_BELOW
    r = int(np.floor(k + 0.5))
    if k >= n:
        text += ", no overlap"
    elif k < 0.5:
        text += ", less than one independent period"
    elif indicative and r >= INDICATIVE_BELOW:  # 9.6 rounds to 10: do not print "about 10" beside the flag
        text += f", fewer than {INDICATIVE_BELOW:g} independent periods"
    else:
        text += f", about {r:,} independent period" + ("s" if r != 1 else "")
    return text, bool(indicative)


def verdict(row: Mapping[str, Any] | pd.Series) -> str:
    """One plain-language line for a row of :func:`summarize`: a statistical finding, not advice.

    Example: ``"forwards over-predicted the realised 1Y rate 2Y ahead by 85.0 bp on average
    (HAC t = 3.1, fixed-b p = 0.004, n = 4,800, about 19 independent periods); no better than
    no-change (DM fixed-b p = 0.31, RMSE ratio 0.98)"``. Significance is judged at 5 % by the
    fixed-b p-values (``hac_pvalue``, ``dm_pvalue_fixed_b``), not the normal ones; with fewer than
    :data:`INDICATIVE_BELOW` independent periods the line says "indicative only".
    """
    start, tenor = int(row["start_months"]), int(row["tenor_months"])
    what = f"the realised {_label(tenor)} rate " + (f"{_label(start)} ahead" if start else "at the as-of date")
    mean = float(row["mean_error_bp"])
    n = int(row["n"])
    sample, indicative = _sample_text(row, n)
    direction = "over-predicted" if mean > 0 else "under-predicted" if mean < 0 else "matched"
    bias = f"forwards {direction} {what}" + (f" by {abs(mean):.1f} bp on average" if mean else " on average")
    t, std, hp = row["hac_t"], row["std_error_bp"], row.get("hac_pvalue", _NAN)
    notes = []
    if _finite(t) and _finite(hp):
        figures = f"HAC t = {float(t):.1f}, fixed-b p {_p_text(float(hp))}, {sample}"
        if float(hp) >= 0.05:
            notes.append("not significant at 5 %")
    elif _finite(t):
        figures = f"HAC t = {float(t):.1f}, {sample}"
        notes.append("too few independent periods for a test")
    elif _finite(std) and float(std) <= TIE * 1e4:
        figures = f"{sample}, every error the same"
    else:
        figures = f"{sample}, too few outcomes for a HAC test"
    if indicative:
        notes.append("indicative only")
    bias += f" ({'; '.join([figures, *notes])})"
    regime = str(row.get("regime", "all"))
    if regime != "all":
        bias = f"{regime} curves: {bias}"
    p, dm, ratio = row.get("dm_pvalue_fixed_b", _NAN), row["dm_stat"], row["rmse_ratio"]
    rtxt = f", RMSE ratio {float(ratio):.2f}" if _finite(ratio) else ""
    if _finite(p) and _finite(dm):
        ptxt = f"DM fixed-b p {_p_text(float(p))}{rtxt}"
        if float(p) < 0.05 and float(dm) < 0:
            comp = f"more accurate than no-change ({ptxt})"
        elif float(p) < 0.05:
            comp = f"less accurate than no-change ({ptxt})"
        else:
            comp = f"no better than no-change ({ptxt})"
    elif _finite(dm):
        comp = f"too few independent periods to compare with no-change{rtxt}"
    elif start == 0:
        comp = "the forward is the no-change forecast at this horizon"
    else:
        comp = f"too few outcomes to compare with no-change{rtxt}"
    return f"{bias}; {comp}"
