"""Compounding conversions: Hull's worked conversions (tests/REFERENCES.md #5) and round trips."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from pipeline.compounding import discount_from_rate, from_continuous, rate_from_discount, to_continuous
from pipeline.config import COMPOUNDINGS

# tests/REFERENCES.md #5 (Hull, compounding conversions; seen): (rate, from, to, published, decimals of the
# published value in percent)
HULL = [
    (0.06, "annual", "continuous", 5.83, 2),
    (0.05, "continuous", "semiannual", 5.06, 2),
    (0.10, "semiannual", "continuous", 9.758, 3),
    (0.08, "continuous", "quarterly", 8.08, 2),
]


@pytest.mark.parametrize(("rate", "src", "dst", "published", "places"), HULL,
                         ids=[f"{s}-to-{d}" for _, s, d, _, _ in HULL])
def test_hull_conversions(rate, src, dst, published, places):
    actual = float(from_continuous(to_continuous(rate, src, 1.0), dst, 1.0)) * 100
    assert round(actual, places) == published, f"expected {published}, actual {actual}"


def test_hull_semiannual_to_quarterly():
    # source: tests/REFERENCES.md #5 (Hull): 12 % semiannual = 11.83 % quarterly
    actual = float(from_continuous(to_continuous(0.12, "semiannual", 1.0), "quarterly", 1.0)) * 100
    assert round(actual, 2) == 11.83, f"expected 11.83, actual {actual}"


def test_closed_forms():
    # source: tests/REFERENCES.md #5 closed forms: 2 ln 1.05 and 4 (e^0.02 - 1)
    assert abs(float(to_continuous(0.10, "semiannual", 3.0)) - 2 * math.log(1.05)) < 1e-15
    assert abs(float(from_continuous(0.08, "quarterly", 0.1)) - 4 * math.expm1(0.02)) < 1e-15


@pytest.mark.parametrize(("rate", "comp", "tau", "expected"), [
    (0.05, "simple", 0.5, 1 / 1.025),
    (0.05, "annual", 2.0, 1.05**-2),
    (0.05, "semiannual", 0.25, 1.025**-0.5),  # shorter than one period: still (1 + r/m)^(-m t)
    (0.05, "monthly", 1.0, (1 + 0.05 / 12) ** -12),
    (0.05, "continuous", 3.0, math.exp(-0.15)),
], ids=["simple", "annual", "semiannual-short", "monthly", "continuous"])
def test_discount_factors_by_definition(rate, comp, tau, expected):
    # source: the definitions of each compounding (common trade practice)
    actual = float(discount_from_rate(rate, comp, tau))
    assert abs(actual - expected) < 1e-15, f"expected {expected}, actual {actual}"


@settings(max_examples=300, deadline=None)
@given(r=st.floats(-0.05, 0.4), tau=st.floats(0.003, 50.0), comp=st.sampled_from(COMPOUNDINGS))
def test_round_trips(r, tau, comp):
    # a simple rate with r * tau <= -1 has no discount factor (1 + r tau would not be positive)
    assume(comp != "simple" or 1.0 + r * tau > 0.05)
    back = float(from_continuous(to_continuous(r, comp, tau), comp, tau))
    assert abs(back - r) < 1e-13, (r, back)
    df = discount_from_rate(r, comp, tau)
    assert abs(float(rate_from_discount(df, comp, tau)) - r) < 1e-11 * max(1.0, 1.0 / tau)


def test_arrays_broadcast_and_inputs_are_not_mutated():
    r = np.array([[0.01, 0.02, 0.03]])
    tau = np.array([[0.5], [2.0]])
    r0, t0 = r.copy(), tau.copy()
    out = discount_from_rate(r, "simple", tau)
    assert out.shape == (2, 3)
    np.testing.assert_array_equal(r, r0)
    np.testing.assert_array_equal(tau, t0)


def test_zero_length_and_impossible_rates():
    assert float(to_continuous(0.05, "simple", 0.0)) == 0.05  # the limit, no division by zero
    assert np.isnan(rate_from_discount(0.99, "annual", 0.0))
    assert np.isnan(to_continuous(-3.0, "semiannual", 1.0))
    with pytest.raises(ValueError, match="allowed"):
        to_continuous(0.05, "weekly", 1.0)
