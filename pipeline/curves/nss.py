"""``nss``: a Nelson-Siegel-Svensson curve fitted to each day's zero rates.

With ``x1 = t / tau1``, ``x2 = t / tau2`` and ``L(x) = (1 - e^-x) / x``, the continuously compounded
zero rate is ``y(t) = b0 + b1 L(x1) + b2 (L(x1) - e^-x1) + b3 (L(x2) - e^-x2)`` and the instantaneous
forward ``f(t) = b0 + b1 e^-x1 + b2 x1 e^-x1 + b3 x2 e^-x2`` (Svensson 1994; the form used by
Gürkaynak, Sack & Wright 2007). Parameters are decimals (``b0 = 0.04`` is 4 %) and taus are in years.

Fit: least squares on the day's node zero rates (continuously compounded, the curve's day count),
by variable projection: for given ``(tau1, tau2)`` the betas are a linear least-squares solve, and
scipy's bounded ``least_squares`` searches the two taus. For par quotes the zero rates are first
bootstrapped with the monotone convex method and NSS is fitted to those bootstrapped zeros, so an
NSS curve reprices its input par bonds only as closely as the fit allows.

Extrapolation: none is needed; the fitted function is used at every ``t`` (its limit at ``t = 0`` is
``b0 + b1`` and it tends to ``b0`` for long maturities).

Why days are visited in order here (the one place in curve building that loops over days): each
day's fit starts from the previous day's taus. The NSS objective has several local minima and
nearly flat valleys; starting from yesterday's answer keeps the parameter path continuous from day
to day (parameters are stored and compared over time) and makes each fit converge in a few steps.
That dependency chain is sequential by nature. Each day costs a two-parameter search over a handful
of nodes, so the loop stays cheap.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import least_squares

from pipeline.curves.base import Block

__all__ = ["NSSBlock", "fit_nss", "nss_forward", "nss_zero"]

TAU_BOUNDS = (0.03, 100.0)
_START_GRID = [(t1, t2) for t1 in (0.3, 1.0, 2.5, 5.0) for t2 in (4.0, 10.0, 20.0)]


def _loadings(t: np.ndarray, tau1: np.ndarray, tau2: np.ndarray) -> tuple[np.ndarray, ...]:
    """``L(x1), e^-x1, L(x2), e^-x2`` with the ``t = 0`` limits (``L(0) = 1``)."""
    out = []
    for tau in (tau1, tau2):
        x = t / tau
        e = np.exp(-x)
        with np.errstate(invalid="ignore", divide="ignore"):
            lo = np.where(x == 0.0, 1.0, -np.expm1(-x) / np.where(x == 0.0, 1.0, x))
        out += [lo, e]
    return tuple(out)


def nss_zero(params: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Continuous zero rates ``(G, K)`` of NSS ``params`` ``(G, 6)`` at times ``t`` ``(G, K)``."""
    p = np.asarray(params, dtype=float)
    b0, b1, b2, b3, tau1, tau2 = (p[:, i : i + 1] for i in range(6))
    l1, e1, l2, e2 = _loadings(np.asarray(t, dtype=float), tau1, tau2)
    return b0 + b1 * l1 + b2 * (l1 - e1) + b3 * (l2 - e2)


def nss_forward(params: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Instantaneous forwards ``(G, K)`` (continuous) of NSS ``params`` ``(G, 6)`` at ``t`` ``(G, K)``."""
    p = np.asarray(params, dtype=float)
    b0, b1, b2, b3, tau1, tau2 = (p[:, i : i + 1] for i in range(6))
    t = np.asarray(t, dtype=float)
    e1, e2 = np.exp(-t / tau1), np.exp(-t / tau2)
    return b0 + b1 * e1 + b2 * (t / tau1) * e1 + b3 * (t / tau2) * e2


def _design(t: np.ndarray, tau1: float, tau2: float) -> np.ndarray:
    l1, e1, l2, e2 = _loadings(t, np.float64(tau1), np.float64(tau2))
    return np.column_stack([np.ones_like(t), l1, l1 - e1, l2 - e2])


def _betas(t: np.ndarray, y: np.ndarray, taus: np.ndarray) -> np.ndarray:
    return np.linalg.lstsq(_design(t, taus[0], taus[1]), y, rcond=None)[0]


def _residual(taus: np.ndarray, t: np.ndarray, y: np.ndarray) -> np.ndarray:
    x = _design(t, taus[0], taus[1])
    return x @ np.linalg.lstsq(x, y, rcond=None)[0] - y


def _fit_one(t: np.ndarray, y: np.ndarray, start: np.ndarray | None) -> tuple[np.ndarray, bool]:
    lo, hi = TAU_BOUNDS
    if start is None or not np.all(np.isfinite(start)):
        sse = [float(np.sum(_residual(np.array(s), t, y) ** 2)) for s in _START_GRID]
        start = np.array(_START_GRID[int(np.argmin(sse))])
    x0 = np.clip(np.asarray(start, dtype=float), lo * 1.0001, hi * 0.9999)
    res = least_squares(_residual, x0, bounds=([lo, lo], [hi, hi]), args=(t, y), method="trf",
                        x_scale=1.0, xtol=1e-10, ftol=1e-12, gtol=1e-12, max_nfev=200)
    taus = res.x
    return np.concatenate([_betas(t, y, taus), taus]), bool(np.all(np.isfinite(res.x)))


def fit_nss(
    times: np.ndarray, zero_cc: np.ndarray, warm_start: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Fit NSS to each day's nodes, in day order, each start from the previous day's taus.

    ``times``, ``zero_cc``: ``(D, n)`` with NaN where a node is absent (days need not share a
    pattern). ``warm_start``: a ``(6,)`` parameter vector whose taus start the first day.
    Returns ``params`` ``(D, 6)`` (``b0, b1, b2, b3, tau1, tau2``) and a ``(D,)`` success mask.
    """
    d = times.shape[0]
    params = np.full((d, 6), np.nan)
    good = np.zeros(d, dtype=bool)
    start = None if warm_start is None else np.asarray(warm_start, dtype=float)[4:6]
    for i in range(d):  # sequential by nature: see the module docstring
        keep = np.isfinite(times[i]) & np.isfinite(zero_cc[i])
        if keep.sum() < 2:
            continue
        p, success = _fit_one(times[i, keep], zero_cc[i, keep], start)
        if success and np.all(np.isfinite(p)):
            params[i], good[i] = p, True
            start = p[4:6]
    return params, good


class NSSBlock(Block):
    """Curves given by NSS parameters ``(G, 6)``; ``times``/``zero_cc`` keep the fitted nodes."""
    support = None


    def __init__(self, params: np.ndarray, times: np.ndarray | None = None,
                 zero_cc: np.ndarray | None = None) -> None:
        p = np.array(params, dtype=float)
        empty = np.empty((p.shape[0], 0))
        super().__init__(empty if times is None else times, empty if zero_cc is None else zero_cc)
        self.params = p

    def ln_discount(self, t: np.ndarray, loc: np.ndarray | None = None) -> np.ndarray:
        return -nss_zero(self.params, t) * t

    def inst_forward(self, t: np.ndarray) -> np.ndarray:
        return nss_forward(self.params, t)

    def zero_at_zero(self) -> np.ndarray:
        return self.params[:, 0] + self.params[:, 1]

    def subset(self, rows: np.ndarray) -> NSSBlock:
        return NSSBlock(self.params[rows], self.times[rows], self.zero_cc[rows])
