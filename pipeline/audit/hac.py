"""Newey-West (Bartlett) long-run variances, HAC regressions and Diebold-Mariano, on plain arrays.

These are the numerical kernels behind :mod:`pipeline.audit`. They reproduce statsmodels'
``OLS(...).fit(cov_type="HAC", cov_kwds={"maxlags": L})`` (Bartlett weights ``1 - j/(L+1)``, no
small-sample correction) exactly, but in O(n) time whatever the lag, which matters because the
overlap-aware lag of a ten-year-ahead daily forecast is about 2,500.

The trick is the identity behind the Bartlett kernel: it is the self-convolution of a box of width
``L + 1``, so for scores ``g_t`` (t = 0..n-1)::

    sum_{s,t} (1 - |t-s|/(L+1))_+ g_s g_t' = 1/(L+1) * sum_{r=-L}^{n-1} B_r B_r'

where ``B_r`` is the sum of ``g_t`` over the block ``[r, r+L]`` clipped to the sample. Block sums
come from one cumulative sum, so the whole long-run variance costs a handful of array operations.
:func:`rolling_mean_hac_se` applies the same identity to every trailing window at once.

All functions take 1-D float arrays ordered in time (oldest first) and never modify them.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

__all__ = [
    "bartlett_long_run",
    "diebold_mariano",
    "hac_mean",
    "hac_ols",
    "hln_factor",
    "rolling_mean_hac_se",
    "wald_pvalue",
]


def _gram(a: np.ndarray, b: np.ndarray | None = None) -> np.ndarray:
    """``a.T @ b`` for tall, narrow arrays by elementwise sums.

    Deliberately not BLAS: OpenBLAS spreads these products over threads, which on a small,
    busy machine (2 cores shared with a store and a scheduler) made them several times slower.
    """
    b = a if b is None else b
    out = np.empty((a.shape[1], b.shape[1]))
    for i in range(a.shape[1]):  # k <= 3 columns: a loop over regressors, not over rows
        for j in range(b.shape[1]):
            out[i, j] = np.add.reduce(a[:, i] * b[:, j])
    return out


def bartlett_long_run(g: np.ndarray, lags: int) -> np.ndarray:
    """Bartlett-weighted sum of autocovariance products ``S = sum_j w_j (G_j + G_j')``.

    ``g`` has shape (n,) or (n, k) (scores, already demeaned / multiplied by their regressors);
    returns a (k, k) array (a (1, 1) array for 1-D input). ``w_j = 1 - j/(lags+1)`` for
    ``j <= lags``; no division by ``n``: this is statsmodels' ``S_hac_simple``.
    """
    x = np.asarray(g, dtype=float)
    if x.ndim == 1:
        x = x[:, None]
    n = x.shape[0]
    L = int(lags)
    if L < 0:
        raise ValueError(f"lags must be >= 0, got {lags}")
    cs = np.zeros((n + 1, x.shape[1]))
    np.cumsum(x, axis=0, out=cs[1:])
    if L < n:
        # blocks r = -L..-1 (clipped at the start), 0..n-1-L (whole), n-L..n-1 (clipped at the end)
        blocks = np.concatenate([cs[1 : L + 1], cs[L + 1 :] - cs[: n - L], cs[n] - cs[n - L : n]])
    else:
        r = np.arange(-L, n)
        blocks = cs[np.minimum(r + L, n - 1) + 1] - cs[np.maximum(r, 0)]
    return _gram(blocks) / (L + 1)


def hac_mean(x: np.ndarray, lags: int) -> tuple[float, float]:
    """Mean of ``x`` and its Newey-West standard error (= OLS of ``x`` on a constant, HAC)."""
    x = np.asarray(x, dtype=float)
    n = x.size
    m = float(x.mean())
    s = float(bartlett_long_run(x - m, lags)[0, 0])
    return m, float(np.sqrt(max(s, 0.0)) / n)


def hac_ols(y: np.ndarray, X: np.ndarray, lags: int) -> tuple[np.ndarray, np.ndarray, float]:
    """OLS of ``y`` on ``X`` (shape (n, k), include the constant yourself) with a HAC covariance.

    Returns ``(params, cov, r2)``: the coefficients, the Newey-West covariance
    ``(X'X)^-1 S (X'X)^-1`` with Bartlett weights and ``lags`` lags (no small-sample factor), and
    the centred R^2 (NaN when ``y`` is constant).
    """
    y = np.asarray(y, dtype=float)
    X = np.asarray(X, dtype=float)
    xtx_inv = np.linalg.inv(_gram(X))
    params = xtx_inv @ _gram(X, y[:, None])[:, 0]
    resid = y - (X * params).sum(axis=1)
    meat = bartlett_long_run(X * resid[:, None], lags)
    cov = xtx_inv @ meat @ xtx_inv.T
    tss = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - float(np.add.reduce(resid * resid)) / tss if tss > 0 else float("nan")
    return params, cov, r2


def wald_pvalue(params: np.ndarray, cov: np.ndarray, restriction: np.ndarray) -> tuple[float, float]:
    """Chi-square Wald test of ``params == restriction`` (all coefficients jointly).

    Returns ``(statistic, p_value)`` with ``len(params)`` degrees of freedom: the asymptotic form
    that goes with a HAC covariance (statsmodels' ``wald_test(..., use_f=False)``).
    """
    diff = np.asarray(params, dtype=float) - np.asarray(restriction, dtype=float)
    w = float(diff @ np.linalg.solve(cov, diff))
    return w, float(stats.chi2.sf(w, diff.size))


def hln_factor(n: int, h: int) -> float:
    """Harvey, Leybourne & Newbold (1997) small-sample factor ``sqrt((n + 1 - 2h + h(h-1)/n) / n)``.

    Positive for ``h < n``; NaN otherwise (the sample then holds less than one forecast period).
    """
    if h >= n:
        return float("nan")
    return float(np.sqrt((n + 1 - 2 * h + h * (h - 1) / n) / n))


def diebold_mariano(e_a: np.ndarray, e_b: np.ndarray, h: int, lags: int) -> tuple[float, float]:
    """Diebold-Mariano (1995) test of equal squared-error loss, Harvey-Leybourne-Newbold form.

    ``d_t = e_a_t^2 - e_b_t^2``; ``DM = mean(d) / NW-SE(mean(d))`` with Bartlett weights and ``lags``
    lags, scaled by :func:`hln_factor` ``(n, h)`` and referred to Student's t with ``n - 1``
    degrees of freedom (two-sided p-value). Negative DM: forecast A has the smaller loss.
    Returns ``(nan, nan)`` when the loss differential has no variance (identical forecasts).
    """
    a = np.asarray(e_a, dtype=float)
    b = np.asarray(e_b, dtype=float)
    d = a * a - b * b
    n = d.size
    dbar, se = hac_mean(d, lags)
    k = hln_factor(n, h)
    if not np.isfinite(k) or se <= 0.0 or not np.isfinite(se):
        return float("nan"), float("nan")
    dm = k * dbar / se
    return float(dm), float(2.0 * stats.t.sf(abs(dm), n - 1))


def _window_sums(values: np.ndarray, dtype: type = float) -> np.ndarray:
    """Cumulative sum with a leading 0, so ``sum(values[lo:hi]) = out[hi] - out[lo]``."""
    out = np.zeros(values.size + 1, dtype=dtype)
    np.cumsum(values, out=out[1:])
    return out


def rolling_mean_hac_se(x: np.ndarray, window: int, lags: int) -> tuple[np.ndarray, np.ndarray]:
    """Trailing-window mean and its Newey-West standard error for every full window.

    ``x`` has shape (n,); the result arrays have shape (n - window + 1,), element ``i`` covering
    ``x[i : i + window]``. The standard error equals statsmodels' HAC (Bartlett, ``lags`` lags,
    no small-sample factor) of an OLS on a constant fitted to that slice; ``lags`` must be below
    ``window``. No loop over windows: every sum comes from cumulative sums (see the module notes),
    so the cost is O(n) whatever ``lags``.
    """
    x = np.asarray(x, dtype=float)
    n, w, L = x.size, int(window), int(lags)
    if w < 1 or L < 0 or L >= w:
        raise ValueError(f"need 1 <= window and 0 <= lags < window, got window={w}, lags={L}")
    if n < w:
        return np.empty(0), np.empty(0)
    # The long-run variance is shift-invariant; centring keeps the cumulative sums small.
    centre = float(x.mean())
    # Extended precision (80-bit on x86) for the sums of squares: the windowed differences below
    # cancel several digits when the errors are persistent.
    ext = np.longdouble
    cs = _window_sums(x - centre, ext)  # cs[k] = sum of the first k values, k = 0..n
    k = np.arange(n + 1, dtype=ext)
    p1 = _window_sums(cs, ext)
    p2 = _window_sums(cs * cs, ext)
    pk = _window_sums(k * cs, ext)
    a = np.arange(n - w + 1)  # first index of each window
    b1 = a + w  # one past its last index
    m = (cs[b1] - cs[a]) / w
    ca, cb = cs[a], cs[b1]
    tri = L * (L + 1) / 2.0
    sq = L * (L + 1) * (2 * L + 1) / 6.0
    # Blocks hanging over the window's start: partial sums of lengths 1..L from a (k = a+1..a+L).
    s1, s2, sk = p1[a + L + 1] - p1[a + 1], p2[a + L + 1] - p2[a + 1], pk[a + L + 1] - pk[a + 1]
    left = (s2 - 2 * ca * s1 + L * ca * ca) - 2 * m * ((sk - a * s1) - ca * tri) + m * m * sq
    # Blocks hanging over its end: partial sums of lengths 1..L ending at b1-1 (k = b1-L..b1-1).
    s1, s2, sk = p1[b1] - p1[b1 - L], p2[b1] - p2[b1 - L], pk[b1] - pk[b1 - L]
    right = (L * cb * cb - 2 * cb * s1 + s2) - 2 * m * (cb * tri - (b1 * s1 - sk)) + m * m * sq
    # Full blocks [r, r+L] inside the window, r = a .. b1-1-L.
    blocks = cs[L + 1 :] - cs[: n - L]
    q1, q2 = _window_sums(blocks, ext), _window_sums(blocks * blocks, ext)
    e1, e2 = q1[b1 - L] - q1[a], q2[b1 - L] - q2[a]
    inner = e2 - 2 * (L + 1) * m * e1 + (w - L) * (L + 1) ** 2 * m * m
    s = (left + inner + right) / (L + 1)
    se = np.sqrt(np.maximum(s, 0.0).astype(float)) / w
    return m.astype(float) + centre, se
