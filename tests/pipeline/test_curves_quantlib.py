"""linear_zero, log_linear_discount and cubic_zero against QuantLib curves of the same nodes.

Independent reference: QuantLib 1.4x ``ZeroCurve`` (``Linear`` on continuous zero rates),
``DiscountCurve`` (``LogLinear`` discount factors) and the ``CubicNaturalSpline`` interpolation on
continuous zero rates, with QuantLib's own calendar (``BespokeCalendar`` with the same weekend and
holidays), day counter and ``ModifiedFollowing`` maturities. Forwards between arbitrary dates must
agree to 1e-10. The quotes are the literal table below (annual-compounding zero rates, NaN = missing).
"""

from __future__ import annotations

import numpy as np
import pytest
import QuantLib as ql

from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.dates import BusinessCalendar, maturity_dates, year_fraction
from pipeline.tenors import parse_tenor
from tests.quantlib_ref import ql_calendar, ql_date

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "5Y", "10Y", "30Y"]
AS_OF = ["2031-12-24", "2032-01-30", "2032-02-26", "2032-03-01"]
QUOTES = np.array([  # annual compounding, decimals
    [0.0410, 0.0422, 0.0431, 0.0440, 0.0452, 0.0471, 0.0490, 0.0502],
    [0.0405, np.nan, 0.0428, 0.0436, 0.0449, 0.0468, 0.0487, 0.0499],
    [0.0520, 0.0511, 0.0497, 0.0475, 0.0441, 0.0412, 0.0405, 0.0398],
    [-0.0010, -0.0005, 0.0003, 0.0012, 0.0035, 0.0080, 0.0120, 0.0150],
])
HOLIDAYS = ["2031-12-25", "2031-12-26", "2032-01-01", "2032-02-27", "2032-03-31", "2062-03-01"]
CAL = BusinessCalendar.of(["Sat", "Sun"], HOLIDAYS)
QL_DC = {"ACT/365F": ql.Actual365Fixed(), "ACT/ACT": ql.ActualActual(ql.ActualActual.ISDA),
         "30/360": ql.Thirty360(ql.Thirty360.BondBasis), "ACT/360": ql.Actual360()}
TOL = 1e-10


_ql = ql_date
QL_CAL = ql_calendar("curves-test", holidays=HOLIDAYS)


def _cfg(day_count: str) -> CurveConfig:
    return CurveConfig(name="q", quote="zero", compounding="annual", day_count=day_count, calendar=CAL,
                       tenors=tuple(parse_tenor(t) for t in TENORS))


def _ql_nodes(i: int, day_count: str):
    """QuantLib's own maturities, times and continuous rates for day ``i`` (independent of pipeline)."""
    dc, ref = QL_DC[day_count], _ql(AS_OF[i])
    dates, times, rates = [], [], []
    for label, q in zip(TENORS, QUOTES[i], strict=True):
        if np.isnan(q):
            continue
        t = parse_tenor(label)
        d = QL_CAL.advance(ref, ql.Period(t.months, ql.Months), ql.ModifiedFollowing, False)
        tau = dc.yearFraction(ref, d)
        cc = ql.InterestRate(q, dc, ql.Compounded, ql.Annual).equivalentRate(ql.Continuous, ql.NoFrequency, tau)
        dates.append(d)
        times.append(tau)
        rates.append(cc.rate())
    return ref, dates, times, rates


def _ql_log_discount(method: str, i: int, day_count: str):
    """A function date -> ln D(date) from QuantLib for day ``i``."""
    ref, dates, times, rates = _ql_nodes(i, day_count)
    dc = QL_DC[day_count]
    if method == "linear_zero":
        # a node at the reference date carrying the first rate = flat zero before the first node
        curve = ql.ZeroCurve([ref] + dates, [rates[0]] + rates, dc, QL_CAL, ql.Linear(), ql.Continuous)
        curve.enableExtrapolation()
        return lambda d: np.log(curve.discount(d))
    if method == "log_linear_discount":
        dfs = [np.exp(-r * t) for r, t in zip(rates, times, strict=True)]
        curve = ql.DiscountCurve([ref] + dates, [1.0] + dfs, dc, QL_CAL)
        curve.enableExtrapolation()
        return lambda d: np.log(curve.discount(d))
    spline = ql.CubicNaturalSpline(times, rates)
    t_n, r_n = times[-1], rates[-1]
    f_n = r_n + t_n * spline.derivative(t_n, True)

    def ln_d(d):
        t = dc.yearFraction(ref, d)
        if t < times[0]:
            return -rates[0] * t
        if t > t_n:
            return -r_n * t_n - f_n * (t - t_n)
        return -spline(t, True) * t

    return ln_d


