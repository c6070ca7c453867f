"""Par-yield bootstrap, vectorised over days x tenors, and par-bond pricing on a built curve.

Convention (CONTRACT, "par yield"): a par yield ``c`` for tenor ``T`` on a curve compounded ``m``
times a year is the coupon of a bond priced at 1 on the as-of date that pays ``c/m`` on each coupon
date and 1 at maturity. Coupon dates step back from the *unadjusted* maturity (as-of + ``T`` with
month-end clipping) by ``12/m`` months and are then rolled (modified following on the curve's
calendar). When ``T`` is not a whole number of coupon periods the first period is short and pays
``c/m * yearfrac(as_of, first coupon date) * m``. A tenor of one coupon period or less (and every
day- or week-based tenor) is a single payment: ``D(T) = (1 + c/m)^(-m * tau)``. Year fractions use
the curve's day count.

Solving: coupon dates fall between quoted maturities, so each bond's price depends on the curve's
interpolation between nodes (and, for non-local methods such as monotone convex or the cubic spline,
on later nodes too). The node log-discount factors of *all days and all tenors of a pattern* are
solved together by fixed-point iteration: build the curve from the current nodes, price every
coupon, set each node so that its bond prices exactly at par, repeat until no node moves by more
than 1e-15 in ``ln D``. Each sweep is one vectorised evaluation; the map is a strong contraction
(a node's own coupons weigh ``c/m`` each), so it converges in a few dozen sweeps at most.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from pipeline.config import CurveConfig, compounding_frequency
from pipeline.dates import BusinessCalendar, add_months, as_days, maturity_dates, year_fraction
from pipeline.tenors import Tenor, parse_tenor

__all__ = ["ParLeg", "bootstrap_par", "par_bond_prices", "par_legs", "par_yields"]

_TOL = 1e-14
_MAX_SWEEPS = 300


@dataclass(frozen=True)
class ParLeg:
    """The cash-flow times of one tenor's par bond for ``G`` days.

    ``times``: ``(G, K)`` payment times (year fractions from as-of), ascending, the last is maturity.
    ``accrual``: ``(G, K)`` coupon per unit of coupon rate paid at each time (``1/m`` for a regular
    period, the year fraction for a short first one). ``single``: a single payment
    ``D(T) = (1 + c/m)^(-m tau)`` (then ``times`` is ``(G, 1)`` and ``accrual`` unused).
    """

    tenor: Tenor
    times: np.ndarray
    accrual: np.ndarray
    single: bool


def _frequency(cfg: CurveConfig) -> int:
    m = compounding_frequency(cfg.compounding)
    if not m:
        raise ValueError(
            f"curve {cfg.name!r}: par quotes need a coupon frequency; compounding = "
            f"{cfg.compounding!r} has none (use annual, semiannual, quarterly or monthly)"
        )
    return m


def par_legs(as_of: object, tenors: Sequence[Tenor | str], calendar: BusinessCalendar, day_count: str,
             frequency: int) -> list[ParLeg]:
    """Par-bond schedules for each tenor, over all as-of dates ``(G,)`` at once."""
    d = as_days(as_of).reshape(-1)
    period = 12 // frequency
    legs = []
    for tenor in tenors:  # a handful of tenors
        t = parse_tenor(tenor)
        maturity = maturity_dates(d, t, calendar)
        if t.months is None or t.months <= period:
            tau = year_fraction(d, maturity, day_count)[:, None]
            legs.append(ParLeg(t, tau, np.full_like(tau, 1.0 / frequency), True))
            continue
        unadjusted = add_months(d, t.months)
        n_pay = -(-t.months // period)
        steps = np.arange(n_pay - 1, -1, -1) * period  # earliest coupon first
        dates = calendar.roll(add_months(unadjusted[:, None], -steps[None, :]))
        times = year_fraction(d[:, None], dates, day_count)
        accrual = np.full(times.shape, 1.0 / frequency)
        if t.months % period:
            accrual[:, 0] = times[:, 0]  # short first period: c/m * yearfrac * m
        legs.append(ParLeg(t, times, accrual, False))
    return legs


def _leg_values(ln_discount, legs: Sequence[ParLeg]) -> list[tuple[np.ndarray, np.ndarray]]:
    """``(annuity, D(T))`` per leg: the coupon annuity ``sum accrual * D`` over all payments."""
    allt = np.hstack([leg.times for leg in legs])
    dfs = np.exp(ln_discount(allt))
    out, k = [], 0
    for leg in legs:
        width = leg.times.shape[1]
        dl = dfs[:, k : k + width]
        out.append(((leg.accrual * dl).sum(axis=1), dl[:, -1]))
        k += width
    return out


def bootstrap_par(
    as_of: object,
    tenors: Sequence[Tenor | str],
    par: np.ndarray,
    cfg: CurveConfig,
    make_block,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Bootstrap par yields ``(G, n)`` (decimals, all present) into node zero rates.

    ``make_block(times, zero_cc)`` builds the curve used between nodes while solving. Returns
    ``times`` ``(G, n)``, continuous ``zero_cc`` ``(G, n)`` on ``cfg.day_count``, and ``converged``
    ``(G,)``; rows that did not converge (or whose quotes admit no positive discount factor) have
    ``converged`` False.
    """
    m = _frequency(cfg)
    par = np.asarray(par, dtype=float)
    legs = par_legs(as_of, tenors, cfg.calendar, cfg.day_count, m)
    times = np.column_stack([leg.times[:, -1] for leg in legs])
    with np.errstate(invalid="ignore", divide="ignore"):
        # single payments are exact; the par yield as a zero rate starts the others
        lnd = -m * times * np.log1p(par / m)
    multi = [j for j, leg in enumerate(legs) if not leg.single]
    g = par.shape[0]
    moved = np.zeros(g)
    if multi:
        mlegs = [legs[j] for j in multi]
        coupons = par[:, multi]
        for _ in range(_MAX_SWEEPS):
            block = make_block(times, -lnd / times)
            values = _leg_values(block.ln_discount, mlegs)
            new = lnd.copy()
            with np.errstate(invalid="ignore", divide="ignore"):
                for col, (j, leg, (annuity, d_t)) in enumerate(zip(multi, mlegs, values, strict=True)):
                    c = coupons[:, col]
                    # price = c * (annuity - a_K D_T) + (1 + c a_K) D_T = 1, solved for D_T
                    other = c * (annuity - leg.accrual[:, -1] * d_t)
                    d_new = (1.0 - other) / (1.0 + c * leg.accrual[:, -1])
                    new[:, j] = np.log(np.where(d_new > 0.0, d_new, np.nan))
            moved = np.max(np.abs(new - lnd), axis=1)
            lnd = new
            if not np.any(moved > _TOL):  # NaN rows count as settled (they fail below)
                break
    zero_cc = -lnd / times
    converged = np.all(np.isfinite(zero_cc), axis=1) & ~(moved > 1e-12)
    return times, zero_cc, converged


