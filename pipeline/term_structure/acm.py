"""The term premium of Adrian, Crump & Moench (2013): three linear regressions, then pricing.

Notation: ``y`` is the month-end panel ``(T, N)`` of continuously compounded zero rates (decimal a
year) at ``n = 1 .. N`` months; ``K`` (default 5) factors. Time is in months.

1. **State.** The first ``K`` principal components of the yields of maturities ``3 .. N`` (the
   first two are left out, as in the authors' own code), demeaned over the window: the leading
   eigenvectors of the demeaned yields' cross-product (their right singular vectors, what a PCA
   takes); each is scaled to unit sample variance (``ddof = 1``) and signed so that its loadings
   average positive. ``X_t = (y_t[3..N] - mean) @ L`` ``(K,)``.
2. **VAR(1).** ``X_{t+1} = Phi X_t + v_{t+1}``: ``Phi`` is the OLS slope of ``X_{t+1}`` on
   ``(1, X_t)``, the intercept is then set to zero (the state is demeaned), and
   ``v_{t+1} = X_{t+1} - Phi X_t``; ``S0 = cov(v)`` (``ddof = 1``, demeaned) prices the convexity.
3. **Excess returns.** ``rx(n)_{t+1} = ln P(n-1)_{t+1} - ln P(n)_t - y(1)_t / 12`` (monthly, not
   annualised; ``n = 1 .. N``, the one-month bond's is identically zero and stays in the stack) on
   ``(1, X_t, v_{t+1})``: ``beta`` ``(N, K)`` is the loading on the innovations, ``sigma2`` the
   variance of all residuals pooled (``ddof = 0``).
4. **Prices of risk.** The cross-section ``rx + (beta_n' S0 beta_n + sigma2) / 2`` regressed on
   ``(1, X_t)`` made orthogonal to ``v`` gives ``(a, c)`` per maturity; ``(lambda0, lambda1)`` is
   their OLS regression on ``beta``.
5. **Short rate** ``y(1)_t / 12 = delta0 + delta1' X_t`` (OLS over every month end).
6. **Pricing.** ``ln P(n)_t = A_n + B_n' X_t`` with ``A_1 = -delta0``, ``B_1 = -delta1`` and
   ``A_n = A_{n-1} - B_{n-1}' lambda0 + (B_{n-1}' S0 B_{n-1} + sigma2) / 2 + A_1``,
   ``B_n' = B_{n-1}' (Phi - lambda1) + B_1'``. Model yield ``-(A_n + B_n' X_t) / (n / 12)``; the
   risk-neutral yield is the same with ``lambda0 = 0, lambda1 = 0``; the term premium is model
   yield minus risk-neutral yield (decimals a year, continuous).

These are the choices of the reference implementation, the PyPI package ``pyacm`` (2.x), which the
tests hold this module to (1e-8). Month ends are paired only when they are calendar neighbours:
steps 2-4 use those pairs, steps 1 and 5 every month end, so a skipped month loses its two pairs.

Daily values apply a fit's mean, loadings and coefficients to each built day's yields.

**Real time.** :func:`realtime_fits` re-estimates everything at every month end ``M`` from the
month ends up to ``M`` alone (an expanding window starting with ``min_months`` month ends);
``estimated_through`` is that month end. A day uses the latest *usable* fit estimated through it
or before, so no row depends on a curve later than its own ``as_of``. Short windows can give
estimates no validation team would use: a VAR with an explosive root (the risk-neutral yield then
has no limit; seen on the demo during its 2001 tightening) or prices of risk that make the model
miss its own curve by hundreds of bp (seen on the demo with K = 5 on 11-12 years of data, where
factors 4-5 are interpolation noise). :meth:`ACMFit.problem` names both; such a month end is
passed over and its days keep the previous usable estimate. The full-sample fit is always shown.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.linalg import eigh

from pipeline.term_structure.errors import ModelInputError
from pipeline.term_structure.panel import TermPanel

__all__ = [
    "DEFAULT_FACTORS",
    "DEFAULT_MAX_FIT_RMSE_BP",
    "DEFAULT_MIN_MONTHS",
    "MIN_MODEL_MONTHS",
    "MODEL_COLUMNS",
    "ACMFit",
    "fit_acm",
    "model_term_premium",
    "realtime_fits",
]

DEFAULT_FACTORS = 5
DEFAULT_MIN_MONTHS = 60
#: an affine model that misses its own curve by more than this (bp, RMS) is not pricing it: a
#: generous allowance (good fits are a few bp), common practice rather than a published figure
DEFAULT_MAX_FIT_RMSE_BP = 15.0
MIN_MODEL_MONTHS = 24
MODEL_COLUMNS = ("curve", "as_of", "maturity_months", "fit", "model_yield", "risk_neutral_yield", "term_premium",
                 "estimated_through")
FITS = ("realtime", "full")
_SKIP = 2  # maturities 1 and 2 months stay out of the components


@dataclass(frozen=True)
class ACMFit:
    """One estimate of the model (see the module notes for each symbol).

    ``estimated_through``: the last month end in the window. ``months``: month ends used;
    ``pairs``: neighbouring pairs used by steps 2-4. ``mean`` ``(N-2,)`` and ``loadings``
    ``(N-2, K)`` map yields of 3 .. N months to the state. ``phi``, ``s0``, ``lambda1`` ``(K, K)``;
    ``lambda0``, ``delta1`` ``(K,)``; ``delta0``, ``sigma2`` floats (monthly units).
    ``a``, ``b`` ``(N,)``, ``(N, K)``: log-price coefficients; ``a_rn``, ``b_rn`` their
    risk-neutral counterparts. ``factors`` ``(T, K)``: the window's state. ``phi_radius``: the
    largest eigenvalue modulus of ``phi``; ``fit_rmse_bp``: root mean square of model yield minus
    panel yield over the window's month ends and maturities, bp (see :meth:`problem`).
    """

    estimated_through: np.datetime64
    months: int
    pairs: int
    mean: np.ndarray
    loadings: np.ndarray
    factors: np.ndarray
    phi: np.ndarray
    s0: np.ndarray
    beta: np.ndarray
    sigma2: float
    lambda0: np.ndarray
    lambda1: np.ndarray
    delta0: float
    delta1: np.ndarray
    a: np.ndarray
    b: np.ndarray
    a_rn: np.ndarray
    b_rn: np.ndarray
    phi_radius: float
    fit_rmse_bp: float

    def problem(self, max_fit_rmse_bp: float | None = None) -> str | None:
        """Why this fit should not be used (one line), or ``None``: a VAR that is not stationary
        (``phi_radius >= 1``: the expected path of the short rate, hence the risk-neutral yield, has
        no limit), or model yields that miss the window's own panel by more than
        ``max_fit_rmse_bp`` (default :data:`DEFAULT_MAX_FIT_RMSE_BP`) root mean square."""
        limit = DEFAULT_MAX_FIT_RMSE_BP if max_fit_rmse_bp is None else max_fit_rmse_bp
        if not self.phi_radius < 1.0:
            return f"VAR not stationary (spectral radius {self.phi_radius:.4f})"
        if not self.fit_rmse_bp <= limit:
            return f"model yields miss the panel by {self.fit_rmse_bp:.1f} bp RMS (limit {limit:g} bp)"
        return None

    def state(self, zero_cc: np.ndarray) -> np.ndarray:
        """``(D, K)`` state of days with yields ``zero_cc`` ``(D, N)`` (continuous, decimal)."""
        return _mm(np.asarray(zero_cc, dtype=float)[:, _SKIP:] - self.mean, self.loadings)

    def yields(self, zero_cc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(model, risk_neutral)`` yields ``(D, N)``, continuous decimals a year, for days with
        panel yields ``zero_cc`` ``(D, N)``."""
        x = self.state(zero_cc)
        years = np.arange(1, self.a.size + 1, dtype=float) / 12.0
        model = -(self.a + _mm(x, self.b.T)) / years
        rn = -(self.a_rn + _mm(x, self.b_rn.T)) / years
        return model, rn


