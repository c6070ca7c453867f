"""Nelson-Siegel-Svensson: the Federal Reserve's published rows, and the per-day fit.

Reference: Gürkaynak, Sack & Wright (2007) and the Federal Reserve staff data file (tests/REFERENCES.md #15,
seen): zero yields (continuous), instantaneous forwards and par yields (coupon-equivalent) from the
published parameters, to the published 4 decimals (percent).
"""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.config import CurveConfig
from pipeline.curves import build_curves, nss_curves
from pipeline.dates import BusinessCalendar, maturity_dates, year_fraction

# tests/REFERENCES.md #15: b0, b1, b2, b3, tau1, tau2 (percent; taus in years)
GSW = {
    "1961-06-14": {
        "params": [3.91760612208239, -1.2779552459795, -1.94939709504669, 0.0, 0.339217585301823, 1.0],
        "n": [1, 2, 3, 4, 5, 6, 7],
        "zero": [2.9825, 3.3771, 3.5530, 3.6439, 3.6987, 3.7351, 3.7612],
        "forward": [3.5492, 3.8825, 3.9149, 3.9174, 3.9176, 3.9176, 3.9176],
        "par_n": [1, 2, 7],
        "par": [3.0025, 3.3973, 3.7787],
    },
    "2026-02-06": {
        "params": [2.48148959982137, 1.23169757714238, 8.33064972598025e-05, 8.61660816724105,
                   1.05093501341198, 17.7605928411708],
        "n": [1, 2, 5, 10, 20, 30],
        "zero": [3.5098, 3.4824, 3.7457, 4.2926, 4.9222, 5.0924],
        "forward": [3.4157, 3.5321, 4.3226, 5.2444, 5.6282, 5.1694],
        "par_n": [1, 2, 5, 10, 20, 30],
        "par": [3.5414, 3.5136, 3.7669, 4.2634, 4.7710, 4.9056],
    },
}
HALF_UNIT = 0.5e-4 + 1e-9  # published to 4 decimals of a percent


def _curve(day: str):
    p = np.array(GSW[day]["params"], dtype=float)
    p[:4] /= 100.0  # decimals
    return nss_curves(np.array([day], dtype="datetime64[D]"), p[None, :])


@pytest.mark.parametrize("day", sorted(GSW), ids=sorted(GSW))
def test_published_zero_yields_and_forwards(day):
    c, row = _curve(day), GSW[day]
    n = np.array([row["n"]], dtype=float)
    zero = c.zero_rate(n)[0] * 100
    fwd = c.instantaneous_forward(n)[0] * 100
    for k, (ez, az, ef, af) in enumerate(zip(row["zero"], zero, row["forward"], fwd, strict=True)):
        assert abs(az - ez) < HALF_UNIT, f"{day} zero {row['n'][k]}y: expected {ez}, actual {az}, diff {az - ez}"
        assert abs(af - ef) < HALF_UNIT, f"{day} fwd {row['n'][k]}y: expected {ef}, actual {af}, diff {af - ef}"


@pytest.mark.parametrize("day", sorted(GSW), ids=sorted(GSW))
def test_published_par_yields(day):
    # source: tests/REFERENCES.md #15 formula: par = 200 (1 - D(n)) / sum_{k=1}^{2n} D(k/2)
    c, row = _curve(day), GSW[day]
    for n, expected in zip(row["par_n"], row["par"], strict=True):
        half = np.arange(1, 2 * n + 1)[None, :] / 2.0
        d = c.discount(half)[0]
        actual = 200.0 * (1.0 - d[-1]) / d.sum()
        assert abs(actual - expected) < HALF_UNIT, f"{day} par {n}y: expected {expected}, actual {actual}"


TENORS = ["3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y"]


def _synthetic(days: int):
    rng = np.random.default_rng(3)
    b = np.column_stack([0.045 + np.cumsum(rng.normal(0, 2e-4, days)), -0.015 + np.cumsum(rng.normal(0, 2e-4, days)),
                         np.full(days, -0.01), np.full(days, 0.012), np.full(days, 1.6), np.full(days, 9.0)])
    return b


def test_fit_reproduces_nss_generated_quotes_and_is_warm_started():
    cfg = CurveConfig(name="n", quote="zero", compounding="continuous", calendar=BusinessCalendar.of([]))
    days = np.datetime64("2030-01-01") + np.arange(40).astype("timedelta64[D]")
    truth = nss_curves(days, _synthetic(40))
    # quotes at the curve's own maturities: zeros of the true curve at the node times
    node_t = np.column_stack([year_fraction(days, maturity_dates(days, t, cfg.calendar), "ACT/365F") for t in TENORS])
    quotes = truth.zero_rate(node_t)
    built = build_curves(days, TENORS, quotes, cfg, method="nss")
    assert built.ok.all(), built.reason
    assert built.params.shape == (40, 6)
    fitted = built.zero_rate(node_t)
    err = np.max(np.abs(fitted - quotes))
    assert err < 1e-7, f"NSS fit error {err}"
    # warm starts keep the taus on a continuous path from day to day
    assert np.max(np.abs(np.diff(built.params[:, 4]))) < 0.5


def test_warm_start_vector_is_used_and_few_quotes_refused():
    cfg = CurveConfig(name="n", quote="zero", compounding="continuous")
    days = np.array(["2030-01-02", "2030-01-03"], dtype="datetime64[D]")
    q = np.full((2, len(TENORS)), np.nan)
    q[0] = np.linspace(0.03, 0.05, len(TENORS))
    q[1, 0] = 0.03
    start = np.array([0.05, -0.02, 0.0, 0.0, 2.0, 12.0])
    built = build_curves(days, TENORS, q, cfg, method="nss", warm_start=start)
    assert built.ok.tolist() == [True, False]
    assert "at least 2" in built.reason[1]
    assert np.isnan(built.params[1]).all()
    np.testing.assert_array_equal(start, [0.05, -0.02, 0.0, 0.0, 2.0, 12.0])  # not mutated
