"""The invented demo market: thirty years of rate curves from the Republic of Orvane.

Everything here is fiction. Orvane is an island republic that does not exist; its currency is the
orv (code ``ORV``), its sovereign issuer is the Orvane National Treasury, and its swap market fixes
against the Orvane Harbour Rate, published by an imaginary panel of island banks. Two curves are
generated, one per business day of the Orvane calendar (Saturdays, Sundays and four fixed holidays),
from 1996-01-02 to 2025-12-31:

``govt``
    Treasury par yields: semiannual coupons, ACT/365F, tenors 1M-30Y, delivered in percent.
``swap``
    Harbour-rate swap zero rates: annual compounding, ACT/360, tenors 1W-30Y, delivered as decimals.

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

Purity: every function returns frames, arrays or bytes, except :func:`write_demo_inbox`, the one
function that writes files (to the directory it is given).
"""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
from scipy.signal import lfilter

from pipeline.dates import BusinessCalendar, add_months, as_days, maturity_dates, year_fraction
from pipeline.tenors import parse_tenor

__all__ = [
    "CURRENCY",
    "COUNTRY",
    "DEFAULT_SEED",
    "GOVT_TENORS",
    "HOLIDAYS",
    "ISSUER",
    "RATE_PANEL",
    "SWAP_TENORS",
    "Defect",
    "DemoManifest",
    "DemoMarket",
    "DemoModel",
    "Episode",
    "ModelParams",
    "demo_calendar",
    "demo_config_toml",
    "demo_holidays",
    "expected_forward_error_bp",
    "generate_market",
    "par_yields",
    "render_feed",
    "spread_premium",
    "term_premium",
    "write_demo_inbox",
]

COUNTRY = "Republic of Orvane"
CURRENCY = "Orvane orv (ORV)"
ISSUER = "Orvane National Treasury"
RATE_PANEL = "Orvane Harbour Rate panel"

# Any seed gives the same model; this one was picked among the first few dozen because its path tells
# the demo's story cleanly: the 2001 tightening inverts the curve for about a year, other inversions
# are short, rates stay within 1 %-9.5 %, and the sample's mean errors sit well inside their HAC bands.
DEFAULT_SEED = 21
FIRST_DAY = "1996-01-01"
LAST_DAY = "2025-12-31"
#: fixed-date holidays (month-day, name); a holiday on a weekend is simply not moved
HOLIDAYS = (
    ("01-01", "New Year's Day"),
    ("03-21", "Landing Day"),
    ("06-18", "Charter Day"),
    ("11-05", "Lantern Night"),
)
#: holidays are listed far enough ahead to roll 30-year maturities from the last as-of date
HOLIDAY_YEARS = (1996, 2057)

GOVT_TENORS = ("1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y")
SWAP_TENORS = ("1W", "1M", "3M", "6M", "1Y", "2Y", "3Y", "4Y", "5Y", "7Y", "10Y", "15Y", "20Y", "30Y")
CURVES = ("govt", "swap")

_YEAR_DAYS = 365.0  # model time is calendar days / 365 (the ACT/365F year fraction)
_MONTH_DAYS = 30.4375  # mean calendar days in a month, for the months -> years approximation


# --- calendar -------------------------------------------------------------------------------------

def demo_holidays(first_year: int = HOLIDAY_YEARS[0], last_year: int = HOLIDAY_YEARS[1]) -> np.ndarray:
    """Orvane's fixed holidays for every year in ``[first_year, last_year]`` (``datetime64[D]``, sorted)."""
    years = np.arange(first_year, last_year + 1)
    days = [np.array([f"{y:04d}-{md}" for y in years], dtype="datetime64[D]") for md, _ in HOLIDAYS]
    return np.sort(np.concatenate(days))


def demo_calendar() -> BusinessCalendar:
    """The Orvane business-day calendar: Saturday and Sunday off, plus :func:`demo_holidays`."""
    return BusinessCalendar.of(("Sat", "Sun"), list(demo_holidays()))


