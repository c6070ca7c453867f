"""``afterward.open(...).curve(name, day)``: the day's official curve, rebuilt from what the build stored.

Two independent sides: the store's own ``zero_rates`` and ``forwards`` views (the numbers the build
wrote, read back with plain SQL), which the rebuilt curve must give back at the stored dates to
1e-12; and QuantLib (the PyPI package, used as in tests/pipeline/test_curves_quantlib.py),
given the raw quotes written to the files, at dates off the grid, for ``linear_zero`` and
``log_linear_discount``.
"""

from __future__ import annotations

import numpy as np
import pytest
import QuantLib as ql

import afterward
from pipeline.tenors import parse_tenor
from tests.e2e.stores import Project
from tests.notebook.store import CURVES, HOLIDAYS, TENORS, business_days, quotes
from tests.quantlib_ref import ql_calendar, ql_date

GRID_TOL = 1e-12   # the brief's bound: the stored numbers come back to rounding
QL_TOL = 1e-10     # as tests/pipeline/test_curves_quantlib.py
QL_DC = {"ACT/365F": ql.Actual365Fixed(), "ACT/ACT": ql.ActualActual(ql.ActualActual.ISDA),
         "30/360": ql.Thirty360(ql.Thirty360.BondBasis), "ACT/360": ql.Actual360()}
QL_CAL = ql_calendar("notebook-test", holidays=HOLIDAYS)


def _days(p: Project, curve: str, n: int = 6) -> list[str]:
    """``n`` built days spread over the curve's history, the first and the last among them."""
    built = p.sql("SELECT DISTINCT as_of FROM zero_rates WHERE curve = ? ORDER BY as_of", [curve])["as_of"]
    pick = np.unique(np.linspace(0, len(built) - 1, n).round().astype(int))
    return [str(np.datetime64(built.iloc[i], "D")) for i in pick]


@pytest.mark.parametrize("curve", sorted(CURVES))
def test_the_curve_gives_back_the_stored_zero_rates_and_forwards(small_store: Project, curve: str) -> None:
    # source: the build's own stored rows (zero_rates and forwards views), read back with SQL
    archive = afterward.open(small_store.cfg.path)
    comp = small_store.cfg.curve(curve).compounding
    for day in _days(small_store, curve):
        c = archive.curve(curve, day)
        z = small_store.sql("SELECT maturity_date, year_fraction, zero_rate, zero_rate_cc, discount_factor "
                            "FROM zero_rates WHERE curve = ? AND as_of = ? ORDER BY maturity_date", [curve, day])
        f = small_store.sql("SELECT start_date, end_date, forward_rate, forward_rate_cc FROM forwards "
                            "WHERE curve = ? AND as_of = ? ORDER BY start_months, tenor_months", [curve, day])
        assert len(z) == len(TENORS) and len(f) == 12
        by_date = c.zero_rate(z["maturity_date"].to_numpy(), comp)[0]       # all maturities in one call
        by_time = c.zero_rate(z["year_fraction"].to_numpy(), comp)[0]
        np.testing.assert_allclose(by_date, z["zero_rate"], rtol=0, atol=GRID_TOL)
        np.testing.assert_allclose(by_time, z["zero_rate"], rtol=0, atol=GRID_TOL)
        np.testing.assert_allclose(c.zero_rate(z["maturity_date"].to_numpy())[0], z["zero_rate_cc"],
                                   rtol=0, atol=GRID_TOL)
        np.testing.assert_allclose(c.discount(z["maturity_date"].to_numpy())[0], z["discount_factor"],
                                   rtol=0, atol=GRID_TOL)
        start, end = f["start_date"].to_numpy(), f["end_date"].to_numpy()
        np.testing.assert_allclose(c.forward_rate(start, end, comp)[0], f["forward_rate"], rtol=0, atol=GRID_TOL)
        np.testing.assert_allclose(c.forward_rate(start, end)[0], f["forward_rate_cc"], rtol=0, atol=GRID_TOL)


def _ql_curve(curve: str, day: str):
    """QuantLib's curve for ``day`` from the quotes written to the file (nodes computed by QuantLib)."""
    _, comp, dc_name, method, _ = CURVES[curve]
    assert comp == "annual"
    dc, ref = QL_DC[dc_name], ql_date(day)
    row = quotes(curve)[np.flatnonzero(business_days() == np.datetime64(day))[0]]
    dates, times, rates = [], [], []
    for label, q in zip(TENORS, row, strict=True):
        d = QL_CAL.advance(ref, ql.Period(parse_tenor(label).months, ql.Months), ql.ModifiedFollowing, False)
        tau = dc.yearFraction(ref, d)
        dates.append(d)
        times.append(tau)
        rates.append(ql.InterestRate(q, dc, ql.Compounded, ql.Annual)
                     .equivalentRate(ql.Continuous, ql.NoFrequency, tau).rate())
    if method == "linear_zero":
        # a node at the reference date carrying the first rate: flat zero rate before the first node
        out = ql.ZeroCurve([ref] + dates, [rates[0]] + rates, dc, QL_CAL, ql.Linear(), ql.Continuous)
    else:
        dfs = [np.exp(-r * t) for r, t in zip(rates, times, strict=True)]
        out = ql.DiscountCurve([ref] + dates, [1.0] + dfs, dc, QL_CAL)
    out.enableExtrapolation()
    return out, dc


@pytest.mark.parametrize("curve", ["lz", "lld"])
def test_off_grid_the_curve_agrees_with_quantlib(small_store: Project, curve: str) -> None:
    # source: QuantLib ZeroCurve (Linear, continuous) / DiscountCurve (log-linear discount factors)
    archive = afterward.open(small_store.cfg.path)
    rng = np.random.default_rng(19)
    for day in _days(small_store, curve, 4):
        c = archive.curve(curve, day)
        ref, dc = _ql_curve(curve, day)
        base = np.datetime64(day, "D")
        d1 = base + rng.integers(1, 12 * 366, 40).astype("timedelta64[D]")
        d2 = d1 + rng.integers(1, 3 * 366, 40).astype("timedelta64[D]")
        ours_df = c.discount(d2)[0]
        ours_fwd = c.forward_rate(d1, d2, "annual")[0]
        ours_zero = c.zero_rate(d1, "annual")[0]
        for k in range(d1.size):  # the reference side: a plain loop over QuantLib calls
            a, b = ql_date(d1[k]), ql_date(d2[k])
            assert abs(ours_df[k] - ref.discount(b)) < QL_TOL, (curve, day, d2[k])
            expected = ref.forwardRate(a, b, dc, ql.Compounded, ql.Annual).rate()
            assert abs(ours_fwd[k] - expected) < QL_TOL, (curve, day, d1[k], d2[k], ours_fwd[k] - expected)
            expected_zero = ref.zeroRate(a, dc, ql.Compounded, ql.Annual).rate()
            assert abs(ours_zero[k] - expected_zero) < QL_TOL, (curve, day, d1[k])