def par_bond_prices(curves, tenors: Sequence[Tenor | str], coupons: np.ndarray, cfg: CurveConfig) -> np.ndarray:
    """Prices ``(D, T)`` (per 1 of face) on ``curves`` of par-convention bonds paying ``coupons`` ``(D, T)``."""
    m = _frequency(cfg)
    legs = par_legs(curves.as_of, tenors, cfg.calendar, cfg.day_count, m)
    c = np.asarray(coupons, dtype=float)
    out = np.empty(c.shape)
    for j, (leg, (annuity, d_t)) in enumerate(zip(legs, _leg_values(curves.ln_discount, legs), strict=True)):
        if leg.single:
            tau = leg.times[:, 0]
            # pays (1 + c/m)^(m tau) at T for 1 today
            out[:, j] = d_t * np.exp(m * tau * np.log1p(c[:, j] / m))
        else:
            out[:, j] = c[:, j] * annuity + d_t
    return out


def par_yields(curves, tenors: Sequence[Tenor | str], cfg: CurveConfig) -> np.ndarray:
    """Par yields ``(D, T)`` (decimals) of ``curves`` under the CONTRACT convention, coupon frequency
    from ``cfg.compounding``; NaN on days not built."""
    m = _frequency(cfg)
    legs = par_legs(curves.as_of, tenors, cfg.calendar, cfg.day_count, m)
    out = np.empty((len(curves.as_of), len(legs)))
    for j, (leg, (annuity, d_t)) in enumerate(zip(legs, _leg_values(curves.ln_discount, legs), strict=True)):
        if leg.single:
            tau = leg.times[:, 0]
            with np.errstate(invalid="ignore", divide="ignore"):
                out[:, j] = m * np.expm1(-np.log(d_t) / (m * tau))
        else:
            out[:, j] = (1.0 - d_t) / annuity
    return out
