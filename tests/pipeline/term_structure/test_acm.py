"""The Adrian-Crump-Moench term premium: the reference implementation, invariants, a known economy.

References: the PyPI package ``pyacm`` (2.x, ``NominalACM``; REFERENCES item 29, conventions in
PITFALLS) given the same month-end panel as ``curve`` with ``curve_m=None`` (a monthly panel
resamples to itself) and the same K; a Gaussian affine economy simulated here with known prices of
risk (the pricing recursion of Adrian, Crump & Moench 2013, eq. for A_n, B_n); the invented demo
market of ``pipeline.demo`` (read only).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from pyacm import NominalACM

from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.demo import GOVT_TENORS, generate_market
from pipeline.tenors import parse_tenor
from pipeline.term_structure import (
    MODEL_COLUMNS,
    ModelInputError,
    fit_acm,
    longest_tenor_months,
    model_term_premium,
    realtime_fits,
    term_panel,
    term_panel_from_yields,
)
from tests.pipeline.term_structure.panels import irates_panel, month_ends, synthetic_yields

TOL = 1e-8  # decimals (1e-4 bp), the agreement with pyacm


def _pyacm(panel, k: int) -> NominalACM:
    curve = pd.DataFrame(panel.zero_cc, index=pd.DatetimeIndex(panel.as_of), columns=range(1, panel.max_months + 1))
    return NominalACM(curve, None, n_factors=k)


def _irates_500():
    # 500 month ends: sklearn's PCA uses its exact ("full") SVD up to 500 rows; beyond that it
    # switches to a randomized one, which is not what a 1e-8 comparison should rest on
    p = irates_panel()
    return term_panel_from_yields(p.as_of[:500], p.zero_cc[:500], "us")


@pytest.mark.parametrize("source, k", [("irates", 5), ("synthetic", 5), ("synthetic", 3)],
                         ids=["irates-K5", "synthetic-K5", "synthetic-K3"])
def test_full_sample_fit_matches_pyacm(source, k):
    if source == "irates":
        panel = _irates_500()
    else:
        panel = term_panel_from_yields(month_ends("1990-01", 360), synthetic_yields(7, 360), "syn")
    ref = _pyacm(panel, k)
    out = model_term_premium(panel, k, fits=("full",), daily=False)
    assert tuple(out.columns) == MODEL_COLUMNS
    wide = {c: out.pivot(index="as_of", columns="maturity_months", values=c).to_numpy()
            for c in ("model_yield", "risk_neutral_yield", "term_premium")}
    np.testing.assert_allclose(wide["model_yield"], ref.miy.to_numpy(), rtol=0, atol=TOL)
    np.testing.assert_allclose(wide["risk_neutral_yield"], ref.rny.to_numpy(), rtol=0, atol=TOL)
    np.testing.assert_allclose(wide["term_premium"], ref.tp.to_numpy(), rtol=0, atol=TOL)
    assert (out["estimated_through"] == pd.Timestamp(panel.as_of[-1])).all()
    assert (out["fit"] == "full").all()


def test_prices_of_risk_at_zero_give_no_term_premium():
    panel = term_panel_from_yields(month_ends("1990-01", 240), synthetic_yields(9, 240, n=60), "syn")
    priced = fit_acm(panel, 5)
    neutral = fit_acm(panel, 5, price_risk=False)
    model, rn = neutral.yields(panel.zero_cc)
    assert np.all(model - rn == 0.0)  # exactly: the model is the risk-neutral one
    # the risk-neutral side never depends on the prices of risk
    np.testing.assert_array_equal(rn, priced.yields(panel.zero_cc)[1])
    assert np.abs(priced.lambda0).max() > 0  # and the priced fit really has some


@pytest.fixture(scope="module")
def demo_panel():
    """The demo's government curve (par quotes, monotone convex) at its 360 month ends."""
    market = generate_market()
    ends = market.calendar.month_ends(market.days[0], market.days[-1])
    quotes = market.quotes["govt"].loc[pd.DatetimeIndex(ends)].to_numpy()
    cfg = CurveConfig(name="govt", quote="par", compounding="semiannual", day_count="ACT/365F",
                      calendar=market.calendar, tenors=tuple(parse_tenor(t) for t in GOVT_TENORS))
    cs = build_curves(ends, list(GOVT_TENORS), quotes, cfg)
    panel = term_panel(cs, longest_tenor_months(GOVT_TENORS), 120, "govt", calendar=market.calendar)
    assert panel.as_of.size == 360 and panel.max_months == 120
    return panel