def _mm(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``a @ b`` without BLAS: on a small, busy machine OpenBLAS's threads cost more than these
    products (a few hundred rows by a dozen columns) take (measured: several times slower)."""
    return np.einsum("ij,jk->ik", a, b)


def _ols(y: np.ndarray, x: np.ndarray) -> np.ndarray:
    """OLS coefficients ``(k, m)`` of ``y`` ``(t, m)`` on ``x`` ``(t, k)``, by the normal equations
    (the regressors are a constant and a few standardised factors: well conditioned)."""
    y2 = y.reshape(y.shape[0], -1)
    coef = np.linalg.solve(_mm(x.T, x), _mm(x.T, y2))
    return coef.reshape((x.shape[1],) + y.shape[1:])


def _affine(delta0: np.ndarray, delta1: np.ndarray, phi_q: np.ndarray, mu_q: np.ndarray, s0: np.ndarray,
            sigma2: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Log-price coefficients ``A (W, n)``, ``B (W, n, K)`` of the recursion in the module notes for
    ``W`` fits at once: ``delta0 (W,)``, ``delta1 (W, K)``, ``phi_q (W, K, K)`` (``Phi - lambda1``),
    ``mu_q (W, K)`` (``-lambda0``), ``s0 (W, K, K)``, ``sigma2 (W,)``."""
    w, k = delta1.shape
    a = np.empty((w, n))
    b = np.empty((w, n, k))
    a[:, 0], b[:, 0] = -delta0, -delta1
    for j in range(1, n):  # sequential over maturities; every fit advances together
        prev = b[:, j - 1]
        quad = np.einsum("wk,wkl,wl->w", prev, s0, prev)
        a[:, j] = a[:, j - 1] + np.einsum("wk,wk->w", prev, mu_q) + 0.5 * (quad + sigma2) + a[:, 0]
        b[:, j] = np.einsum("wk,wkl->wl", prev, phi_q) + b[:, 0]
    return a, b


def _top_components(gram: np.ndarray, k: int) -> np.ndarray:
    """``(m, k)`` unit eigenvectors of the ``K`` largest eigenvalues of ``gram`` ``(m, m)``, largest
    first: the leading right singular vectors of the demeaned yields whose cross-product it is
    (only the top ``K`` are computed, by LAPACK's MRRR driver)."""
    m = gram.shape[0]
    _, vec = eigh(gram, subset_by_index=[m - k, m - 1], driver="evr", check_finite=False)
    return vec[:, ::-1]


def _window_grams(cut: np.ndarray, ends: np.ndarray) -> Iterator[np.ndarray]:
    """Cross-products ``(m, m)`` of the demeaned yields of each window ``cut[:e]``, ``e`` in
    ``ends`` (increasing), one after another: running sums of outer products, shifted by the mean
    of the first window (a part of every window, so no window sees later data) to keep the
    cancellation in ``sum d d' - (sum d)(sum d)' / e`` small."""
    first = int(ends[0])
    d = cut - cut[:first].mean(axis=0)
    outer = _mm(d[:first].T, d[:first])
    total = d[:first].sum(axis=0)
    pos = first
    for e in ends:  # month by month: each window adds its new month ends to the sums
        for row in d[pos:e]:
            outer += np.multiply.outer(row, row)
            total += row
        pos = int(e)
        yield outer - np.multiply.outer(total, total) / float(e)


@dataclass(frozen=True)
class _Regressions:
    """Steps 1-5 of one window (see :class:`ACMFit` for the fields)."""

    months: int
    pairs: int
    mean: np.ndarray
    loadings: np.ndarray
    factors: np.ndarray
    phi: np.ndarray
    s0: np.ndarray
    beta: np.ndarray
    sigma2: float
    lambda0: np.ndarray
    lambda1: np.ndarray
    delta0: float
    delta1: np.ndarray


def _regressions(y: np.ndarray, follows: np.ndarray, k: int, gram: np.ndarray | None = None,
                 price_risk: bool = True) -> _Regressions:
    """Steps 1-5 on one window ``y`` ``(T, N)``; ``follows`` ``(T-1,)`` marks neighbouring month
    ends; ``gram``: the demeaned cross-product of ``y[:, 2:]`` if already known."""
    t_obs, n = y.shape
    cut = y[:, _SKIP:]
    mean = cut.mean(axis=0)
    centred = cut - mean
    raw = _top_components(_mm(centred.T, centred) if gram is None else gram, k)
    scores = _mm(centred, raw)
    sd = scores.std(axis=0, ddof=1)
    loadings = raw / sd
    sign = np.sign(loadings.mean(axis=0))
    loadings = loadings * sign
    x = scores / sd * sign

    p = np.flatnonzero(follows)
    x0, x1 = x[p], x[p + 1]
    ones = np.ones((p.size, 1))
    phi = _ols(x1, np.hstack([ones, x0]))[1:].T
    v = x1 - _mm(x0, phi.T)
    s0 = np.atleast_2d(np.cov(v.T))

    mat = np.arange(1, n + 1, dtype=float)
    rx = np.zeros((p.size, n))
    # ln P(n-1)_{t+1} - ln P(n)_t - y(1)_t/12, with ln P(n) = -y(n) n/12
    rx[:, 1:] = -y[p + 1, :-1] * mat[:-1] / 12.0 + y[p, 1:] * mat[1:] / 12.0 - y[p, :1] / 12.0
    z = np.hstack([ones, x0, v])
    coef = _ols(rx, z)
    resid = rx - _mm(z, coef)
    sigma2 = float(np.var(resid))
    beta = coef[1 + k :].T

    f = np.hstack([ones, x0])
    f_perp = f - _mm(v, _ols(f, v))
    conv = np.einsum("nk,kl,nl->n", beta, s0, beta) + sigma2
    ac = _ols(rx + 0.5 * conv, f_perp).T  # (N, K+1): intercept and lagged-state loading per maturity
    lam = _ols(ac, beta)  # (K, K+1)
    lambda0, lambda1 = lam[:, 0], lam[:, 1:]
    if not price_risk:
        lambda0, lambda1 = np.zeros_like(lambda0), np.zeros_like(lambda1)

    delta = _ols(y[:, 0] / 12.0, np.hstack([np.ones((t_obs, 1)), x]))
    return _Regressions(t_obs, int(p.size), mean, loadings, x, phi, s0, beta, sigma2, lambda0, lambda1,
                        float(delta[0]), delta[1:])


def _priced(regs: list[_Regressions], through: list[np.datetime64], y: np.ndarray) -> list[ACMFit]:
    """Step 6 for every window at once, then one :class:`ACMFit` per window; window ``i`` is the
    first ``regs[i].months`` rows of the panel ``y`` ``(T, N)``."""
    n = y.shape[1]
    if not regs:
        return []
    stack = {name: np.array([getattr(r, name) for r in regs]) for name in
             ("phi", "s0", "sigma2", "lambda0", "lambda1", "delta0", "delta1")}
    a, b = _affine(stack["delta0"], stack["delta1"], stack["phi"] - stack["lambda1"], -stack["lambda0"],
                   stack["s0"], stack["sigma2"], n)
    a_rn, b_rn = _affine(stack["delta0"], stack["delta1"], stack["phi"], np.zeros_like(stack["lambda0"]),
                         stack["s0"], stack["sigma2"], n)
    years = np.arange(1, n + 1, dtype=float) / 12.0
    fits = []
    for i, (r, t) in enumerate(zip(regs, through, strict=True)):  # one per window: a few checks each
        with np.errstate(over="ignore", invalid="ignore"):
            model = -(a[i] + _mm(r.factors, b[i].T)) / years
            rmse = float(np.sqrt(np.mean((model - y[: r.months]) ** 2)) * 1e4)
        radius = float(np.abs(np.linalg.eigvals(r.phi)).max())
        fits.append(ACMFit(np.datetime64(t, "D"), r.months, r.pairs, r.mean, r.loadings, r.factors, r.phi, r.s0,
                           r.beta, r.sigma2, r.lambda0, r.lambda1, r.delta0, r.delta1, a[i], b[i], a_rn[i], b_rn[i],
                           radius, rmse if np.isfinite(rmse) else float("inf")))
    return fits


def _check(panel: TermPanel, factors: int, min_months: int) -> None:
    c, n, t = panel.curve, panel.max_months, panel.as_of.size
    if n < MIN_MODEL_MONTHS:
        longest = "" if panel.longest_tenor_months is None else f" (longest quoted tenor {panel.longest_tenor_months}M)"
        raise ModelInputError(f"curve {c!r}: the term-premium model needs maturities up to at least "
                              f"{MIN_MODEL_MONTHS} months; the panel reaches {n}{longest}")
    if int(factors) != factors or not 1 <= factors <= n - _SKIP:
        raise ModelInputError(f"curve {c!r}: factors must be a whole number from 1 to {n - _SKIP}, got {factors}")
    need = 2 * int(factors) + 3  # the excess-return regression has 2K + 1 regressors
    if int(min_months) != min_months or min_months < need:
        raise ModelInputError(f"curve {c!r}: min_months must be at least {need} for {factors} factors, "
                              f"got {min_months}")
    if t < min_months:
        raise ModelInputError(f"curve {c!r}: {t} month ends observed; the model needs at least {min_months}")
    pairs = int(panel.follows().sum())
    if pairs < need:
        raise ModelInputError(f"curve {c!r}: only {pairs} pairs of consecutive month ends; the model needs {need}")


def fit_acm(panel: TermPanel, factors: int = DEFAULT_FACTORS, *, price_risk: bool = True) -> ACMFit:
    """The full-sample fit on every month end of ``panel``.

    ``price_risk=False`` forces ``lambda0 = 0`` and ``lambda1 = 0`` (model yields are then the
    risk-neutral ones). Raises :class:`ModelInputError` when the panel reaches fewer than 24 months,
    ``factors`` is out of range or there are too few month ends.
    """
    _check(panel, factors, 2 * int(factors) + 3)
    regs = _regressions(panel.zero_cc, panel.follows(), int(factors), price_risk=price_risk)
    return _priced([regs], [panel.as_of[-1]], panel.zero_cc)[0]


def realtime_fits(panel: TermPanel, factors: int = DEFAULT_FACTORS,
                  min_months: int = DEFAULT_MIN_MONTHS) -> list[ACMFit]:
    """One fit per month end from the ``min_months``-th on, each from the month ends up to it only
    (expanding window), oldest first."""
    _check(panel, factors, min_months)
    k = int(factors)
    follows = panel.follows()
    pairs = np.concatenate([[0], np.cumsum(follows)])  # pairs inside the first e month ends: pairs[e-1]
    ends = np.arange(int(min_months), panel.as_of.size + 1)
    ends = ends[pairs[ends - 1] >= 2 * k + 3]
    if ends.size == 0:
        return []
    grams = _window_grams(panel.zero_cc[:, _SKIP:], ends)
    regs = [_regressions(panel.zero_cc[:e], follows[: e - 1], k, gram)  # one estimate per month end
            for e, gram in zip(ends, grams, strict=True)]
    return _priced(regs, [panel.as_of[e - 1] for e in ends], panel.zero_cc)


def _rows(fit_name: str, days: np.ndarray, model: np.ndarray, rn: np.ndarray, through: np.ndarray,
          keep_cols: np.ndarray) -> pd.DataFrame:
    d, k = days.size, keep_cols.size
    model, rn = model[:, keep_cols], rn[:, keep_cols]
    return pd.DataFrame({
        "as_of": np.repeat(days, k),
        "maturity_months": np.tile(keep_cols + 1, d).astype(np.int64),
        "fit": fit_name,
        "model_yield": model.reshape(-1),
        "risk_neutral_yield": rn.reshape(-1),
        "term_premium": (model - rn).reshape(-1),
        "estimated_through": np.repeat(through, k),
    })


def model_term_premium(
    panel: TermPanel,
    factors: int = DEFAULT_FACTORS,
    *,
    min_months: int = DEFAULT_MIN_MONTHS,
    fits: Sequence[str] = FITS,
    maturities: Sequence[int] | None = None,
    daily: bool = True,
    max_fit_rmse_bp: float = DEFAULT_MAX_FIT_RMSE_BP,
    realtime: Sequence[ACMFit] | None = None,
) -> pd.DataFrame:
    """The ``model_term_premium`` view of one curve.

    One row per (as_of, maturity_months, fit): ``model_yield``, ``risk_neutral_yield`` and
    ``term_premium`` (decimals a year, continuous; premium = model minus risk-neutral) and
    ``estimated_through`` (the month end the fit's data end on). ``fit = "full"``: the full-sample
    fit applied to every day, whatever :meth:`ACMFit.problem` says of it (check it with
    :func:`fit_acm`). ``fit = "realtime"``: each day under the latest usable expanding-window fit
    estimated through that day or before (a month end whose fit has a problem - an explosive VAR,
    or model yields more than ``max_fit_rmse_bp`` off its own panel - is passed over, so such a
    day shows an older ``estimated_through``); days before the first usable fit have no row.
    ``daily=False`` gives month ends only. ``maturities``: months to keep (default ``1 .. N``).
    ``realtime``: the fits :func:`realtime_fits` already made for this panel, factors and
    ``min_months`` (a caller that also reports on them need not estimate twice).
    Raises :class:`ModelInputError` (one line) when the panel cannot support the model.
    """
    unknown = [f for f in fits if f not in FITS]
    if unknown:
        raise ModelInputError(f"curve {panel.curve!r}: unknown fit {unknown[0]!r}; allowed: {', '.join(FITS)}")
    n = panel.max_months
    cols = np.arange(n) if maturities is None else np.array(sorted({int(m) - 1 for m in maturities}))
    if cols.size and (cols.min() < 0 or cols.max() >= n):
        raise ModelInputError(f"curve {panel.curve!r}: maturities must be 1 .. {n} months")
    days, y = (panel.days, panel.daily_zero_cc) if daily else (panel.as_of, panel.zero_cc)
    parts = []
    if "realtime" in fits:
        # a month end whose estimate has a problem (ACMFit.problem) is passed over: its days keep
        # the latest usable estimate, and estimated_through says which
        made = realtime_fits(panel, factors, min_months) if realtime is None else realtime
        rt = [f for f in made if f.problem(max_fit_rmse_bp) is None]
        stamps = np.array([f.estimated_through for f in rt], dtype="datetime64[D]")
        which = np.searchsorted(stamps, days, side="right") - 1
        for i, fit in enumerate(rt):  # one block of days per month-end estimate
            rows = np.flatnonzero(which == i)
            if rows.size:
                model, rn = fit.yields(y[rows])
                parts.append(_rows("realtime", days[rows], model, rn, np.full(rows.size, fit.estimated_through), cols))
    if "full" in fits:
        fit = fit_acm(panel, factors)
        model, rn = fit.yields(y)
        parts.append(_rows("full", days, model, rn, np.full(days.size, fit.estimated_through), cols))
    if not parts:
        out = pd.DataFrame({c: [] for c in MODEL_COLUMNS[1:]})
    else:
        out = pd.concat(parts, ignore_index=True)
    out.insert(0, "curve", pd.Series([panel.curve] * len(out), dtype="str"))
    out["fit"] = out["fit"].astype("str")
    for c in ("as_of", "estimated_through"):
        out[c] = out[c].astype("datetime64[s]")
    return out[list(MODEL_COLUMNS)]
