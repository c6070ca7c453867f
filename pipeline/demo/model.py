"""The factor model behind the demo market, its parameters and its known term premium.

The model
---------
Three Gaussian factors - level ``L``, slope ``S`` and curvature ``C`` - follow a mean-reverting
(Ornstein-Uhlenbeck) process in calendar time, simulated exactly one calendar day at a time::

    dL = -k_L (L - mu_L) dt + s_L dW_L
    dS = -lam (S - mu_S) dt + lam (C - mu_C) dt + s_S dW_S
    dC = -lam (C - mu_C) dt + s_C dW_C

The instantaneous short rate is ``r = L + S``. Because the slope factor is pulled towards the
curvature factor, the expected short-rate path seen from day ``t`` is, for ``u`` years ahead,
``E_t r(t+u) = mu_r + l e^{-k_L u} + (s + lam u c) e^{-lam u}`` with ``l, s, c`` the factors' distances
from their means, and the average of that path over ``[0, tau]`` has exactly the dynamic Nelson-Siegel
shape: loadings ``B(k_L, tau)``, ``B(lam, tau)`` and ``B(lam, tau) - e^{-lam tau}`` with
``B(k, tau) = (1 - e^{-k tau}) / (k tau)``.

The continuously compounded zero rate (ACT/365F, ``tau`` = calendar days / 365) is that average plus
a deterministic, documented term premium::

    z(t, tau) = (1/tau) * integral_0^tau E_t[r(t+u)] du + tp(tau),
    tp(tau)   = a (1 - exp(-tau / b)),      a = 1.60 %, b = 4 years

so ``tp`` is about 10 bp at 3M, 1.14 % at 5Y and 1.47 % at 10Y. The swap curve is the government zero
curve plus a swap spread built the same way from a fourth, independent, slowly mean-reverting factor
``Q`` (the expected-average part) plus a small deterministic spread premium
``sp(tau) = 0.08 % (1 - exp(-tau / 3))``.

Known term premium
------------------
By the law of iterated expectations the expectation part of a forward is an unbiased forecast of the
expectation part of the zero rate realised on its start date, so a forward starting ``S`` years ahead
for ``M`` years carries, on average, exactly::

    E[f(t; S, M) - z(t + S, M)] = [(S + M) tp(S + M) - S tp(S)] / M - tp(M)

(continuous compounding): 18 bp for 3M x 3M, 55 bp for 1Y x 1Y, 65 bp for 5Y x 5Y, zero for a
forward starting today. :func:`expected_forward_error_bp` evaluates it.

The tightening episode
----------------------
From mid-February 2001 the slope factor receives a burst of positive shocks (+4 % spread over 150
days): the short end rises fast and the curve inverts (3M and 2Y above 10Y) for about a year. A
forecaster using the model's own expectation cannot foresee that burst, so forecasts made shortly
before and during it under-predict the realised rates. To keep the full-sample average error equal
to the premium above, the burst is paid back by a drift of negative shocks of the same total size over
the 900 days that start four months after it (an easing cycle that is also "faster than expected").
The model is linear in its shocks and a shock's effect on a later rate depends only on the time
between them, so a set of shocks summing to zero adds nothing to the mean error of a horizon whose
as-of dates all lie inside the sample; the burst sits five years in so that this holds for forward
starts up to 5Y (measured: under 0.1 bp for the demo's forwards). What the episode does add is
variance: errors are large and serially correlated around 2000-2004, which widens the HAC band of the
audit, and sub-windows covering only the tightening (or only the easing) show a mean error far from
the formula.

Approximations to keep in mind when comparing with an audit of the built curves: the formula works in
year fractions ``months * 30.4375 / 365`` where the audit works on rolled calendar dates (a few days'
difference, a small fraction of a basis point); the audit rebuilds the government zero curve from
rounded par yields by interpolation; and an audit in the curve's own compounding scales the error by
``d r_m / d r_cc = exp(r / m)`` (about 2.5 % more for semiannual at 5 %), which
``expected_forward_error_bp(..., compounding=...)`` applies to first order.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.signal import lfilter

from pipeline.dates import as_days, year_fraction
from pipeline.demo.orvane import CURVES

_YEAR_DAYS = 365.0  # model time is calendar days / 365 (the ACT/365F year fraction)
_MONTH_DAYS = 30.4375  # mean calendar days in a month, for the months -> years approximation


@dataclass(frozen=True)
class Episode:
    """The tightening burst and the easing drift that pays it back (calendar-day ranges, inclusive)."""

    tightening_start: np.datetime64 = np.datetime64("2001-02-15")
    tightening_days: int = 150
    rise: float = 0.040  # total push on the slope factor, decimal
    easing_gap_days: int = 120  # calm between the end of the burst and the start of the drift
    easing_days: int = 900

    @property
    def tightening_end(self) -> np.datetime64:
        return self.tightening_start + np.timedelta64(self.tightening_days - 1, "D")

    @property
    def easing_start(self) -> np.datetime64:
        return self.tightening_end + np.timedelta64(self.easing_gap_days + 1, "D")

    @property
    def easing_end(self) -> np.datetime64:
        return self.easing_start + np.timedelta64(self.easing_days - 1, "D")

    def drift(self, days: np.ndarray) -> np.ndarray:
        """Mean of the slope shock on each calendar day of ``days``; sums to zero over the episode."""
        up = (days >= self.tightening_start) & (days <= self.tightening_end)
        down = (days >= self.easing_start) & (days <= self.easing_end)
        return up * (self.rise / self.tightening_days) - down * (self.rise / self.easing_days)


@dataclass(frozen=True)
class ModelParams:
    """Parameters of the factor model (decimals, years). Defaults give rates of roughly 1 %-9 %."""

    mu_level: float = 0.050
    mu_slope: float = -0.010
    mu_curv: float = 0.0
    k_level: float = 0.03
    lam: float = 0.60
    vol_level: float = 0.0050
    vol_slope: float = 0.0080
    vol_curv: float = 0.0100
    corr_level_slope: float = -0.30
    corr_slope_curv: float = 0.20
    start: tuple[float, float, float] = (0.055, -0.015, 0.0)
    # swap spread factor
    mu_spread: float = 0.0030
    k_spread: float = 0.40
    vol_spread: float = 0.0015
    start_spread: float = 0.0025
    # premiums: tp(tau) = tp_a (1 - exp(-tau / tp_b)); sp(tau) likewise for the swap spread
    tp_a: float = 0.0160
    tp_b: float = 4.0
    sp_a: float = 0.0008
    sp_b: float = 3.0
    episode: Episode = field(default_factory=Episode)

    @property
    def mu_short(self) -> float:
        return self.mu_level + self.mu_slope


DEFAULT_PARAMS = ModelParams()


def _b(k: float, tau: np.ndarray) -> np.ndarray:
    """``(1 - e^{-k tau}) / (k tau)``, equal to 1 at ``tau = 0``."""
    x = k * np.asarray(tau, dtype=float)
    safe = np.where(x == 0.0, 1.0, x)
    return np.where(x == 0.0, 1.0, -np.expm1(-safe) / safe)


def term_premium(tau: object, params: ModelParams = DEFAULT_PARAMS) -> np.ndarray:
    """Government term premium ``tp(tau)`` in the zero rate: decimal, continuous, ``tau`` in years."""
    t = np.asarray(tau, dtype=float)
    return params.tp_a * -np.expm1(-t / params.tp_b)


def spread_premium(tau: object, params: ModelParams = DEFAULT_PARAMS) -> np.ndarray:
    """Extra premium of the swap zero rate over the government one: decimal, continuous, years."""
    t = np.asarray(tau, dtype=float)
    return params.sp_a * -np.expm1(-t / params.sp_b)


def _premium(tau: np.ndarray, curve: str, params: ModelParams) -> np.ndarray:
    if curve == "govt":
        return term_premium(tau, params)
    if curve == "swap":
        return term_premium(tau, params) + spread_premium(tau, params)
    raise ValueError(f"unknown demo curve {curve!r}; allowed: {', '.join(CURVES)}")


def expected_forward_error_bp(
    start_months: float,
    tenor_months: float,
    *,
    curve: str = "govt",
    compounding: str = "continuous",
    level: float | None = None,
    params: ModelParams = DEFAULT_PARAMS,
) -> float:
    """Mean error (forward minus realised zero rate, bp) that the demo model builds into a forward.

    ``start_months`` ``S`` and ``tenor_months`` ``M`` are converted to years as
    ``months * 30.4375 / 365``. The result is
    ``[(S+M) p(S+M) - S p(S)] / M - p(M)`` with ``p`` the curve's premium (:func:`term_premium`, plus
    :func:`spread_premium` for ``"swap"``), expressed as a continuously compounded rate on the
    curve's own day count (ACT/365F for ``govt``; ACT/360 for ``swap``, i.e. times 360/365).

    ``compounding`` other than ``"continuous"`` (``annual``, ``semiannual``, ``quarterly``,
    ``monthly``) scales the figure by ``exp(level / m)``, the first-order change of an
    ``m``-times-compounded rate per unit of continuous rate, at ``level`` (a decimal continuous rate;
    default: the model's long-run mean zero rate for tenor ``M``). Exact for the continuous basis up
    to the months-to-years approximation; the other bases are good to a fraction of a basis point.
    """
    freq = {"continuous": None, "annual": 1, "semiannual": 2, "quarterly": 4, "monthly": 12}
    if compounding not in freq:
        raise ValueError(f"unknown compounding {compounding!r}; allowed: {', '.join(freq)}")
    if tenor_months <= 0 or start_months < 0:
        raise ValueError("tenor_months must be > 0 and start_months >= 0")
    s = start_months * _MONTH_DAYS / _YEAR_DAYS
    m = tenor_months * _MONTH_DAYS / _YEAR_DAYS

    def p(tau: float) -> float:
        return float(_premium(np.asarray(tau), curve, params))

    err = ((s + m) * p(s + m) - s * p(s)) / m - p(m)
    basis = 360.0 / 365.0 if curve == "swap" else 1.0
    err *= basis
    n = freq[compounding]
    if n is not None:
        if level is None:
            mean = params.mu_short + p(m) + (params.mu_spread if curve == "swap" else 0.0)
            level = mean * basis
        err *= float(np.exp(level / n))
    return err * 1e4


@dataclass(frozen=True)
class Factors:
    """Each factor's distance from its mean on each day: arrays ``(N,)`` of decimals."""

    level: np.ndarray
    slope: np.ndarray
    curv: np.ndarray
    spread: np.ndarray


def _ar1(shocks: np.ndarray, a: float, start: float) -> np.ndarray:
    """``x[n] = a x[n-1] + shocks[n]`` with ``x[-1] = start``."""
    y, _ = lfilter([1.0], [1.0, -a], shocks, zi=[a * start])
    return y


def simulate_factors(days: np.ndarray, rng: np.random.Generator, params: ModelParams) -> Factors:
    """Exact daily discretisation of the factor process on consecutive calendar ``days``.

    The conditional mean of each step is exact (``e^{-K h}``), which is what keeps the model's
    expectation honest; the shock covariance uses the ``Sigma Sigma' h`` approximation, of no
    consequence for the mean. Returns the factors' distances from their means.
    """
    h = 1.0 / _YEAR_DAYS
    n = days.size
    corr = np.array([
        [1.0, params.corr_level_slope, 0.0],
        [params.corr_level_slope, 1.0, params.corr_slope_curv],
        [0.0, params.corr_slope_curv, 1.0],
    ])
    z = rng.standard_normal((n, 4))
    eps = z[:, :3] @ np.linalg.cholesky(corr).T
    eps *= np.sqrt(h) * np.array([params.vol_level, params.vol_slope, params.vol_curv])
    eps_q = z[:, 3] * params.vol_spread * np.sqrt(h)

    a_l = np.exp(-params.k_level * h)
    a = np.exp(-params.lam * h)
    l0, s0, c0 = params.start
    level = _ar1(eps[:, 0], a_l, l0 - params.mu_level)
    curv = _ar1(eps[:, 2], a, c0 - params.mu_curv)
    curv_prev = np.concatenate([[c0 - params.mu_curv], curv[:-1]])
    # the slope is pulled towards the curvature: s' = e^{-lam h} (s + lam h c) + shock
    slope_in = a * params.lam * h * curv_prev + eps[:, 1] + params.episode.drift(days)
    slope = _ar1(slope_in, a, s0 - params.mu_slope)
    spread = _ar1(eps_q, np.exp(-params.k_spread * h), params.start_spread - params.mu_spread)
    return Factors(level, slope, curv, spread)


class DemoModel:
    """The generated factor paths and the zero curves they imply, for ``N`` as-of days.

    ``zero_cc`` and ``discount`` take year fractions / dates of shape ``(N, K)`` (or ``(N,)`` for one
    point a day) aligned with :attr:`as_of` and return continuous zero rates (decimal, ACT/365F
    year fractions) or discount factors of the same shape.
    """

    def __init__(self, as_of: np.ndarray, factors: Factors, params: ModelParams) -> None:
        self.as_of = as_of
        self.factors = factors
        self.params = params

    def _col(self, x: np.ndarray, ndim: int) -> np.ndarray:
        return x if ndim == 1 else x.reshape((-1,) + (1,) * (ndim - 1))

    def zero_cc(self, tau: np.ndarray, curve: str = "govt") -> np.ndarray:
        """Continuous zero rates (decimal) for year fractions ``tau`` (ACT/365F) from each as-of day."""
        p, f = self.params, self.factors
        t = np.asarray(tau, dtype=float)
        nd = t.ndim
        b_lam = _b(p.lam, t)
        z = (
            p.mu_short
            + self._col(f.level, nd) * _b(p.k_level, t)
            + self._col(f.slope, nd) * b_lam
            + self._col(f.curv, nd) * (b_lam - np.exp(-p.lam * t))
        )
        if curve == "swap":
            z = z + p.mu_spread + self._col(f.spread, nd) * _b(p.k_spread, t)
        return z + _premium(t, curve, p)

    def tau(self, dates: np.ndarray) -> np.ndarray:
        """ACT/365F year fractions from each as-of day to ``dates`` (rows aligned with as-of)."""
        d = as_days(dates)
        return year_fraction(self._col(self.as_of, d.ndim), d, "ACT/365F")

    def discount(self, dates: np.ndarray, curve: str = "govt") -> np.ndarray:
        """Discount factors to ``dates`` from each as-of day on ``curve`` (``govt`` or ``swap``)."""
        t = self.tau(dates)
        return np.exp(-self.zero_cc(t, curve) * t)

    def short_rate(self) -> np.ndarray:
        """Instantaneous short rate ``L + S`` on each day (decimal, continuous)."""
        return self.params.mu_short + self.factors.level + self.factors.slope