def test_model_yields_stay_within_two_bp_of_the_demo_panel(demo_panel):
    # K = 5, full sample: measured largest gap 1.8 bp, root mean square 0.24 bp (the demo is an
    # exact 3-factor economy; the gap is the par bootstrap's interpolation between quoted tenors).
    # Its known 10-year premium is 1.47 %; the fit's sample mean was 1.50 % (plausibility, not asserted).
    fit = fit_acm(demo_panel, 5)
    model, _ = fit.yields(demo_panel.zero_cc)
    gap_bp = (model - demo_panel.zero_cc) * 1e4
    assert np.abs(gap_bp).max() < 2.0
    assert np.sqrt(np.mean(gap_bp**2)) < 0.5
    assert fit.problem() is None and fit.fit_rmse_bp < 0.5


def test_realtime_passes_over_month_ends_whose_estimate_is_unusable(demo_panel):
    # Short windows on the demo (K = 5) give explosive VARs during the 2001 tightening and prices of
    # risk that miss the curve by hundreds of bp around 2006-2008 (measured: up to 4.8e5 = 48,000,000 %
    # at 10 years before these month ends were passed over). Every real-time row must come from a
    # usable estimate and stay plausible next to the demo's known 1.47 % ten-year premium.
    fits = realtime_fits(demo_panel, 5, 60)
    bad = {str(f.estimated_through): f.problem() for f in fits if f.problem() is not None}
    assert bad["2001-05-31"].startswith("VAR not stationary")
    assert bad["2008-02-29"].startswith("model yields miss the panel")
    out = model_term_premium(demo_panel, 5, daily=False)
    rt = out[out["fit"] == "realtime"]
    used = set(rt["estimated_through"].dt.strftime("%Y-%m-%d"))
    assert used.isdisjoint(bad)
    assert rt["term_premium"].abs().max() < 0.05
    # a month end passed over keeps the previous usable estimate, named by estimated_through
    may_2001 = rt[rt["as_of"] == pd.Timestamp("2001-05-31")]
    assert (may_2001["estimated_through"] < pd.Timestamp("2001-05-31")).all() and len(may_2001) == 120


# --- a simulated Gaussian affine economy with known prices of risk (monthly, K = 3) --------------
PHI = np.diag([0.985, 0.95, 0.85])
VOL = np.diag(np.sqrt(1.0 - np.diag(PHI) ** 2))  # unit-variance factors
DELTA0, DELTA1 = 0.045 / 12.0, np.array([0.015, -0.008, 0.004]) / 12.0
LAMBDA0 = np.array([-0.03, 0.0, 0.0])
LAMBDA1 = np.array([[0.0, 0.015, 0.0], [0.0, 0.0, 0.0], [0.0, 0.0, 0.0]])


def _log_price_coefficients(lambda0, lambda1, n=120):
    """ln P(n) = A_n + B_n' X with A_0 = 0, B_0 = 0 (Adrian, Crump & Moench 2013)."""
    sigma = VOL @ VOL.T
    a, b = np.zeros(n + 1), np.zeros((n + 1, 3))
    for j in range(1, n + 1):
        a[j] = a[j - 1] + b[j - 1] @ (-lambda0) + 0.5 * b[j - 1] @ sigma @ b[j - 1] - DELTA0
        b[j] = b[j - 1] @ (PHI - lambda1) - DELTA1
    return a[1:], b[1:]


