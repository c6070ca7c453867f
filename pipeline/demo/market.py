"""The generated market: the model's paths on every business day, priced into the quotes the feed
delivers (government par yields, swap zero rates)."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.dates import BusinessCalendar, add_months, as_days, maturity_dates, year_fraction
from pipeline.demo.model import DEFAULT_PARAMS, DemoModel, Episode, Factors, ModelParams, simulate_factors
from pipeline.demo.orvane import DEFAULT_SEED, FIRST_DAY, GOVT_TENORS, LAST_DAY, SWAP_TENORS, demo_calendar
from pipeline.tenors import parse_tenor


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
    factors = simulate_factors(calendar_days, np.random.default_rng(seed), params)
    keep = cal.is_business_day(calendar_days)
    days = calendar_days[keep]
    picked = Factors(*(getattr(factors, k)[keep] for k in ("level", "slope", "curv", "spread")))
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
