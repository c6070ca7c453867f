"""Par-yield bootstrap: published worked examples, and every input par bond repricing to par.

References: tests/REFERENCES.md #6-#10 (Hull; CFA curriculum via Bodie, Kane & Marcus), and QuantLib's
``Schedule`` (backward generation from the unadjusted maturity, ``ModifiedFollowing``) as the
independent source of coupon dates in the repricing check.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
import QuantLib as ql
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.bootstrap import par_bond_prices, par_yields
from pipeline.config import INTERPOLATIONS, CurveConfig
from pipeline.curves import build_curves
from pipeline.curves.nss import fit_nss, nss_zero
from pipeline.dates import BusinessCalendar, add_months, year_fraction
from pipeline.forwards import zero_rate_table
from pipeline.tenors import parse_tenor
from tests.quantlib_ref import ql_calendar, ql_date

NO_WEEKEND = BusinessCalendar.of([])  # with 30/360, coupon times are exact multiples of a period
HOLIDAYS = ["2032-02-27", "2032-08-31", "2033-02-28", "2036-06-30", "2040-02-29", "2061-12-30"]
CAL = BusinessCalendar.of(["Sat", "Sun"], HOLIDAYS)

# Par yields (decimals) for the repricing checks: three days, one with a missing quote
PAR_TENORS = ["1M", "3M", "6M", "9M", "1Y", "18M", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y"]
PAR_AS_OF = ["2031-12-31", "2032-02-29", "2032-08-30"]
PAR_QUOTES = np.array([
    [0.0310, 0.0325, 0.0340, 0.0349, 0.0355, 0.0368, 0.0377, 0.0391, 0.0410, 0.0425, 0.0440, 0.0462, 0.0470],
    [0.0520, 0.0514, 0.0502, 0.0490, 0.0478, np.nan, 0.0451, 0.0432, 0.0415, 0.0409, 0.0405, 0.0410, 0.0408],
    [0.0010, 0.0012, 0.0015, 0.0019, 0.0024, 0.0031, 0.0040, 0.0062, 0.0098, 0.0125, 0.0150, 0.0180, 0.0185],
])


def _cfg(compounding, day_count="30/360", calendar=NO_WEEKEND, quote="par"):
    return CurveConfig(name="b", quote=quote, compounding=compounding, day_count=day_count, calendar=calendar)


NODE_METHODS = [m for m in INTERPOLATIONS if m != "nss"]


@pytest.mark.parametrize("method", NODE_METHODS, ids=NODE_METHODS)
def test_cfa_annual_par_curve(method):
    # source: tests/REFERENCES.md #9, CFA example in Bodie, Kane & Marcus (seen): annual par yields ->
    # spot rates 5.00, 5.21, 6.05, 7.16 % and one-year forwards 5.00, 5.42, 7.75, 10.56 %
    cfg = _cfg("annual")
    days = np.array(["2031-01-15"], dtype="datetime64[D]")
    tenors = ["1Y", "2Y", "3Y", "4Y", "5Y"]
    c = build_curves(days, tenors, np.array([[0.05, 0.052, 0.06, 0.07, 0.07]]), cfg, method=method)
    assert c.ok.all(), c.reason
    spots = zero_rate_table(c, tenors, cfg)["zero_rate"].to_numpy()[:4] * 100
    for n, (exp, act) in enumerate(zip([5.00, 5.21, 6.05, 7.16], spots, strict=True), start=1):
        assert abs(act - exp) < 0.005, f"{n}y spot: expected {exp}, actual {act}, diff {act - exp}"
    fwd = c.forward_rate(np.arange(0.0, 4.0)[None, :], np.arange(1.0, 5.0)[None, :], "annual")[0] * 100
    for n, (exp, act) in enumerate(zip([5.00, 5.42, 7.75, 10.56], fwd, strict=True), start=1):
        assert abs(act - exp) < 0.03, f"fwd {n}: expected {exp}, actual {act}"


@pytest.mark.parametrize("method", [m for m in INTERPOLATIONS if m != "nss"],
                         ids=[m for m in INTERPOLATIONS if m != "nss"])
def test_cfa_bond_equivalent_bootstrap(method):
    # source: tests/REFERENCES.md #10 (CFA, seen): semiannual par 3 %, 4 %, 5 % -> spots 3.00, 4.01, 5.03 %
    # (bond-equivalent = semiannual compounding; exact 18-month value 5.034)
    cfg = _cfg("semiannual")
    days = np.array(["2031-01-15"], dtype="datetime64[D]")
    c = build_curves(days, ["6M", "1Y", "18M"], np.array([[0.03, 0.04, 0.05]]), cfg, method=method)
    spots = c.zero_rate(np.array([[0.5, 1.0, 1.5]]), "semiannual")[0] * 100
    for exp, act in zip([3.00, 4.01, 5.03], spots, strict=True):
        assert abs(act - exp) < 0.005, f"expected {exp}, actual {act}, diff {act - exp}"
    assert abs(spots[2] - 5.034) < 0.0005


def test_hull_bootstrap_from_bond_prices():
    # source: tests/REFERENCES.md #6 (Hull, 5th-edition slides, figure 5.1; seen). The three bills are
    # discount quotes; the two coupon bonds pay on those dates, so each solves for one discount factor.
    cfg = _cfg("continuous", quote="discount")
    days = np.array(["2031-01-15"], dtype="datetime64[D]")
    d = {0.25: 0.975, 0.5: 0.949, 1.0: 0.90}
    d[1.5] = (96.0 - 4.0 * d[0.5] - 4.0 * d[1.0]) / 104.0
    d[2.0] = (101.6 - 6.0 * (d[0.5] + d[1.0] + d[1.5])) / 106.0
    c = build_curves(days, ["3M", "6M", "1Y", "18M", "2Y"], np.array([list(d.values())]), cfg, method="linear_zero")
    z = c.zero_rate(np.array([list(d)]), "continuous")[0] * 100
    for exp, act in zip([10.127, 10.469, 10.536, 10.681, 10.808], z, strict=True):
        assert abs(act - exp) < 0.0005, f"expected {exp}, actual {act}, diff {act - exp}"


@pytest.mark.parametrize(("zeros", "price", "par", "annuity"), [
    # tests/REFERENCES.md #7 (Hull table 4.2, seen; par yield 6.87 from memory, recomputed 6.873)
    ([0.050, 0.058, 0.064, 0.068], 98.39, 6.873, None),
    # tests/REFERENCES.md #8 (Hull, seen): d = 0.8694, A = 3.6935, par 7.0741 % (semiannual)
    ([0.050, 0.060, 0.065, 0.070], None, 7.0741, 3.6935),
], ids=["hull-4.2", "hull-par-yield"])
def test_hull_par_yield_and_bond_price_from_zeros(zeros, price, par, annuity):
    zcfg = _cfg("continuous", quote="zero")
    days = np.array(["2031-01-15"], dtype="datetime64[D]")
    c = build_curves(days, ["6M", "1Y", "18M", "2Y"], np.array([zeros]), zcfg, method="linear_zero")
    pcfg = _cfg("semiannual")
    actual_par = float(par_yields(c, ["2Y"], pcfg)[0, 0]) * 100
    places = 3 if price is not None else 4
    assert abs(actual_par - par) < 0.6 * 10**-places, f"par: expected {par}, actual {actual_par}"
    if price is not None:
        actual_price = float(par_bond_prices(c, ["2Y"], np.array([[0.06]]), pcfg)[0, 0]) * 100
        assert abs(actual_price - price) < 0.005, f"price: expected {price}, actual {actual_price}"
    if annuity is not None:
        a = float(c.discount(np.array([[0.5, 1.0, 1.5, 2.0]])).sum())
        assert abs(a - annuity) < 1e-4, f"annuity: expected {annuity}, actual {a}"
        assert abs(float(c.discount(np.array([[2.0]]))[0, 0]) - 0.8694) < 5e-5


_ql = ql_date
QL_CAL = ql_calendar("bootstrap-test", holidays=HOLIDAYS)


def _independent_prices(curves, as_of, tenors, coupons, m, day_count):
    """Par-bond prices from QuantLib schedules (coupon dates) and the curve's discount factors."""
    out = np.empty(coupons.shape)
    period = 12 // m
    for i, day in enumerate(as_of):
        for j, label in enumerate(tenors):
            t = parse_tenor(label)
            c = coupons[i, j]
            unadjusted = add_months(np.datetime64(day), t.months)
            if t.months <= period:
                end = QL_CAL.adjust(_ql(unadjusted), ql.ModifiedFollowing)
                tau = float(year_fraction(np.datetime64(day), np.datetime64(end.ISO()), day_count))
                d = curves.discount(np.full((len(as_of), 1), tau))[i, 0]
                out[i, j] = d * (1 + c / m) ** (m * tau)
                continue
            sched = ql.Schedule(_ql(day), _ql(unadjusted), ql.Period(period, ql.Months), QL_CAL,
                                ql.ModifiedFollowing, ql.ModifiedFollowing, ql.DateGeneration.Backward, False)
            pay = [np.datetime64(x.ISO()) for x in list(sched)[1:]]
            times = year_fraction(np.datetime64(day), np.array(pay, dtype="datetime64[D]"), day_count)
            cash = np.full(len(pay), c / m)
            if t.months % period:
                cash[0] = c / m * times[0] * m  # short first period (CONTRACT)
            cash[-1] += 1.0
            d = curves.discount(np.broadcast_to(times, (len(as_of), len(times))))[i]
            out[i, j] = float(np.sum(cash * d))
    return out