def test_a_simulated_affine_economy_gives_back_its_term_premium():
    a, b = _log_price_coefficients(LAMBDA0, LAMBDA1)
    a_rn, b_rn = _log_price_coefficients(np.zeros(3), np.zeros((3, 3)))
    years = np.arange(1, 121) / 12.0
    ends = month_ends("1980-01", 480)
    errors = []
    for rep in range(40):  # 40 seeded replications of 480 months each
        rng = np.random.default_rng(1000 + rep)
        x = np.zeros((680, 3))
        for t in range(1, 680):  # the simulator only
            x[t] = PHI @ x[t - 1] + VOL @ rng.standard_normal(3)
        x = x[200:]
        y = -(a + x @ b.T) / years
        true_tp = y - (-(a_rn + x @ b_rn.T) / years)
        observed = y + rng.normal(0.0, 0.5e-4, y.shape)  # half a basis point of noise
        panel = term_panel_from_yields(ends, observed, "sim")
        model, rn = fit_acm(panel, 3).yields(panel.zero_cc)
        est = model - rn
        errors.append([est[:, n - 1].mean() - true_tp[:, n - 1].mean() for n in (24, 60, 120)])
    err = np.array(errors)
    # the true mean premium (about 0.43 %, 1.04 %, 1.61 % at 2, 5, 10 years) lies inside the
    # estimates' sampling band: the mean error is within 3 standard errors of zero ...
    mean, sd = err.mean(axis=0), err.std(axis=0, ddof=1)
    assert np.all(np.abs(mean) < 3.0 * sd / np.sqrt(len(err))), (mean, sd)
    # ... and the band itself is informative (measured sd: about 0.1 %, 0.3 %, 0.5 %)
    assert np.all(sd < [0.003, 0.006, 0.008]), sd


# --- real time --------------------------------------------------------------------------------------
def _daily(seed: int = 21, months: int = 150, n: int = 36):
    """Business days of ``months`` months and smooth daily yields (a daily AR panel)."""
    days = np.arange(np.datetime64("1995-01-02"), np.datetime64("1995-01") + months)
    days = days[np.is_busday(days)]
    return days, synthetic_yields(seed, days.size, n=n, noise_bp=0.5)


def test_each_day_uses_the_latest_fit_estimated_through_it():
    days, y = _daily()
    panel = term_panel_from_yields(days, y, "rt")
    out = model_term_premium(panel, 3, min_months=36)
    rt = out[out["fit"] == "realtime"]
    full = out[out["fit"] == "full"]
    assert len(full) == days.size * 36
    first = panel.as_of[35]  # the 36th month end is the first estimate
    assert pd.Timestamp(rt["as_of"].min()) == pd.Timestamp(first)
    as_of = rt["as_of"].to_numpy().astype("datetime64[D]")
    through = rt["estimated_through"].to_numpy().astype("datetime64[D]")
    latest = panel.as_of[np.searchsorted(panel.as_of, as_of, side="right") - 1]
    np.testing.assert_array_equal(through, latest)
    # the last month end's real-time estimate is the full-sample fit
    last = rt[rt["as_of"] == pd.Timestamp(panel.as_of[-1])]["term_premium"].to_numpy()
    last_full = full[full["as_of"] == pd.Timestamp(panel.as_of[-1])]["term_premium"].to_numpy()
    np.testing.assert_allclose(last, last_full, rtol=0, atol=1e-10)


