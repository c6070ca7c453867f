"""Properties every method must have (hypothesis): forwards chain, inputs reprice, vectorised results
equal day-by-day results, and inputs are never mutated.

The reference for each property is the mathematics itself: D(0, T) = D(0, t1) D(t1, t2) ... D(tk, T)
from the forward rates (the definition of a forward), and a curve that reprices its input quotes.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.compounding import discount_from_rate
from pipeline.config import INTERPOLATIONS, CurveConfig
from pipeline.curves import build_curves
from pipeline.dates import BusinessCalendar, maturity_dates, year_fraction

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y"]
CAL = BusinessCalendar.of(["Sat", "Sun"], ["2035-12-25", "2036-01-01"])
NODE_METHODS = [m for m in INTERPOLATIONS if m != "nss"]

rates = st.floats(-0.01, 0.12, allow_nan=False)


@st.composite
def curve_days(draw, max_days=6):
    n = draw(st.integers(1, max_days))
    level = draw(st.lists(rates, min_size=n, max_size=n))
    slope = draw(st.lists(st.floats(-0.03, 0.03), min_size=n, max_size=n))
    wiggle = draw(st.lists(st.floats(-0.004, 0.004), min_size=len(TENORS), max_size=len(TENORS)))
    start = draw(st.integers(0, 3000))
    days = np.datetime64("2030-01-01") + np.sort(np.array(
        draw(st.lists(st.integers(0, 5000), min_size=n, max_size=n, unique=True)))).astype("timedelta64[D]")
    days = days + np.timedelta64(start, "D")
    t = np.array([1 / 12, 0.25, 0.5, 1, 2, 3, 5, 7, 10, 20, 30])
    q = np.array(level)[:, None] + np.array(slope)[:, None] * (1 - np.exp(-t / 4))[None, :] + np.array(wiggle)
    holes = draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, len(TENORS) - 1)), max_size=4))
    for i, j in holes:
        q[i, j] = np.nan
    return days, np.maximum(q, -0.005)


def _cfg(compounding="annual", day_count="ACT/365F", quote="zero"):
    return CurveConfig(name="p", quote=quote, compounding=compounding, day_count=day_count, calendar=CAL)


def _node_times(days, cfg):
    return np.column_stack([year_fraction(days, maturity_dates(days, t, cfg.calendar), cfg.day_count)
                            for t in TENORS])


@settings(max_examples=25, deadline=None)
@given(data=curve_days(), method=st.sampled_from(NODE_METHODS),
       comp=st.sampled_from(["continuous", "annual", "semiannual", "quarterly", "monthly", "simple"]),
       dc=st.sampled_from(["ACT/365F", "ACT/360", "30/360", "ACT/ACT"]))
def test_zero_quotes_reprice(data, method, comp, dc):
    days, q = data
    cfg = _cfg(comp, dc)
    c = build_curves(days, TENORS, q, cfg, method=method)
    t = _node_times(days, cfg)
    expected = discount_from_rate(q, comp, t)  # each input quote's discount factor
    actual = c.discount(t)
    have = np.isfinite(q) & c.ok[:, None]
    diff = np.abs(actual - expected)[have]
    assert diff.size == 0 or diff.max() < 1e-12, f"max diff {diff.max()}"
    # zero_rate in the quote's own compounding gives the quotes back
    back = c.zero_rate(t, comp)
    assert np.nanmax(np.abs(back - q)[have], initial=0.0) < 1e-10


@settings(max_examples=25, deadline=None)
@given(data=curve_days(), method=st.sampled_from(list(INTERPOLATIONS)),
       cuts=st.lists(st.floats(0.01, 45.0), min_size=1, max_size=8))
def test_forwards_chain(data, method, cuts):
    days, q = data
    c = build_curves(days, TENORS, q, _cfg(), method=method)
    grid = np.concatenate([[0.0], np.sort(np.array(cuts)), [50.0]])
    grid = np.unique(grid)
    pieces = c.forward_rate(grid[None, :-1].repeat(len(days), 0), grid[None, 1:].repeat(len(days), 0), "annual")
    tau = np.diff(grid)[None, :]
    chained = np.prod((1 + pieces) ** -tau, axis=1)
    whole = c.discount(np.array([[50.0]]).repeat(len(days), 0))[:, 0]
    ok = c.ok
    assert np.allclose(chained[ok], whole[ok], rtol=1e-12, atol=0), (chained[ok], whole[ok])


@settings(max_examples=15, deadline=None)
@given(data=curve_days(max_days=8), method=st.sampled_from(list(INTERPOLATIONS)))
def test_vectorised_equals_day_by_day(data, method):
    days, q = data
    cfg = _cfg()
    q0 = q.copy()
    c = build_curves(days, TENORS, q, cfg, method=method)
    np.testing.assert_array_equal(q, q0)  # never mutates its input
    t = np.linspace(0.0, 40.0, 33)[None, :].repeat(len(days), 0)
    all_z = c.zero_rate(t, "continuous")
    all_f = c.instantaneous_forward(t)
    prev = None
    for i in range(len(days)):  # the reference: one day at a time (NSS warm-started like the batch)
        one = build_curves(days[i : i + 1], TENORS, q[i : i + 1], cfg, method=method, warm_start=prev)
        assert one.ok[0] == c.ok[i]
        if not one.ok[0]:
            continue
        if method == "nss":
            prev = one.params[0]
        np.testing.assert_allclose(one.zero_rate(t[i : i + 1])[0], all_z[i], rtol=0, atol=1e-13)
        np.testing.assert_allclose(one.instantaneous_forward(t[i : i + 1])[0], all_f[i], rtol=0, atol=1e-12)


@pytest.mark.parametrize("method", list(INTERPOLATIONS), ids=list(INTERPOLATIONS))
def test_days_that_cannot_be_built_say_why(method):
    days = np.array(["2031-03-03", "2031-03-04", "2031-03-05"], dtype="datetime64[D]")
    q = np.full((3, len(TENORS)), 0.03)
    q[1, 1:] = np.nan  # one quote left
    q[2, :] = np.nan
    c = build_curves(days, TENORS, q, _cfg(), method=method)
    assert c.ok.tolist() == [True, False, False]
    assert c.reason[0] is None and "at least 2" in c.reason[1] and "0 usable" in c.reason[2]
    assert np.isnan(c.discount(np.array([[1.0]] * 3))[1:]).all()


@pytest.mark.parametrize(("kind", "quote", "expected_df"), [
    ("discount", 0.97, 0.97),
    ("simple", 0.04, 1 / (1 + 0.04 * 0.5)),
], ids=["discount", "simple"])
def test_discount_and_simple_quotes(kind, quote, expected_df):
    # source: the definitions (CONTRACT): "discount" as given; "simple": D = 1 / (1 + r tau)
    cal = BusinessCalendar.of([])
    cfg = CurveConfig(name="m", quote=kind, compounding="simple", day_count="30/360", calendar=cal)
    days = np.array(["2031-01-15"], dtype="datetime64[D]")
    q = np.array([[quote, quote]])
    c = build_curves(days, ["6M", "1Y"], q, cfg, method="linear_zero")
    actual = float(c.discount(np.array([[0.5]]))[0, 0])
    assert abs(actual - expected_df) < 1e-15, f"expected {expected_df}, actual {actual}"


def test_short_end_zero_rate_limit_and_shapes():
    days = np.array(["2031-03-03"], dtype="datetime64[D]")
    c = build_curves(days, TENORS, np.full((1, len(TENORS)), 0.05), _cfg("continuous"), method="linear_zero")
    z = c.zero_rate(np.array([0.0, 0.5, 1.0]), "simple")  # 1-D times are shared by all days
    assert z.shape == (1, 3)
    assert abs(z[0, 0] - 0.05) < 1e-15  # at t = 0: the short rate
    assert abs(c.forward_rate(1.0, 1.0)[0, 0] - 0.05) < 1e-15  # zero-length: instantaneous forward