@pytest.mark.parametrize("compounding", ["semiannual", "annual", "quarterly"], ids=["semi", "annual", "quarterly"])
@pytest.mark.parametrize("method", [m for m in INTERPOLATIONS if m != "nss"],
                         ids=[m for m in INTERPOLATIONS if m != "nss"])
def test_every_input_par_bond_reprices_to_par(method, compounding):
    day_count = "ACT/ACT"
    cfg = _cfg(compounding, day_count, CAL)
    days = np.array(PAR_AS_OF, dtype="datetime64[D]")
    c = build_curves(days, PAR_TENORS, PAR_QUOTES, cfg, method=method)
    assert c.ok.all(), c.reason
    m = {"annual": 1, "semiannual": 2, "quarterly": 4}[compounding]
    prices = _independent_prices(c, PAR_AS_OF, PAR_TENORS, PAR_QUOTES, m, day_count)
    have = np.isfinite(PAR_QUOTES)
    err = np.abs(prices - 1.0)[have]
    worst = np.unravel_index(np.argmax(np.where(have, np.abs(prices - 1.0), 0)), prices.shape)
    assert err.max() < 1e-10, (f"{method} {compounding}: expected 1, actual {prices[worst]!r}, diff "
                               f"{prices[worst] - 1:.2e} at {PAR_AS_OF[worst[0]]} {PAR_TENORS[worst[1]]}")
    back = par_yields(c, PAR_TENORS, cfg)
    assert np.nanmax(np.abs(back - PAR_QUOTES)) < 1e-10