def _random_dates(i: int, n: int, seed: int) -> list[np.datetime64]:
    rng = np.random.default_rng(seed)
    base = np.datetime64(AS_OF[i], "D")
    return list(base + rng.integers(1, 36 * 366, n).astype("timedelta64[D]"))


@pytest.mark.parametrize("day_count", sorted(QL_DC), ids=sorted(QL_DC))
@pytest.mark.parametrize("method", ["linear_zero", "log_linear_discount", "cubic_zero"],
                         ids=["linear_zero", "log_linear_discount", "cubic_zero"])
def test_forwards_between_arbitrary_dates_match_quantlib(method, day_count):
    cfg = _cfg(day_count)
    days = np.array(AS_OF, dtype="datetime64[D]")
    curves = build_curves(days, TENORS, QUOTES, cfg, method=method)
    assert curves.ok.all(), curves.reason
    n = 60
    d1 = np.array([_random_dates(i, n, 10 + i) for i in range(len(days))], dtype="datetime64[D]")
    d2 = np.array([_random_dates(i, n, 50 + i) for i in range(len(days))], dtype="datetime64[D]")
    d1, d2 = np.minimum(d1, d2), np.maximum(d1, d2) + np.timedelta64(1, "D")
    t1 = year_fraction(days[:, None], d1, day_count)
    t2 = year_fraction(days[:, None], d2, day_count)
    tau = year_fraction(d1, d2, day_count)
    ours = (curves.ln_discount(t1) - curves.ln_discount(t2)) / tau
    for i in range(len(days)):  # the reference side is a plain loop over QuantLib objects
        ln_d = _ql_log_discount(method, i, day_count)
        for k in range(n):
            a, b = _ql(d1[i, k]), _ql(d2[i, k])
            expected = (ln_d(a) - ln_d(b)) / QL_DC[day_count].yearFraction(a, b)
            actual = ours[i, k]
            assert abs(actual - expected) < TOL, (
                f"{method} {day_count} as of {AS_OF[i]} forward {d1[i, k]}..{d2[i, k]}: "
                f"expected {expected!r}, actual {actual!r}, diff {actual - expected:.3e}")


@pytest.mark.parametrize("method", ["linear_zero", "log_linear_discount"], ids=["linear_zero", "log_linear"])
def test_quantlib_forward_rate_api_agrees(method):
    # QuantLib's own forwardRate(d1, d2, dc, Continuous) (tau = dc.yearFraction(d1, d2)), day count ACT/ACT
    day_count = "ACT/ACT"
    days = np.array(AS_OF, dtype="datetime64[D]")
    curves = build_curves(days, TENORS, QUOTES, _cfg(day_count), method=method)
    dc = QL_DC[day_count]
    for i in range(len(days)):
        ref, dates, times, rates = _ql_nodes(i, day_count)
        if method == "linear_zero":
            curve = ql.ZeroCurve([ref] + dates, [rates[0]] + rates, dc, QL_CAL, ql.Linear(), ql.Continuous)
        else:
            dfs = [np.exp(-r * t) for r, t in zip(rates, times, strict=True)]
            curve = ql.DiscountCurve([ref] + dates, [1.0] + dfs, dc, QL_CAL)
        curve.enableExtrapolation()
        for a, b in [("2033-02-15", "2034-07-31"), ("2040-01-01", "2040-04-01"), ("2055-06-30", "2066-01-03")]:
            expected = curve.forwardRate(_ql(a), _ql(b), dc, ql.Continuous).rate()
            t1 = year_fraction(days[i], np.datetime64(a), day_count)
            t2 = year_fraction(days[i], np.datetime64(b), day_count)
            tau = year_fraction(np.datetime64(a), np.datetime64(b), day_count)
            lnd = curves.ln_discount(np.array([[t1, t2]]).repeat(len(days), 0))[i]
            actual = (lnd[0] - lnd[1]) / tau
            assert abs(actual - expected) < TOL, f"expected {expected}, actual {actual}, diff {actual - expected}"


def test_maturities_are_quantlibs():
    # the node dates themselves: QuantLib advance(ModifiedFollowing) on the same holidays
    for i, d in enumerate(AS_OF):
        _, dates, _, _ = _ql_nodes(i, "ACT/365F")
        ours = [maturity_dates(np.datetime64(d), t, CAL) for t, q in zip(TENORS, QUOTES[i], strict=True)
                if not np.isnan(q)]
        assert [str(x) for x in ours] == [x.ISO() for x in dates]