def test_later_quotes_never_change_an_earlier_estimate():
    days, y = _daily()
    panel = term_panel_from_yields(days, y, "rt")
    cut = panel.as_of[80]  # month M
    later = days > cut
    changed = y.copy()
    changed[later] += 0.004 + 0.01 * np.sin(np.arange(int(later.sum())))[:, None] * 1e-2
    other = term_panel_from_yields(days, changed, "rt")
    a = model_term_premium(panel, 3, min_months=36)
    b = model_term_premium(other, 3, min_months=36)
    # every real-time row estimated through M or before, on a day up to M, is unchanged (1e-12:
    # floating-point noise at most; a look-ahead would move rates by basis points)
    for frame in (a, b):
        frame["key"] = (frame["fit"] == "realtime") & (frame["estimated_through"] <= pd.Timestamp(cut)) \
            & (frame["as_of"] <= pd.Timestamp(cut))
    old, new = a[a["key"]], b[b["key"]]
    assert len(old) == len(new) > 0
    for c in ("model_yield", "risk_neutral_yield", "term_premium"):
        np.testing.assert_allclose(new[c].to_numpy(), old[c].to_numpy(), rtol=0, atol=1e-12)
    # the fits through M are the same; those after M, and the full-sample fit, did change
    fa, fb = realtime_fits(panel, 3, 36), realtime_fits(other, 3, 36)
    for x, z in zip(fa, fb, strict=True):
        same = x.estimated_through <= cut
        diff = max(np.abs(x.a - z.a).max(), np.abs(x.b - z.b).max(), np.abs(x.loadings - z.loadings).max())
        assert (diff <= 1e-12) if same else (diff > 1e-6), (x.estimated_through, diff)
    moved = np.abs(a.loc[a["fit"] == "full", "term_premium"].to_numpy()
                   - b.loc[b["fit"] == "full", "term_premium"].to_numpy()).max()
    assert moved > 1e-6


# --- bad input --------------------------------------------------------------------------------------
def test_a_curve_shorter_than_two_years_is_refused_in_one_line():
    tenors = ["1M", "3M", "6M", "1Y", "18M"]
    days = month_ends("2000-01", 120)
    cfg = CurveConfig(name="mm", quote="zero", compounding="continuous", interpolation="linear_zero",
                      tenors=tuple(parse_tenor(t) for t in tenors))
    quotes = 0.02 + 0.001 * np.arange(5)[None, :] + 1e-4 * np.sin(np.arange(120))[:, None]
    panel = term_panel(build_curves(days, tenors, quotes, cfg), longest_tenor_months(tenors), 120, "mm")
    assert panel.max_months == 18
    with pytest.raises(ModelInputError) as err:
        model_term_premium(panel)
    msg = str(err.value)
    assert "\n" not in msg and "'mm'" in msg and "at least 24 months" in msg and "18M" in msg


@pytest.mark.parametrize("kwargs, words", [
    ({"factors": 0}, "factors must be"),
    ({"min_months": 5}, "min_months must be at least 13"),
    ({"min_months": 400}, "the model needs at least 400"),
    ({"fits": ("weekly",)}, "unknown fit"),
], ids=["no-factors", "tiny-window", "too-few-months", "bad-fit"])
def test_bad_settings_are_one_line_refusals(kwargs, words):
    panel = term_panel_from_yields(month_ends("1990-01", 120), synthetic_yields(4, 120, n=30), "c")
    with pytest.raises(ModelInputError, match=words) as err:
        model_term_premium(panel, **{"factors": 5, **kwargs})
    assert "\n" not in str(err.value)


def test_a_month_without_a_built_day_is_skipped_and_named_not_bridged():
    days, y = month_ends("1990-01", 150), synthetic_yields(6, 150, n=36)
    keep = ~np.isin(np.arange(150), [40, 90, 91])
    panel = term_panel_from_yields(days[keep], y[keep], "gap")
    assert panel.skipped_months == ("1993-05", "1997-07", "1997-08")
    fit = fit_acm(panel, 3)
    # the VAR pairs only calendar neighbours: 147 month ends, 146 steps between rows, 2 of them
    # across a gap (39 -> 41, 89 -> 92)
    assert fit.months == 147 and fit.pairs == 144
    x = fit.factors
    pairs = np.flatnonzero(panel.follows())
    design = np.column_stack([np.ones(pairs.size), x[pairs]])
    phi = np.linalg.lstsq(design, x[pairs + 1], rcond=None)[0][1:].T  # numpy's SVD solver, independently
    np.testing.assert_allclose(fit.phi, phi, rtol=0, atol=1e-10)
    out = model_term_premium(panel, 3, min_months=36, daily=False)
    assert not out[["model_yield", "risk_neutral_yield", "term_premium"]].isna().any().any()
    assert set(out["as_of"].dt.strftime("%Y-%m")).isdisjoint(panel.skipped_months)
