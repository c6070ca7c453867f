"""What the build step leans on to do less work: ``forwards_nonnegative`` (days that cannot fail a
shape check), ``ln_discount_rows`` (only some days evaluated) and monotone convex's expanded
``ln_discount``.

References: the definition of the instantaneous forward, ``ln D(t) = -integral_0^t f(s) ds``,
integrated numerically by SciPy (``scipy.integrate.quad``) from each method's own ``inst_forward``;
the curve-shape checks of ``pipeline.checks`` on a dense grid; and each method's full evaluation
(``ln_discount`` of every day) for the row-subset path.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from pipeline.checks import curve_shape_checks
from pipeline.config import INTERPOLATIONS, CurveConfig
from pipeline.curves import build_curves
from pipeline.curves.linear_zero import LinearZeroBlock
from pipeline.curves.log_linear_discount import LogLinearDiscountBlock
from pipeline.curves.monotone_convex import MonotoneConvexBlock, sector_coefficients
from pipeline.dates import BusinessCalendar

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y"]
CAL = BusinessCalendar.of(["Sat", "Sun"], ["2035-12-25", "2036-01-01"])
CERTIFYING = {"linear_zero": LinearZeroBlock, "log_linear_discount": LogLinearDiscountBlock,
              "monotone_convex": MonotoneConvexBlock}
DENSE = np.r_[np.linspace(0.0, 2.0, 801)[1:], np.linspace(2.0, 40.0, 1521)[1:]]


@st.composite
def node_curves(draw, max_curves=5):
    """Node times and continuous zero rates whose discrete forwards swing widely; some negative."""
    g = draw(st.integers(1, max_curves))
    n = draw(st.integers(2, 9))
    gaps = np.array(draw(st.lists(st.floats(0.02, 6.0), min_size=g * n, max_size=g * n))).reshape(g, n)
    times = np.cumsum(gaps, axis=1)
    fwd = np.array(draw(st.lists(st.floats(-0.02, 0.15), min_size=g * n, max_size=g * n))).reshape(g, n)
    zero = np.cumsum(fwd * gaps, axis=1) / times
    return times, zero


@settings(max_examples=60, deadline=None)
@given(data=node_curves(), method=st.sampled_from(sorted(CERTIFYING)))
def test_a_curve_certified_nonnegative_has_no_negative_forward_and_no_rising_discount(data, method):
    times, zero = data
    block = CERTIFYING[method](times, zero)
    sure = block.forwards_nonnegative()
    grid = np.broadcast_to(DENSE, (times.shape[0], DENSE.size))
    f = block.inst_forward(grid)
    lnd = block.ln_discount(grid)
    # the definition: f >= 0 everywhere means ln D never rises
    assert np.all(f[sure] >= -1e-15)
    assert np.all(np.diff(lnd[sure], axis=1) <= 1e-15)
    # and so the shape checks (pipeline.checks) find nothing on any grid for those days
    days = np.datetime64("2036-03-03") + np.arange(int(sure.sum())).astype("timedelta64[D]")
    found = curve_shape_checks(days, grid[sure], np.exp(lnd[sure]), CurveConfig(name="c", calendar=CAL))
    assert len(found) == 0


@settings(max_examples=40, deadline=None)
@given(data=node_curves())
def test_linear_zero_certificate_is_exact(data):
    """For linear zero rates f = r + t r' is linear on each segment: uncertified means some forward
    just inside a segment end (or the flat short end) is negative."""
    times, zero = data
    block = LinearZeroBlock(times, zero)
    sure = block.forwards_nonnegative()
    eps = 1e-9
    ends = np.concatenate([times[:, :1] * 0.5, times[:, :-1] + eps, times[:, 1:] - eps], axis=1)
    ends = np.sort(ends, axis=1)
    lowest = block.inst_forward(ends).min(axis=1)
    assert np.all((lowest >= -1e-7) | ~sure)
    assert np.all((lowest < 1e-7) | sure)


@pytest.mark.parametrize("collar", [True, False], ids=["collar", "no-collar"])
@pytest.mark.parametrize("seed", [1, 2, 3], ids=["s1", "s2", "s3"])
def test_monotone_convex_ln_discount_is_the_integral_of_its_forward(seed, collar):
    """ln D(t) = -integral_0^t f(s) ds, the integral by scipy.integrate.quad, breakpoints at the nodes."""
    rng = np.random.default_rng(seed)
    times = np.cumsum(rng.uniform(0.05, 4.0, (6, 7)), axis=1)
    fwd = rng.choice([1.0, 1.0, 1e-3, -0.5], times.shape) * rng.uniform(0.001, 0.12, times.shape)
    zero = np.cumsum(fwd * np.diff(np.hstack([np.zeros((6, 1)), times]), axis=1), axis=1) / times
    block = MonotoneConvexBlock(times, zero, collar)
    t = np.sort(rng.uniform(0.0, times[:, -1:] + 3.0, (6, 12)), axis=1)
    mine = block.ln_discount(t)
    knots = np.hstack([np.zeros((6, 1)), times])
    eta = np.moveaxis(sector_coefficients(block.knot_forwards[:, :-1] - block.discrete_forwards,
                                          block.knot_forwards[:, 1:] - block.discrete_forwards), -1, 0)[0]
    joints = np.sort(np.hstack([times, knots[:, :-1] + eta * np.diff(knots, axis=1)]), axis=1)
    for g in range(6):
        def f(s, g=g):
            return float(block.inst_forward(np.full((6, 1), s))[g, 0])
        for k in range(t.shape[1]):
            # piece by piece: between the nodes and at each sector's joint (where f may turn sharply)
            cuts = np.r_[0.0, joints[g][joints[g] < t[g, k]], t[g, k]]
            ref = -sum(quad(f, a, b, limit=200, epsabs=1e-13, epsrel=1e-12)[0]
                       for a, b in zip(cuts[:-1], cuts[1:], strict=True))
            assert mine[g, k] == pytest.approx(ref, abs=1e-11)


@pytest.mark.parametrize("method", list(INTERPOLATIONS), ids=list(INTERPOLATIONS))
def test_rows_subset_equals_the_full_evaluation(method):
    """Days with different patterns of quotes sit in different blocks; evaluating some of them must give
    exactly the rows of the full evaluation."""
    rng = np.random.default_rng(5)
    days = np.datetime64("2036-02-02") + np.arange(9).astype("timedelta64[D]")
    t = np.array([1 / 12, 0.25, 0.5, 1, 2, 3, 5, 7, 10, 20, 30])
    q = 0.03 + 0.01 * (1 - np.exp(-t / 3))[None, :] + rng.normal(0, 0.001, (9, t.size))
    q[[1, 4], 3] = np.nan  # a second pattern
    q[7, 5:7] = np.nan      # a third
    cfg = CurveConfig(name="c", quote="zero", compounding="annual", calendar=CAL)
    cs = build_curves(days, TENORS, q, cfg, method=method)
    times = np.sort(rng.uniform(0.0, 35.0, (9, 20)), axis=1)
    full = cs.ln_discount(times)
    for rows in ([0, 4, 7], [4], [8, 1], list(range(9))):
        part = cs.ln_discount_rows(np.array(rows), times[rows])
        assert np.array_equal(part, full[rows], equal_nan=True)
