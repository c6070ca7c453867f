"""Classic tests of the expectations hypothesis on the month-end panel, with verdict lines.

All regressions are OLS with Newey-West (Bartlett) standard errors, computed by
:func:`pipeline.audit.hac.hac_ols` (statsmodels' ``cov_type="HAC"`` without small-sample factor).
Rates are decimals, continuously compounded; ``n`` is in months. Only month ends that are calendar
neighbours (or exactly ``h`` months apart) are paired; a skipped month drops the pairs across it.

``campbell_shiller`` (Campbell & Shiller 1991), one row per maturity ``n``::

    y(n-1)_{t+1} - y(n)_t = a + b_n (y(n)_t - y(1)_t) / (n - 1) + e

The expectations hypothesis says ``b_n = 1``. Monthly steps; ``cs_lags`` (default 12) Newey-West
lags: the dependent change does not overlap, the lags only guard against serial correlation (a
year of monthly data is common practice, no single source).

``fama_bliss`` (Fama & Bliss 1987), one row per ``n`` (a multiple of 12)::

    rx(n, 12)_{t+12} = a + b_n (f(n)_t - y(12)_t) + e,   f(n) = [n y(n) - (n-12) y(n-12)] / 12

With a constant term premium the hypothesis says ``b_n = 0`` (the forward-spot spread does not
predict excess returns). Overlapping annual returns on monthly data: ``annual_lags`` (default 18)
lags, as Cochrane & Piazzesi (2005) use for the same regressions.

``cochrane_piazzesi`` (Cochrane & Piazzesi 2005): the average ``rxbar`` of ``rx(n, 12)`` over
``n = 24, 36, 48, 60`` on ``(1, y(12), f(24), ..., f(60))`` gives ``gamma``; the single factor is
``gamma' f_t``; each maturity's loading ``b_n`` comes from ``rx(n, 12)_{t+12} = b_n (gamma' f_t) + e``
(no constant: it is inside ``gamma' f``). ``eh_regressions`` carries the ``b_n`` rows (its key has
one row per maturity); the ``gamma`` vector and its joint test are :func:`cochrane_piazzesi_factor`.
A panel shorter than 60 months uses the multiples of 12 it has (from 24). The ``b_n`` standard
errors treat ``gamma`` as known, as the paper's second stage does.

Columns of a row: ``coef`` (the slope ``b_n``), ``se`` (its HAC standard error), ``hac_t``
(``coef / se``: the test of zero; the Campbell-Shiller verdict tests ``b_n = 1`` with ``(coef-1)/se``),
``r2`` (centred), ``n`` (observations), ``lags``, ``first_as_of`` / ``last_as_of`` (the first and
last month ends ``t`` whose curve is the regressor; the dependent is realised 1 or 12 months later).
A regression with fewer than :data:`MIN_OBS` observations, or a regressor that does not vary, has no
row.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from scipy import stats

from pipeline.audit.hac import hac_ols, wald_pvalue
from pipeline.term_structure.panel import TermPanel
from pipeline.term_structure.returns import annual_forwards, excess_return_grid

__all__ = [
    "CP_FACTOR_COLUMNS",
    "EH_COLUMNS",
    "EH_TESTS",
    "MIN_OBS",
    "cochrane_piazzesi_factor",
    "eh_regressions",
    "eh_verdicts",
]

EH_COLUMNS = ("curve", "test", "maturity_months", "coef", "se", "hac_t", "r2", "n", "lags", "first_as_of",
              "last_as_of")
CP_FACTOR_COLUMNS = ("curve", "term", "coef", "se", "hac_t", "r2", "n", "lags", "wald_stat", "wald_pvalue",
                     "first_as_of", "last_as_of")
EH_TESTS = ("campbell_shiller", "fama_bliss", "cochrane_piazzesi")
CS_MATURITIES = (3, 6, 12, 24, 36, 48, 60, 84, 120)
CS_LAGS = 12
ANNUAL_LAGS = 18
CP_MATURITIES = (24, 36, 48, 60)
MIN_OBS = 24
Z95 = float(stats.norm.ppf(0.975))
_FLAT = 1e-12  # a regressor whose spread is below this (decimals) does not vary


def _row(curve: str, test: str, n: int, y: np.ndarray, x: np.ndarray, dates: np.ndarray, lags: int,
         const: bool = True) -> dict | None:
    keep = np.isfinite(y) & np.all(np.isfinite(x.reshape(len(y), -1)), axis=1)
    if keep.sum() < MIN_OBS:
        return None
    xs = x.reshape(len(y), -1)[keep]
    if np.ptp(xs[:, -1]) < _FLAT:
        return None
    design = np.column_stack([np.ones(xs.shape[0]), xs]) if const else xs
    params, cov, r2 = hac_ols(y[keep], design, lags)
    se = float(np.sqrt(cov[-1, -1]))
    d = dates[keep]
    return {"curve": curve, "test": test, "maturity_months": int(n), "coef": float(params[-1]), "se": se,
            "hac_t": float(params[-1]) / se if se > 0 else float("nan"), "r2": r2, "n": int(keep.sum()),
            "lags": int(lags), "first_as_of": d.min(), "last_as_of": d.max()}


def _cp_maturities(n_max: int) -> tuple[int, ...]:
    return tuple(n for n in CP_MATURITIES if n <= n_max)


def _cp_design(y: np.ndarray, n_max: int) -> tuple[np.ndarray, np.ndarray, tuple[int, ...]]:
    """``(rx (M-12, k), f (M-12, k+1), maturities)``: annual excess returns of the CP maturities
    realised 12 months after each grid month, and ``(y(12), f(24), ...)`` at that month."""
    mats = _cp_maturities(n_max)
    rx_all = excess_return_grid(y, 12)  # columns n = 13..N
    rx = rx_all[:, [n - 13 for n in mats]]
    f = annual_forwards(y[:-12], (12,) + mats)
    return rx, f, mats


def eh_regressions(
    panel: TermPanel,
    *,
    cs_maturities: Sequence[int] = CS_MATURITIES,
    fb_maturities: Sequence[int] | None = None,
    cs_lags: int = CS_LAGS,
    annual_lags: int = ANNUAL_LAGS,
) -> pd.DataFrame:
    """The ``eh_regressions`` view of one curve (see the module notes for each test).

    ``cs_maturities``: Campbell-Shiller maturities (months, ``2 .. N``; others are dropped).
    ``fb_maturities``: Fama-Bliss maturities, multiples of 12 from 24 (default: all up to ``N``).
    Rows are ordered by test, then maturity.
    """
    curve = panel.curve
    n_max = panel.max_months
    _, dates, y = panel.grid()
    rows: list[dict | None] = []
    if y.shape[0] > 1:
        for n in sorted({int(n) for n in cs_maturities if 2 <= n <= n_max}):
            dep = y[1:, n - 2] - y[:-1, n - 1]
            x = (y[:-1, n - 1] - y[:-1, 0]) / (n - 1)
            rows.append(_row(curve, "campbell_shiller", n, dep, x, dates[:-1], cs_lags))
    if y.shape[0] > 12 and n_max >= 24:
        fb = range(24, n_max + 1, 12) if fb_maturities is None else fb_maturities
        rx12 = excess_return_grid(y, 12)
        for n in sorted({int(n) for n in fb if n >= 24 and n % 12 == 0 and n <= n_max}):
            spread = annual_forwards(y[:-12], (n,))[:, 0] - y[:-12, 11]
            rows.append(_row(curve, "fama_bliss", n, rx12[:, n - 13], spread, dates[:-12], annual_lags))
        rx, f, mats = _cp_design(y, n_max)
        factor = _cp_gamma(rx, f, annual_lags)
        if factor is not None:
            gamma, _, _, _ = factor
            cp = f @ gamma[1:] + gamma[0]
            for j, n in enumerate(mats):
                rows.append(_row(curve, "cochrane_piazzesi", n, rx[:, j], cp, dates[:-12], annual_lags,
                                 const=False))
    out = pd.DataFrame([r for r in rows if r is not None], columns=list(EH_COLUMNS))
    out["curve"] = out["curve"].astype("str")
    out["test"] = out["test"].astype("str")
    for c in ("maturity_months", "n", "lags"):
        out[c] = out[c].astype(np.int64)
    for c in ("first_as_of", "last_as_of"):
        out[c] = out[c].astype("datetime64[s]")
    return out


def _cp_gamma(rx: np.ndarray, f: np.ndarray, lags: int):
    """``(gamma (k+2,), cov, r2, keep)`` of ``rxbar`` on ``(1, f)``, or ``None`` with too few rows."""
    rxbar = rx.mean(axis=1)
    keep = np.isfinite(rxbar) & np.all(np.isfinite(f), axis=1)
    if keep.sum() < max(MIN_OBS, f.shape[1] + 2):
        return None
    design = np.column_stack([np.ones(int(keep.sum())), f[keep]])
    if np.linalg.matrix_rank(design) < design.shape[1]:
        return None
    params, cov, r2 = hac_ols(rxbar[keep], design, lags)
    return params, cov, r2, keep


def cochrane_piazzesi_factor(panel: TermPanel, *, annual_lags: int = ANNUAL_LAGS) -> pd.DataFrame:
    """The Cochrane-Piazzesi return-forecasting factor ``gamma`` of one curve.

    One row per term: ``const``, ``y12`` (the one-year yield) and ``f24`` ... ``f60`` (one-year
    forwards ending at 24 .. 60 months), with ``coef``, HAC ``se`` and ``hac_t``; ``r2``, ``n``,
    ``lags`` and the chi-square Wald test that every slope is zero (``wald_stat``, ``wald_pvalue``,
    HAC) are those of the one regression and repeat on every row. Empty when the panel is shorter
    than 24 months or has too few overlapping years.
    """
    _, dates, y = panel.grid()
    if y.shape[0] <= 12 or panel.max_months < 24:
        return pd.DataFrame(columns=list(CP_FACTOR_COLUMNS))
    rx, f, mats = _cp_design(y, panel.max_months)
    fit = _cp_gamma(rx, f, annual_lags)
    if fit is None:
        return pd.DataFrame(columns=list(CP_FACTOR_COLUMNS))
    gamma, cov, r2, keep = fit
    se = np.sqrt(np.diag(cov))
    wald, p = wald_pvalue(gamma[1:], cov[1:, 1:], np.zeros(gamma.size - 1))
    d = dates[:-12][keep]
    terms = ["const", "y12"] + [f"f{n}" for n in mats]
    out = pd.DataFrame({
        "curve": pd.Series([panel.curve] * len(terms), dtype="str"),
        "term": pd.Series(terms, dtype="str"),
        "coef": gamma, "se": se, "hac_t": gamma / se, "r2": r2, "n": int(keep.sum()),
        "lags": int(annual_lags), "wald_stat": wald, "wald_pvalue": p,
        "first_as_of": d.min(), "last_as_of": d.max(),
    })
    for c in ("first_as_of", "last_as_of"):
        out[c] = out[c].astype("datetime64[s]")
    return out[list(CP_FACTOR_COLUMNS)]


def _span(rows: pd.DataFrame) -> str:
    return f"{pd.Timestamp(rows['first_as_of'].min()):%Y-%m} to {pd.Timestamp(rows['last_as_of'].max()):%Y-%m}"


def _years(rows: pd.DataFrame) -> str:
    # overlapping annual returns: the sample holds about n / 12 independent observations, and
    # HAC tests with persistent regressors are known to over-reject when that is small
    return f"about {int(rows['n'].min()) // 12} non-overlapping years"


def _cs_verdict(rows: pd.DataFrame) -> str:
    b = rows["coef"].to_numpy()
    t1 = (b - 1.0) / rows["se"].to_numpy()
    mats = rows["maturity_months"].to_numpy()
    lo, hi = int(mats[0]), int(mats[-1])
    span = f"b from {b[0]:.2f} at {lo} months to {b[-1]:.2f} at {hi} months, {_span(rows)}"
    below = int(np.sum(t1 < -Z95))
    if np.all(b < 0.0):
        return (f"on this archive the slope coefficient is below 1 at every maturity and negative ({span}; "
                f"significantly below 1 at {below} of {b.size}): the spread predicts long rates moving the "
                "wrong way, against the expectations hypothesis")
    if np.all(b < 1.0):
        return (f"on this archive the slope coefficient is below 1 at every maturity ({span}; significantly "
                f"below 1 at {below} of {b.size}): long rates move less than the spread implies, against "
                "the expectations hypothesis where significant")
    if below == 0 and np.all(np.abs(t1) <= Z95):
        return (f"on this archive no slope coefficient differs significantly from 1 ({span}): consistent with "
                "the expectations hypothesis")
    return (f"on this archive the slope coefficient is significantly below 1 at {below} of {b.size} maturities "
            f"({span}): mixed evidence on the expectations hypothesis")


def _fb_verdict(rows: pd.DataFrame) -> str:
    b = rows["coef"].to_numpy()
    t = rows["hac_t"].to_numpy()
    mats = rows["maturity_months"].to_numpy()
    span = (f"b from {b[0]:.2f} at {int(mats[0])} months to {b[-1]:.2f} at {int(mats[-1])} months, {_span(rows)}, "
            f"{_years(rows)}")
    sig = int(np.sum(np.abs(t) > Z95))
    if sig == 0:
        return (f"on this archive the forward-spot spread does not significantly predict one-year excess "
                f"returns at any maturity ({span}): consistent with a constant term premium")
    pos = int(np.sum(t > Z95))
    return (f"on this archive the forward-spot spread predicts one-year excess returns at {sig} of {b.size} "
            f"maturities ({pos} with a positive slope; {span}): the term premium varies over time, against "
            "the expectations hypothesis with a constant premium")


def _cp_verdict(rows: pd.DataFrame, factor: pd.DataFrame | None) -> str:
    b = rows["coef"].to_numpy()
    mats = rows["maturity_months"].to_numpy()
    loads = ", ".join(f"{v:.2f}" for v in b)
    months = ", ".join(str(int(m)) for m in mats)
    rising = bool(np.all(np.diff(b) > 0))
    shape = "rising with maturity" if rising else "not monotone in maturity"
    if factor is None or factor.empty:
        return f"on this archive the single factor's loadings b_n at {months} months are {loads} ({shape})"
    r2, p = float(factor["r2"].iloc[0]), float(factor["wald_pvalue"].iloc[0])
    told = "predicts" if p < 0.05 else "does not significantly predict"
    return (f"on this archive one factor of forward rates {told} the average one-year excess return "
            f"(R^2 {r2:.2f}, HAC Wald p = {p:.3g}, {_span(rows)}, {_years(rows)}); its loadings b_n at "
            f"{months} months are {loads} ({shape})" + (": against the expectations hypothesis" if p < 0.05 else ""))


def eh_verdicts(regressions: pd.DataFrame, factor: pd.DataFrame | None = None) -> pd.DataFrame:
    """One plain-language line per (curve, test) of an :func:`eh_regressions` frame (``verdict``
    column). ``factor``: the :func:`cochrane_piazzesi_factor` frame of the same curves, for the
    Cochrane-Piazzesi line's R^2 and joint test. Significance is two-sided 5 % (normal, 1.96)."""
    out = []
    for (curve, test), rows in regressions.groupby(["curve", "test"], sort=False):
        rows = rows.sort_values("maturity_months")
        if test == "campbell_shiller":
            line = _cs_verdict(rows)
        elif test == "fama_bliss":
            line = _fb_verdict(rows)
        else:
            fac = None if factor is None or factor.empty else factor[factor["curve"] == curve]
            line = _cp_verdict(rows, fac)
        out.append({"curve": curve, "test": test, "verdict": line})
    return pd.DataFrame(out, columns=["curve", "test", "verdict"])