@settings(max_examples=20, deadline=None)
@given(day=st.dates(min_value=dt.date(2031, 1, 1), max_value=dt.date(2040, 12, 31)),
       level=st.floats(0.0, 0.10), slope=st.floats(-0.03, 0.03),
       method=st.sampled_from([m for m in INTERPOLATIONS if m != "nss"]))
def test_random_days_reprice(day, level, slope, method):
    cfg = _cfg("semiannual", "ACT/365F", CAL)
    t = np.array([parse_tenor(x).months for x in PAR_TENORS]) / 12
    q = (level + slope * (1 - np.exp(-t / 3)))[None, :]
    days = np.array([day], dtype="datetime64[D]")
    c = build_curves(days, PAR_TENORS, q, cfg, method=method)
    assert c.ok.all(), c.reason
    prices = _independent_prices(c, [str(day)], PAR_TENORS, q, 2, "ACT/365F")
    assert np.max(np.abs(prices - 1)) < 1e-10, np.max(np.abs(prices - 1))


def test_nss_on_par_quotes_fits_the_monotone_convex_bootstrap():
    # documented behaviour: NSS is fitted to the zeros bootstrapped with monotone convex
    cfg = _cfg("semiannual", "ACT/ACT", CAL)
    days = np.array(PAR_AS_OF, dtype="datetime64[D]")
    mc = build_curves(days, PAR_TENORS, PAR_QUOTES, cfg, method="monotone_convex")
    nss = build_curves(days, PAR_TENORS, PAR_QUOTES, cfg, method="nss")
    assert nss.ok.all(), nss.reason
    for idx, block in mc.blocks:
        fitted = nss.zero_rate(_rows(block.times, idx, len(days)))[idx]
        assert np.max(np.abs(fitted - block.zero_cc)) < 5e-4  # a fit within 5 bp of the bootstrap
        # the stored parameters are a fixed point of the fit of those bootstrapped zeros
        again, good = fit_nss(block.times, block.zero_cc, nss.params[idx[0]])
        assert good.all()
        np.testing.assert_allclose(fitted, nss_zero(again, block.times), atol=1e-7)


def _rows(times, idx, n):
    out = np.zeros((n, times.shape[1]))
    out[idx] = times
    return out


def test_par_needs_a_coupon_frequency():
    with pytest.raises(ValueError, match="coupon frequency"):
        build_curves(np.array(["2031-01-15"], dtype="datetime64[D]"), ["1Y", "2Y"], np.array([[0.03, 0.04]]),
                     _cfg("continuous"), method="linear_zero")