# --- model ----------------------------------------------------------------------------------------

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
class _Factors:
    """Each factor's distance from its mean on each day: arrays ``(N,)`` of decimals."""

    level: np.ndarray
    slope: np.ndarray
    curv: np.ndarray
    spread: np.ndarray


def _ar1(shocks: np.ndarray, a: float, start: float) -> np.ndarray:
    """``x[n] = a x[n-1] + shocks[n]`` with ``x[-1] = start``."""
    y, _ = lfilter([1.0], [1.0, -a], shocks, zi=[a * start])
    return y


def _simulate(days: np.ndarray, rng: np.random.Generator, params: ModelParams) -> _Factors:
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
    return _Factors(level, slope, curv, spread)


class DemoModel:
    """The generated factor paths and the zero curves they imply, for ``N`` as-of days.

    ``zero_cc`` and ``discount`` take year fractions / dates of shape ``(N, K)`` (or ``(N,)`` for one
    point a day) aligned with :attr:`as_of` and return continuous zero rates (decimal, ACT/365F
    year fractions) or discount factors of the same shape.
    """

    def __init__(self, as_of: np.ndarray, factors: _Factors, params: ModelParams) -> None:
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


def par_yields(
    as_of: np.ndarray,
    tenor: str,
    calendar: BusinessCalendar,
    discount: Callable[[np.ndarray], np.ndarray],
    *,
    frequency: int = 2,
    day_count: str = "ACT/365F",
) -> np.ndarray:
    """Par yields (decimal, compounded ``frequency`` times a year) for one tenor on every as-of day.

    Follows the contract's convention: coupon dates step back from the unadjusted maturity
    ``as_of + tenor`` by ``12/frequency`` months and are rolled (modified following on
    ``calendar``); regular coupons pay ``c/frequency``; a short first period pays ``c`` times its
    ``day_count`` year fraction (as-of date to first coupon date). The first period is short when
    stepping back from the unadjusted maturity does not land exactly on the as-of date: for a tenor
    that is not a whole number of periods, and also when the maturity's day was clipped to a month's
    end (an as-of date of 29 February with a whole-year tenor), as QuantLib's backward schedule
    flags it. A tenor of one coupon period or less is a single payment, ``D = (1 + c/m)^(-m tau)``.

    ``discount(dates)`` takes an array ``(N, K)`` of payment dates aligned with ``as_of`` ``(N,)``
    and returns their discount factors. Returns an array ``(N,)``.
    """
    t = as_days(as_of)
    months = parse_tenor(tenor).months
    if months is None:
        raise ValueError(f"par tenor {tenor!r} must be a whole number of months")
    step = 12 // frequency
    unadjusted = add_months(t, months)
    maturity = calendar.roll(unadjusted)
    if months <= step:
        tau = year_fraction(t, maturity, day_count)
        d = discount(maturity[:, None])[:, 0]
        return frequency * (d ** (-1.0 / (frequency * tau)) - 1.0)
    n = -(-months // step)  # coupons: every step back that stays after the as-of date
    back = add_months(unadjusted[:, None], -step * np.arange(n + 1)[None, :])  # (N, n+1), latest first
    pay = calendar.roll(back[:, :n])
    accrual = np.full(pay.shape, 1.0 / frequency)
    short = back[:, n] < t  # the step before the first coupon falls before the as-of date
    first = year_fraction(t, pay[:, n - 1], day_count)
    accrual[:, n - 1] = np.where(short, first, 1.0 / frequency)
    d = discount(pay)
    return (1.0 - d[:, 0]) / np.sum(accrual * d, axis=1)


@dataclass(frozen=True)
class DemoMarket:
    """The clean generated market (no feed defects).

    ``quotes[curve]``: as-of (index, ``datetime64``) x tenor label, decimals as the feed quotes them
    (``govt`` par yields, semiannual ACT/365F; ``swap`` zero rates, annual ACT/360), unrounded.
    ``zero_cc[curve]``: the model's continuous zero rates at each tenor's rolled maturity, ACT/365F.
    ``maturities[curve]``: those maturity dates (``datetime64[D]``, shape as the frames).
    """

    seed: int
    params: ModelParams
    calendar: BusinessCalendar
    days: np.ndarray
    model: DemoModel
    quotes: dict[str, pd.DataFrame]
    zero_cc: dict[str, pd.DataFrame]
    maturities: dict[str, np.ndarray]

    @property
    def episode(self) -> Episode:
        return self.params.episode


def generate_market(
    seed: int = DEFAULT_SEED,
    params: ModelParams = DEFAULT_PARAMS,
    first_day: str = FIRST_DAY,
    last_day: str = LAST_DAY,
) -> DemoMarket:
    """Simulate the Orvane market on every business day in ``[first_day, last_day]``.

    Deterministic for ``seed`` (a ``numpy.random.Generator``). Vectorised over days: the factor
    recursion runs in ``scipy.signal.lfilter``; curves are closed-form in the factors.
    """
    cal = demo_calendar()
    calendar_days = np.arange(as_days(first_day), as_days(last_day) + np.timedelta64(1, "D"))
    factors = _simulate(calendar_days, np.random.default_rng(seed), params)
    keep = cal.is_business_day(calendar_days)
    days = calendar_days[keep]
    picked = _Factors(*(getattr(factors, k)[keep] for k in ("level", "slope", "curv", "spread")))
    model = DemoModel(days, picked, params)
    index = pd.DatetimeIndex(days, name="as_of")

    quotes: dict[str, pd.DataFrame] = {}
    zeros: dict[str, pd.DataFrame] = {}
    mats: dict[str, np.ndarray] = {}
    for curve, tenors in (("govt", GOVT_TENORS), ("swap", SWAP_TENORS)):
        m = np.stack([maturity_dates(days, x, cal) for x in tenors], axis=1)
        z = model.zero_cc(model.tau(m), curve)
        mats[curve] = m
        zeros[curve] = pd.DataFrame(z, index=index, columns=list(tenors))
    # swap zero rates, annual ACT/360: (1 + r)^(-d/360) = exp(-z d/365)  =>  r = e^{z 360/365} - 1
    quotes["swap"] = pd.DataFrame(np.expm1(zeros["swap"].to_numpy() * 360.0 / 365.0), index=index,
                                  columns=list(SWAP_TENORS))
    par = np.stack([par_yields(days, x, cal, lambda d: model.discount(d, "govt")) for x in GOVT_TENORS],
                   axis=1)
    quotes["govt"] = pd.DataFrame(par, index=index, columns=list(GOVT_TENORS))
    return DemoMarket(seed, params, cal, days, model, quotes, zeros, mats)


# --- the feed: files with defects -----------------------------------------------------------------

@dataclass(frozen=True)
class Defect:
    """One deliberate defect in the delivered files.

    ``file`` is the file name inside the inbox; ``line`` the 1-based line number in it (the header is
    line 1; ``None`` when the defect is an absence); values are in the file's units (percent for
    ``govt``). Kinds:

    - ``missing_day``: a business day absent from ``govt`` (still present in ``swap``);
    - ``wrong_units``: a cell 10x its true value, still inside a -5 %..40 % band (only a jump or
      outlier check sees it);
    - ``out_of_range``: a cell 100x its true value;
    - ``duplicate_row``: a line repeated verbatim on the next line (its text in ``written_value``);
    - ``conflicting_duplicate``: a day sent again at the end of its file with one tenor changed
      (``true_value`` is the first copy's, ``written_value`` the second's);
    - ``garbled_line``: an extra unreadable line (its text in ``written_value``);
    - ``restated_value``: a wrong first publication of one tenor; ``restatement``: the line of the
      later restatement file that corrects it (both values are the true one);
    - ``stale_curve``: the whole curve copied from the previous business day;
    - ``missing_tenor``: an empty cell.
    """

    kind: str
    file: str
    line: int | None
    date: dt.date | None
    tenor: str | None
    true_value: float | None
    written_value: float | str | None
    note: str = ""


# target dates of the defects (each rolled to the next business day), well apart from each other
_DEFECT_DATES = {
    "wrong_units": "2003-03-03",  # where the search for a suitable cell starts
    "garbled_line": "2003-07-15",
    "missing_day": "2004-03-10",
    "duplicate_row": "2007-11-14",
    "restated_value": "2009-06-16",
    "stale_curve": "2015-02-18",
    "conflicting_duplicate": "2017-08-23",
    "missing_tenor": "2019-05-22",
    "out_of_range": "2021-11-17",
}
_RESTATED = {"2Y": 0.0725, "5Y": -0.0410, "10Y": 0.1180}  # percent added to the first publication
_MISSING_TENOR = "7Y"
_CONFLICT = ("3Y", 0.0250)  # tenor and percent added in the second copy of the line
_OUT_OF_RANGE = ("20Y", 100.0)  # tenor and factor: a percent figure multiplied by 100 again
_UNITS_FACTOR = 10.0
_UNITS_BAND = (1.5, 3.0)  # percent: ten times this is 15 %-30 %, inside any plausible-rate band


def _iso(day: np.datetime64) -> str:
    return str(as_days(day))


def _pydate(day: np.datetime64) -> dt.date:
    return dt.date.fromisoformat(_iso(day))


def _month_slices(days: np.ndarray) -> list[tuple[str, slice]]:
    """``(YYYY-MM, slice)`` for each run of one month in the sorted ``days``."""
    months = days.astype("datetime64[M]")
    starts = np.flatnonzero(np.r_[True, months[1:] != months[:-1]])
    ends = np.r_[starts[1:], days.size]
    return [(str(months[s]), slice(s, e)) for s, e in zip(starts, ends, strict=True)]


def _units_cell(values: np.ndarray, start: int, taken: set[int]) -> tuple[int, int]:
    """First (row, tenor) from row ``start`` whose value lies in :data:`_UNITS_BAND`.

    Ten times such a value still looks like a rate, so a plausible-band check passes it and only a
    day-on-day jump or cross-tenor outlier check can catch it.
    """
    ok = (values[start:] >= _UNITS_BAND[0]) & (values[start:] <= _UNITS_BAND[1])
    ok[[i - start for i in taken if i >= start], :] = False
    hits = np.argwhere(ok)
    if hits.size == 0:  # no such cell: the first cell is still a units error, only a bigger one
        return start, 0
    return start + int(hits[0, 0]), int(hits[0, 1])


def render_feed(market: DemoMarket) -> tuple[dict[str, bytes], tuple[Defect, ...]]:
    """The inbox files as bytes (name -> content, sorted by name) and the defects planted in them.

    ``govt_YYYY-MM.csv``: wide, header ``date,1M,...,30Y``, ISO dates, percent with 4 decimals,
    ``\\n`` line ends. ``govt_restatement_YYYY-MM-DD.csv``: the same layout, one restated day, named by
    its publication date (a week after the end of the month it corrects). ``swap_YYYY-MM.parquet``:
    long, columns ``date`` (date32), ``tenor`` (string), ``rate`` (float64, decimal, rounded to
    1e-8), ``curve`` (string ``"swap"``). Only the ``govt`` files carry defects (see :class:`Defect`).
    """
    cal = market.calendar
    days = market.days
    n = days.size
    tenors = list(GOVT_TENORS)
    col = {t: j for j, t in enumerate(tenors)}
    pct = np.round(market.quotes["govt"].to_numpy() * 100.0, 4)
    cells = np.char.mod("%.4f", pct).astype(object)
    pos = {kind: int(np.searchsorted(days, cal.roll(np.datetime64(d), "following")))
           for kind, d in _DEFECT_DATES.items()}
    on_row: list[tuple[int, Defect]] = []  # defects inside an existing line: (row, defect)

    def mark(kind: str, i: int, tenor: str | None, true: float | None, written: float | str | None,
             note: str) -> Defect:
        return Defect(kind, "", None, _pydate(days[i]), tenor, true, written, note)

    i = pos["restated_value"]  # the first publication is wrong in a few tenors
    for t, delta in _RESTATED.items():
        written = round(float(pct[i, col[t]]) + delta, 4)
        cells[i, col[t]] = f"{written:.4f}"
        on_row.append((i, mark("restated_value", i, t, float(pct[i, col[t]]), written,
                               "first publication; corrected by the restatement file")))
    i = pos["stale_curve"]  # yesterday's curve sent again
    cells[i, :] = cells[i - 1, :]
    on_row.append((i, mark("stale_curve", i, None, None, None, f"all tenors copied from {_iso(days[i - 1])}")))
    i, j = pos["missing_tenor"], col[_MISSING_TENOR]
    cells[i, j] = ""
    on_row.append((i, mark("missing_tenor", i, _MISSING_TENOR, float(pct[i, j]), None, "empty cell")))
    t, factor = _OUT_OF_RANGE
    i, j = pos["out_of_range"], col[t]
    written = round(float(pct[i, j]) * factor, 4)
    cells[i, j] = f"{written:.4f}"
    on_row.append((i, mark("out_of_range", i, t, float(pct[i, j]), written,
                           f"{factor:g}x the true value, outside any plausible band")))
    taken = set(pos.values()) | {pos["stale_curve"] - 1}
    i, j = _units_cell(pct, pos["wrong_units"], taken - {pos["wrong_units"]})
    written = round(float(pct[i, j]) * _UNITS_FACTOR, 4)
    cells[i, j] = f"{written:.4f}"
    on_row.append((i, mark("wrong_units", i, tenors[j], float(pct[i, j]), written,
                           f"{_UNITS_FACTOR:g}x the true value, still inside a plausible band")))

    lines = days.astype(str).astype(object)
    for j in range(len(tenors)):  # a loop over tenors: each step appends one column for all days
        lines = lines + "," + cells[:, j]

    # extra lines: (insert before this row position, duplicated row, text, defect)
    extras: list[tuple[int, int, str, Defect]] = []
    i = pos["duplicate_row"]
    extras.append((i + 1, i, lines[i], mark("duplicate_row", i, None, None, lines[i],
                                            "the line repeated verbatim on the next line")))
    i = pos["garbled_line"]
    garbled = f"{_iso(days[i])[:-1]}?,{cells[i, 0][:3]},abc,,,"
    extras.append((i + 1, i, garbled, mark("garbled_line", i, None, None, garbled,
                                           "an unreadable copy of the line before it")))
    i = pos["conflicting_duplicate"]
    t, delta = _CONFLICT
    other = cells[i].copy()
    second = round(float(pct[i, col[t]]) + delta, 4)
    other[col[t]] = f"{second:.4f}"
    month_end = int(np.searchsorted(days, (days[i].astype("datetime64[M]") + 1).astype("datetime64[D]")))
    extras.append((month_end, i, ",".join([_iso(days[i]), *other]),
                   mark("conflicting_duplicate", i, t, float(pct[i, col[t]]), second,
                        "the day sent again at the end of its file with one tenor changed")))

    before = np.array([e[0] for e in extras])
    text = np.insert(lines, before, np.array([e[2] for e in extras], dtype=object))
    origin = np.insert(np.arange(n), before, np.array([e[1] for e in extras]))
    tag = np.insert(np.full(n, -1), before, np.arange(len(extras)))
    gone = pos["missing_day"]
    keep = origin != gone
    text, origin, tag = text[keep], origin[keep], tag[keep]
    month = days.astype("datetime64[M]")[origin]

    files: dict[str, bytes] = {}
    header = "date," + ",".join(tenors)
    first_pos: dict[str, int] = {}
    for m, sl in _month_slices(month.astype("datetime64[D]")):  # one file per month
        files[f"govt_{m}.csv"] = (header + "\n" + "\n".join(text[sl]) + "\n").encode("ascii")
        first_pos[m] = sl.start

    def place(p: int, d: Defect) -> Defect:
        m = str(month[p])
        return replace(d, file=f"govt_{m}.csv", line=int(p - first_pos[m] + 2))

    row_pos = np.full(n, -1)
    normal = tag == -1
    row_pos[origin[normal]] = np.flatnonzero(normal)
    placed = [place(int(row_pos[i]), d) for i, d in on_row]
    placed += [place(int(np.flatnonzero(tag == k)[0]), e[3]) for k, e in enumerate(extras)]
    gone_month = str(days[gone].astype("datetime64[M]"))
    placed.append(replace(mark("missing_day", gone, None, None, None, "the whole day is absent"),
                          file=f"govt_{gone_month}.csv"))

    i = pos["restated_value"]  # the restatement, a week after the end of the month it corrects
    next_month = (days[i].astype("datetime64[M]") + 1).astype("datetime64[D]")
    published = cal.roll(next_month + np.timedelta64(7, "D"), "following")
    rname = f"govt_restatement_{_iso(published)}.csv"
    files[rname] = (header + "\n" + ",".join([_iso(days[i]), *np.char.mod("%.4f", pct[i])]) + "\n").encode()
    for t in _RESTATED:
        true = float(pct[i, col[t]])
        placed.append(replace(mark("restatement", i, t, true, true, f"restates {_iso(days[i])}"),
                              file=rname, line=2))

    files.update(_swap_files(market))
    order = {k: n for n, k in enumerate(_DEFECT_DATES)}
    placed.sort(key=lambda d: (d.date or dt.date.min, order.get(d.kind, 99), d.file, d.tenor or ""))
    return dict(sorted(files.items())), tuple(placed)


def _swap_files(market: DemoMarket) -> dict[str, bytes]:
    days = market.days
    k = len(SWAP_TENORS)
    rates = np.round(market.quotes["swap"].to_numpy(), 8)
    table = pa.table({
        "date": pa.array(np.repeat(days, k), type=pa.date32()),
        "tenor": pa.array(np.tile(np.array(SWAP_TENORS, dtype=object), days.size), type=pa.string()),
        "rate": pa.array(rates.ravel(), type=pa.float64()),
        "curve": pa.array(np.full(days.size * k, "swap", dtype=object), type=pa.string()),
    })
    out = {}
    for month, sl in _month_slices(days):
        sink = io.BytesIO()
        pq.write_table(table.slice(sl.start * k, (sl.stop - sl.start) * k), sink)
        out[f"swap_{month}.parquet"] = sink.getvalue()
    return out


# --- configuration and delivery -------------------------------------------------------------------

def _toml_dates(dates: np.ndarray, per_line: int = len(HOLIDAYS)) -> str:
    items = [f'"{_iso(d)}"' for d in dates]
    rows = [", ".join(items[i:i + per_line]) for i in range(0, len(items), per_line)]
    return "[\n    " + ",\n    ".join(rows) + ",\n]"


def demo_config_toml(
    *,
    store: str = "afterward.duckdb",
    inbox: str = "inbox",
    loaded: str = "inbox/loaded",
    refused: str = "inbox/refused",
) -> str:
    """The ``afterward.toml`` text for the demo folder (paths relative to that folder).

    Both curves share the Orvane calendar; the holidays are listed from 1996 to 2057 so that 30-year
    maturities from the last as-of date roll on the same calendar.
    """
    holidays = _toml_dates(demo_holidays())
    names = ", ".join(f"{name} ({md})" for md, name in HOLIDAYS)

    def curve(name: str, files: str, quote: str, comp: str, dc: str, units: str, interp: str,
              tenors: tuple[str, ...], about: str) -> str:
        labels = ", ".join(f'"{t}"' for t in tenors)
        return f"""
# {about}
[curves.{name}]
files = "{files}"
quote = "{quote}"
compounding = "{comp}"
day_count = "{dc}"
units = "{units}"
interpolation = "{interp}"
tenors = [{labels}]
frequency = "daily"
calendar.weekend = ["Sat", "Sun"]
calendar.holidays = {holidays}
forward.starts = ["0M", "3M", "6M", "1Y", "2Y", "3Y", "5Y"]
forward.tenors = ["3M", "1Y", "2Y", "5Y"]
realize.tolerance_days = 3
checks.jump_bp = 75
checks.inversion_pairs = [["3M", "10Y"], ["2Y", "10Y"]]
"""

    head = f"""# afterward demo: the {COUNTRY}, an invented island market (currency: {CURRENCY}).
# Every name and number here is fiction, generated by a seeded three-factor model.
# Holidays (fixed dates, not moved when they fall on a weekend): {names}.

[store]
path = "{store}"

[inbox]
path = "{inbox}"
loaded = "{loaded}"
refused = "{refused}"
"""
    return head + curve(
        "govt", "govt_*.csv", "par", "semiannual", "ACT/365F", "percent", "monotone_convex", GOVT_TENORS,
        f"{ISSUER}: par yields of its bonds, semiannual coupons, in percent",
    ) + curve(
        "swap", "swap_*.parquet", "zero", "annual", "ACT/360", "decimal", "linear_zero", SWAP_TENORS,
        f"Swaps against the {RATE_PANEL}: zero rates, annual compounding, as decimals",
    )


@dataclass(frozen=True)
class DemoManifest:
    """What :func:`write_demo_inbox` delivered.

    ``files``: every path written (sorted by name). ``defects``: each planted defect, placed.
    ``premium(start_months, tenor_months, *, curve=..., ...)``: :func:`expected_forward_error_bp`.
    ``clean``: the defect-free quotes per curve (as-of x tenor, decimals, unrounded);
    ``zero_cc``: the model's continuous zero rates per curve (as-of x tenor, ACT/365F).
    """

    directory: Path
    files: tuple[Path, ...]
    defects: tuple[Defect, ...]
    seed: int
    curves: tuple[str, ...]
    premium: Callable[..., float]
    market: DemoMarket
    restatement_file: Path

    @property
    def clean(self) -> dict[str, pd.DataFrame]:
        return self.market.quotes

    @property
    def zero_cc(self) -> dict[str, pd.DataFrame]:
        return self.market.zero_cc

    def files_for(self, curve: str) -> tuple[Path, ...]:
        return tuple(p for p in self.files if p.name.startswith(f"{curve}_"))

    def defects_of(self, kind: str) -> tuple[Defect, ...]:
        return tuple(d for d in self.defects if d.kind == kind)


def write_demo_inbox(directory: Path, seed: int = DEFAULT_SEED) -> DemoManifest:
    """Generate the market and write its files into ``directory`` (created if needed).

    The only function of this module that touches the file system. Existing files of the same names
    are overwritten; nothing else in the directory is touched.
    """
    market = generate_market(seed)
    files, defects = render_feed(market)
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, content in files.items():
        path = directory / name
        path.write_bytes(content)
        paths.append(path)
    restatement = next(p for p in paths if p.name.startswith("govt_restatement_"))
    return DemoManifest(directory, tuple(paths), defects, seed, CURVES, expected_forward_error_bp, market,
                        restatement)
