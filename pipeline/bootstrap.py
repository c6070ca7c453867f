"""Par-yield bootstrap, vectorised over days x tenors, and par-bond pricing on a built curve.

Convention (CONTRACT, "par yield"): a par yield ``c`` for tenor ``T`` on a curve with ``m``
coupons a year (``coupon_frequency``, by default the curve's compounding) is the coupon of a bond
priced at 1 on the as-of date that pays ``c/m`` on each coupon date and 1 at maturity. The zero rates
built from it are stored in the curve's compounding, whatever ``m`` is. Coupon dates step back from
the *unadjusted* maturity (spot date + ``T`` with month-end clipping; the spot date is the as-of
date unless ``spot_days`` is set) by ``12/m`` months and are then rolled (modified following on the
curve's calendar). When ``T`` is not a whole number of coupon periods the first period is short and pays
``c/m * yearfrac(as_of, first coupon date) * m``. A tenor of one coupon period or less (and every
day- or week-based tenor) is a single payment: ``D(T) = (1 + c/m)^(-m * tau)``. Year fractions use
the curve's day count.

Solving: coupon dates fall between quoted maturities, so each bond's price depends on the curve's
interpolation between nodes (and, for non-local methods such as monotone convex or the cubic spline,
on later nodes too). The node log-discount factors of *all days and all tenors of a pattern* are
solved together by Newton's method on the bond prices: every sweep builds the curves of all days
from the current nodes, prices every coupon in one vectorised evaluation and solves the small
``tenors x tenors`` linear systems of all days at once. It stops when every bond prices to par
within 2e-15 (typically 3 to 6 sweeps).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # the config imports the curve modules
    from pipeline.config import CurveConfig

from pipeline.dates import BusinessCalendar, add_months, as_days, maturity_dates, unadjusted_maturities, year_fraction
from pipeline.tenors import Tenor, parse_tenor

__all__ = ["ParLeg", "bootstrap_par", "par_bond_prices", "par_legs", "par_yields"]

_CHUNK = 2048
_MAX_NEWTON = 30
_PRICE_TOL = 2e-15  # stop once every bond prices to par this closely
_ACCEPT_TOL = 1e-12  # a day is flagged as not converged above this
_BUMP = 1e-7


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
    """Coupons a year of the curve's par bonds (``cfg.coupons_per_year``)."""
    m = cfg.coupons_per_year
    if not m:
        raise ValueError(
            f"curve {cfg.name!r}: par quotes need a coupon frequency; compounding = "
            f"{cfg.compounding!r} has none (set coupon_frequency: annual, semiannual, quarterly or monthly)"
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
        unadjusted = unadjusted_maturities(d, t, calendar)
        n_pay = -(-t.months // period)
        steps = np.arange(n_pay - 1, -1, -1) * period  # earliest coupon first
        dates = calendar.roll(add_months(unadjusted[:, None], -steps[None, :]))
        times = year_fraction(d[:, None], dates, day_count)
        accrual = np.full(times.shape, 1.0 / frequency)
        # Only an odd tenor has a short first period (c/m * yearfrac * m). A whole number of periods
        # whose dates were clipped to a month's end (29 Feb + 1Y = 28 Feb) keeps full coupons, as an
        # end-of-month bond does (common trade practice; the demo market's generator counts that
        # clipped day as short, a difference of under 2 bp on six 29 Februarys in thirty years).
        if t.months % period:
            accrual[:, 0] = times[:, 0]
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
        # single payments are exact; for the others the par yield as a zero rate is the first guess
        lnd = -m * times * np.log1p(par / m)
    multi = np.array([j for j, leg in enumerate(legs) if not leg.single], dtype=np.int64)
    converged = np.all(np.isfinite(lnd), axis=1)
    if multi.size == 0:
        return times, -lnd / times, converged
    mlegs = [legs[j] for j in multi]
    pay_t = np.hstack([leg.times for leg in mlegs])
    cash = np.hstack([par[:, [j]] * leg.accrual for j, leg in zip(multi, mlegs, strict=True)])
    widths = np.array([leg.times.shape[1] for leg in mlegs])
    ends = np.cumsum(widths) - 1
    cash[:, ends] += 1.0  # principal at maturity
    starts = np.concatenate([[0], ends[:-1] + 1])
    g = par.shape[0]
    for lo in range(0, g, _CHUNK):  # chunks of days bound the Jacobian's memory
        sl = slice(lo, min(lo + _CHUNK, g))
        lnd[sl], converged[sl] = _newton(times[sl], lnd[sl], multi, pay_t[sl], cash[sl], starts, make_block)
    with np.errstate(invalid="ignore"):
        return times, -lnd / times, converged & np.all(np.isfinite(lnd), axis=1)


def _newton(times, lnd0, multi, pay_t, cash, starts, make_block):
    """Newton on all unknown node log-discounts of a chunk of days at once.

    Residuals: each multi-payment bond's price minus 1. The Jacobian is ``cash * D * dlnD/dL`` summed
    per bond; ``dlnD/dL`` at the payment times comes from finite differences, perturbing nodes that
    no payment shares at once (a method whose times depend on ``a + b + 1`` neighbouring nodes needs
    that many evaluations). For the methods whose ``ln D`` is linear in the node values (linear zero,
    log-linear discount, cubic zero) this is Newton's method exactly; for monotone convex it is
    refreshed until the prices settle.
    """
    L = lnd0.copy()
    g, n = L.shape
    u = multi.size
    col_of = np.full(n, -1)
    col_of[multi] = np.arange(u)
    loc = None
    # bonds of different tenors share most coupon dates: evaluate each day's distinct times once
    compact, inverse = _distinct_times(pay_t)

    def ln_d(nodes: np.ndarray) -> np.ndarray:
        nonlocal loc
        with np.errstate(invalid="ignore", divide="ignore"):
            block = make_block(times, -nodes / times)
        if loc is None:
            loc = block.locate(compact)
        return np.take_along_axis(block.ln_discount(compact, loc), inverse, axis=1)

    support = getattr(make_block, "support", None)
    right = np.zeros(pay_t.shape, dtype=np.int64)
    for j in range(n):  # index of the first node at or after each payment
        right += pay_t > times[:, j : j + 1]
    right = np.minimum(right, n - 1)
    jac = None
    ok = np.all(np.isfinite(L), axis=1)
    for sweep in range(_MAX_NEWTON):
        base = ln_d(L)
        pv = cash * np.exp(base)
        resid = np.add.reduceat(pv, starts, axis=1) - 1.0
        err = np.max(np.abs(resid), axis=1)
        ok = np.isfinite(err)
        settled = ~ok | (err < _PRICE_TOL)
        if settled.all():
            break
        if jac is None or sweep in (3, 6, 9):
            jac = _jacobian(L, base, ln_d, multi, col_of, right, support)
        jmat = np.add.reduceat(pv[:, :, None] * jac, starts, axis=1)  # (g, bonds, unknowns)
        bad = ~np.all(np.isfinite(jmat.reshape(g, -1)), axis=1) | ~ok
        jmat[bad] = np.eye(u)
        rhs = np.where(bad[:, None], 0.0, -resid)
        try:
            step = np.linalg.solve(jmat, rhs[..., None])[..., 0]
        except np.linalg.LinAlgError:  # a singular day: fall back to the pseudo-inverse for all
            step = (np.linalg.pinv(jmat) @ rhs[..., None])[..., 0]
        L[:, multi] = L[:, multi] + np.where(settled[:, None], 0.0, step)
        L[bad] = np.nan
    return L, ok & (err < _ACCEPT_TOL)


def _distinct_times(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each row's distinct values, padded with the row's largest, ``(G, U)``, and the position of every
    input value among them, ``(G, P)``: ``take_along_axis(compact, inverse, 1) == t``."""
    order = np.argsort(t, axis=1, kind="stable")
    s = np.take_along_axis(t, order, axis=1)
    fresh = np.ones(s.shape, dtype=bool)
    fresh[:, 1:] = s[:, 1:] != s[:, :-1]
    rank = np.cumsum(fresh, axis=1) - 1
    compact = np.repeat(s[:, -1:], int(rank.max()) + 1 if rank.size else 0, axis=1)
    np.put_along_axis(compact, rank, s, axis=1)
    inverse = np.empty_like(rank)
    np.put_along_axis(inverse, order, rank, axis=1)
    return compact, inverse


def _jacobian(L, base, ln_d, multi, col_of, right, support):
    """``d ln D(payment) / d L(unknown node)``, ``(g, P, unknowns)``, by grouped finite differences."""
    g, n = L.shape
    u = multi.size
    jac = np.zeros(base.shape + (u,))
    if support is None:
        span, first = n, np.zeros_like(right)
    else:
        span = min(n, support[0] + support[1] + 1)
        first = right - support[0]
    rows = np.arange(g)[:, None].repeat(base.shape[1], axis=1)
    cols = np.arange(base.shape[1])[None, :].repeat(g, axis=0)
    for r in range(span):
        group = multi[multi % span == r]
        if group.size == 0:
            continue
        bumped = L.copy()
        bumped[:, group] += _BUMP
        delta = (ln_d(bumped) - base) / _BUMP
        node = first + np.mod(r - first, span)  # the one node of this group a payment can depend on
        keep = (node >= 0) & (node < n)
        node_c = np.where(keep, node, 0)
        col = np.where(keep, col_of[node_c], -1)
        keep &= col >= 0
        jac[rows[keep], cols[keep], col[keep]] = delta[keep]
    return jac


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
    """Par yields ``(D, T)`` (decimals) of ``curves`` under the CONTRACT convention, ``cfg.coupons_per_year``
    coupons a year; NaN on days not built."""
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