ANNUAL_AS_OF = ["2031-12-31", "2032-08-30", "2033-03-15"]
ANNUAL_TENORS = ["6M", "1Y", "18M", "2Y", "3Y", "5Y", "7Y", "10Y"]
ANNUAL_QUOTES = np.array([
    [0.0340, 0.0355, 0.0368, 0.0377, 0.0391, 0.0410, 0.0425, 0.0440],
    [0.0502, 0.0478, 0.0460, 0.0451, 0.0432, 0.0415, 0.0409, 0.0405],
    [0.0015, 0.0024, 0.0031, 0.0040, 0.0062, 0.0098, 0.0125, 0.0150],
])


def _annual_cfg(coupon_frequency="annual"):
    return CurveConfig(name="b", quote="par", compounding="continuous", day_count="30/360", calendar=CAL,
                       coupon_frequency=coupon_frequency)


@pytest.mark.parametrize("method", NODE_METHODS, ids=NODE_METHODS)
def test_annual_coupons_on_a_continuously_compounded_curve_reprice_to_par(method):
    # the coupon schedule follows coupon_frequency (annual: c paid once a year) while the zero rates
    # are shown continuously compounded; repricing rule of the curve tests: every input bond to 1e-9
    cfg = _annual_cfg()
    assert all(CAL.is_business_day(np.array(ANNUAL_AS_OF, dtype="datetime64[D]")))
    c = build_curves(np.array(ANNUAL_AS_OF, dtype="datetime64[D]"), ANNUAL_TENORS, ANNUAL_QUOTES, cfg, method=method)
    assert c.ok.all(), c.reason
    prices = _independent_prices(c, ANNUAL_AS_OF, ANNUAL_TENORS, ANNUAL_QUOTES, 1, "30/360")
    assert np.max(np.abs(prices - 1.0)) < 1e-9, np.max(np.abs(prices - 1.0))
    z = zero_rate_table(c, ANNUAL_TENORS, cfg)
    np.testing.assert_array_equal(z["zero_rate"].to_numpy(), z["zero_rate_cc"].to_numpy())   # continuous
    # the same par yields read as semiannual coupons give another curve: the frequency is used
    semi = build_curves(np.array(ANNUAL_AS_OF, dtype="datetime64[D]"), ANNUAL_TENORS, ANNUAL_QUOTES,
                        _annual_cfg("semiannual"), method=method)
    other = zero_rate_table(semi, ANNUAL_TENORS, cfg)["zero_rate"].to_numpy()
    assert np.max(np.abs(other - z["zero_rate"].to_numpy())) > 1e-5


def test_annual_coupon_bonds_agree_with_quantlib_fixed_rate_bonds():
    # source: QuantLib FixedRateBond (annual Schedule, backward from the unadjusted maturity, accrual on
    # unadjusted dates, paid modified following; Thirty360 BondBasis) priced by DiscountingBondEngine on
    # a DiscountCurve holding our curve's discount factors at the payment dates: each prices to 100.
    # Tenors of two years and more (one coupon period or less is our single-payment rule, not a bond's).
    cfg = _annual_cfg()
    days = np.array(ANNUAL_AS_OF, dtype="datetime64[D]")
    c = build_curves(days, ANNUAL_TENORS, ANNUAL_QUOTES, cfg, method="monotone_convex")
    dc = ql.Thirty360(ql.Thirty360.BondBasis)
    worst = 0.0
    for i, day in enumerate(ANNUAL_AS_OF):
        ql.Settings.instance().evaluationDate = _ql(day)
        for j, label in enumerate(ANNUAL_TENORS):
            t = parse_tenor(label)
            if t.months < 24:
                continue
            end = add_months(np.datetime64(day), t.months)
            sched = ql.Schedule(_ql(day), _ql(end), ql.Period(ql.Annual), QL_CAL, ql.Unadjusted, ql.Unadjusted,
                                ql.DateGeneration.Backward, False)
            bond = ql.FixedRateBond(0, 100.0, sched, [float(ANNUAL_QUOTES[i, j])], dc, ql.ModifiedFollowing)
            pay = sorted({cf.date() for cf in bond.cashflows()})
            taus = year_fraction(np.datetime64(day), np.array([np.datetime64(p.ISO()) for p in pay]), "30/360")
            dfs = c.discount(np.broadcast_to(taus, (len(days), len(taus))))[i]
            curve = ql.DiscountCurve([_ql(day), *pay], [1.0, *map(float, dfs)], dc, QL_CAL)
            bond.setPricingEngine(ql.DiscountingBondEngine(ql.YieldTermStructureHandle(curve)))
            worst = max(worst, abs(bond.NPV() / 100.0 - 1.0))
    assert worst < 1e-9, worst
