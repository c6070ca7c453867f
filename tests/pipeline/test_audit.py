"""Forecast-audit statistics against outside references.

Sources named beside each check:
- statsmodels 0.15 (reference implementation, tests/REFERENCES.md #20): ``OLS(...).fit(cov_type="HAC",
  cov_kwds={"maxlags": L})`` for Newey-West, ``wald_test(..., use_f=False)``,
  ``stats.sandwich_covariance.S_hac_simple`` and ``tsa.stattools.diebold_mariano_test``;
- tests/REFERENCES.md #19: Diebold & Mariano (1995) with the Harvey, Leybourne & Newbold (1997)
  correction, published check value from the README of the PyPI package ``dieboldmariano``;
- tests/REFERENCES.md #21: Fama & Bliss (1987), estimators checked on synthetic data with known slope;
- plain pandas recomputations (rolling means, moments, hit rate).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.sandwich_covariance import S_hac_simple
from statsmodels.tsa.stattools import diebold_mariano_test

from pipeline.audit import (
    MIN_OBS,
    SUMMARY_COLUMNS,
    TERM_PREMIUM_COLUMNS,
    overlap_horizon,
    premium_band_critical,
    summarize,
    term_premium,
    verdict,
)
from pipeline.audit.hac import bartlett_long_run, diebold_mariano, hac_mean, rolling_mean_hac_se
from pipeline.dates import BusinessCalendar, as_days

CAL = BusinessCalendar.of()
RTOL = 1e-8  # the contract's agreement with a direct statsmodels computation


def make_outcomes(n: int, h: int, premium_bp: float, *, seed: int = 0, start: int = 3, tenor: int = 12,
                  curve: str = "govt", beta: float = 0.6, inverted_share: float = 0.3) -> pd.DataFrame:
    """Outcomes of an h-step forecast on a random-walk rate (so errors are MA(h-1) plus a premium).

    The as-of dates are consecutive business days; each target is h observations later.
    ``forward - spot = premium + beta * (expected change) + noise``; the realised change is the
    sum of the next h daily moves, part of which the forward anticipates (Fama-Bliss slope ~ beta).
    """
    rng = np.random.default_rng(seed)
    days = CAL.business_days("2001-01-01", "2080-12-31")[: n + h]
    drift = np.repeat(rng.normal(0, 2e-5, (n + h) // 50 + 1), 50)[: n + h]  # slowly varying, forecastable
    level = 0.04 + np.cumsum(drift + rng.normal(0, 4e-4, n + h))
    spot = level[:n]
    realized = level[h : n + h]
    expected = np.convolve(drift, np.ones(h), "valid")[1 : n + 1]
    forward = spot + premium_bp / 1e4 + beta * expected + rng.normal(0, 2e-4, n)
    inverted = np.repeat(rng.random(n // 40 + 1) < inverted_share, 40)[:n]  # episodes, not coin flips
    return pd.DataFrame({
        "curve": curve, "as_of": days[:n], "start_months": start, "tenor_months": tenor,
        "target_date": days[h : n + h], "forward_rate": forward, "realized_rate": realized,
        "spot_rate": spot, "error_bp": (forward - realized) * 1e4, "rw_error_bp": (spot - realized) * 1e4,
        "inverted": inverted,
    })


def row_of(summary: pd.DataFrame, regime: str = "all", **keys) -> pd.Series:
    sel = summary["regime"] == regime
    for k, v in keys.items():
        sel &= summary[k] == v
    assert sel.sum() == 1
    return summary.loc[sel].iloc[0]


# ---------------------------------------------------------------- overlap horizon
def test_overlap_horizon_plain_count():
    """h = median count of as-of dates in (as_of, target] (contract), by a plain loop."""
    o = make_outcomes(300, 17, 0.0)
    a, t = o["as_of"].tolist(), o["target_date"].tolist()
    inside = [sum(1 for x in a if ai < x <= ti) for ai, ti in zip(a, t, strict=True) if ti <= a[-1]]
    assert overlap_horizon(o["as_of"], o["target_date"]) == int(np.median(inside)) == 17


def test_overlap_horizon_extrapolates_past_the_sample():
    """A sample shorter than the horizon is not taken for a short horizon (module docstring)."""
    o = make_outcomes(40, 120, 0.0)  # every target beyond the last as-of date
    # counted on the average calendar spacing of the 40 dates (weekends make it approximate);
    # the in-sample count alone would give at most 39
    assert abs(overlap_horizon(o["as_of"], o["target_date"]) - 120) <= 6
    assert overlap_horizon(o["as_of"][:1], o["target_date"][:1]) == 1
    assert overlap_horizon(o["as_of"], o["as_of"]) == 1  # same-day targets: at least 1


# ---------------------------------------------------------------- kernels vs statsmodels
@pytest.mark.parametrize("lags", [0, 1, 7, 250, 1999, 4000], ids=lambda L: f"L{L}")
def test_bartlett_kernel_equals_statsmodels(lags):
    """Block-sum identity = statsmodels' S_hac_simple (loop over lags), 2 columns, lags up to > n."""
    rng = np.random.default_rng(lags)
    g = np.cumsum(rng.normal(size=(2000, 2)), axis=0) * 0.1 + rng.normal(size=(2000, 2))
    np.testing.assert_allclose(bartlett_long_run(g, lags), S_hac_simple(g, nlags=lags), rtol=1e-10)


@pytest.mark.parametrize(("window", "lags"), [(50, 0), (250, 62), (1000, 999), (3000, 2519)],
                         ids=["w50-L0", "w250-L62", "w1000-L999", "w3000-L2519"])
def test_rolling_hac_equals_statsmodels_on_slices(window, lags):
    """Each window's SE = statsmodels OLS-on-constant HAC fitted to that slice (sampled windows)."""
    o = make_outcomes(6000, 2520, 40.0, seed=3)  # a ten-year-ahead daily horizon: very persistent errors
    e = o["error_bp"].to_numpy()
    mean, se = rolling_mean_hac_se(e, window, lags)
    for i in (0, 1, 777, len(mean) // 2, len(mean) - 1):
        fit = sm.OLS(e[i : i + window], np.ones(window)).fit(cov_type="HAC", cov_kwds={"maxlags": lags})
        assert mean[i] == pytest.approx(fit.params[0], rel=1e-12)
        assert se[i] == pytest.approx(fit.bse[0], rel=RTOL)


# ---------------------------------------------------------------- summarize vs statsmodels
@pytest.mark.parametrize(("n", "h"), [(400, 1), (2500, 21), (3000, 252), (1500, 700)],
                         ids=["h1", "h21", "h252", "h700-short"])
def test_summary_matches_statsmodels(n, h):
    """hac_t, DM, MZ and FB equal direct statsmodels computations on the same outcomes to 1e-8."""
    o = make_outcomes(n, h, 35.0, seed=n + h)
    row = row_of(summarize(o))
    assert row["lags"] == max(overlap_horizon(o["as_of"], o["target_date"]) - 1, 0) == h - 1
    L = int(row["lags"])
    e, rw = o["error_bp"].to_numpy(), o["rw_error_bp"].to_numpy()
    real, fwd, spot = (o[c].to_numpy() for c in ("realized_rate", "forward_rate", "spot_rate"))
    hac = {"cov_type": "HAC", "cov_kwds": {"maxlags": L}}

    # Newey-West t of the mean error (statsmodels OLS on a constant)
    fit = sm.OLS(e, np.ones(n)).fit(**hac)
    assert row["mean_error_bp"] == pytest.approx(fit.params[0], rel=1e-12)
    assert row["hac_se_bp"] == pytest.approx(fit.bse[0], rel=RTOL)
    assert row["hac_t"] == pytest.approx(fit.tvalues[0], rel=RTOL)

    # Diebold-Mariano, HLN form: statsmodels' own test with the same lags and horizon ...
    dm = diebold_mariano_test(real, fwd, spot, lags=L, harvey_adj=True, horizon=h)
    assert row["dm_stat"] == pytest.approx(dm.statistic, rel=RTOL)
    assert row["dm_pvalue"] == pytest.approx(dm.pvalue, rel=1e-6, abs=1e-12)
    # ... and from its definition: HAC t of d = e_fwd^2 - e_rw^2, times the HLN factor, t(n-1)
    d_fit = sm.OLS(e**2 - rw**2, np.ones(n)).fit(**hac)
    hln = np.sqrt((n + 1 - 2 * h + h * (h - 1) / n) / n)
    assert row["dm_stat"] == pytest.approx(hln * d_fit.tvalues[0], rel=RTOL)
    assert row["dm_pvalue"] == pytest.approx(2 * stats.t.sf(abs(hln * d_fit.tvalues[0]), n - 1), rel=1e-6)

    # Mincer-Zarnowitz: realised on forward, joint chi-square Wald test of (0, 1)
    mz = sm.OLS(real, sm.add_constant(fwd)).fit(**hac)
    assert row["mz_alpha"] == pytest.approx(mz.params[0], rel=RTOL, abs=1e-14)
    assert row["mz_beta"] == pytest.approx(mz.params[1], rel=RTOL)
    wald = mz.wald_test((np.eye(2), np.array([0.0, 1.0])), use_f=False, scalar=True)
    assert row["mz_pvalue"] == pytest.approx(float(wald.pvalue), rel=1e-6, abs=1e-300)

    # Fama-Bliss: realised change on the forward-spot spread
    fb = sm.OLS(real - spot, sm.add_constant(fwd - spot)).fit(**hac)
    assert row["fb_beta"] == pytest.approx(fb.params[1], rel=RTOL)
    assert row["fb_beta_se"] == pytest.approx(fb.bse[1], rel=RTOL)
    assert row["fb_r2"] == pytest.approx(fb.rsquared, rel=RTOL)


def test_fama_bliss_recovers_known_slope():
    """tests/REFERENCES.md #21: test the estimator where the true slope is known (0.6 by construction)."""
    rng = np.random.default_rng(11)
    n, h = 4000, 5
    spread = rng.normal(0, 0.002, n)
    change = 0.6 * spread + np.convolve(rng.normal(0, 0.001, n + h - 1), np.ones(h) / np.sqrt(h), "valid")
    days = CAL.business_days("2001-01-01", "2030-12-31")
    spot = np.full(n, 0.03)
    o = pd.DataFrame({
        "curve": "c", "as_of": days[:n], "start_months": 1, "tenor_months": 3, "target_date": days[h : n + h],
        "forward_rate": spot + spread, "realized_rate": spot + change, "spot_rate": spot,
    })
    o["error_bp"] = (o["forward_rate"] - o["realized_rate"]) * 1e4
    o["rw_error_bp"] = (o["spot_rate"] - o["realized_rate"]) * 1e4
    row = row_of(summarize(o))
    assert abs(row["fb_beta"] - 0.6) < 2.5 * row["fb_beta_se"]
    assert 0.5 < row["fb_r2"] < 0.68  # 0.36 var(spread) / (0.36 var(spread) + var(noise)) = 0.59


def test_dm_published_value():
    """tests/REFERENCES.md #19 (dieboldmariano README; Diebold & Mariano 1995 with HLN 1997):
    actuals 10..50, forecasts A and B, h = 1, squared error: DM = -2.2229922805746782, one-sided
    p = 0.04515565862099125 (our p-value is two-sided: twice that)."""
    actual = np.array([10.0, 20, 30, 40, 50])
    a = np.array([11.0, 21, 29, 42, 53])
    b = np.array([13.0, 26, 24, 40, 59])
    stat, p = diebold_mariano(a - actual, b - actual, h=1, lags=0)
    assert stat == pytest.approx(-2.2229922805746782, rel=1e-12)
    assert p / 2 == pytest.approx(0.04515565862099125, rel=1e-10)
    # the uncorrected statistic (published -2.48538) is the plain HAC t of the loss differential
    t0 = sm.OLS((a - actual) ** 2 - (b - actual) ** 2, np.ones(5)).fit(cov_type="HAC", cov_kwds={"maxlags": 0})
    assert t0.tvalues[0] == pytest.approx(-2.48538, abs=5e-6)
    assert stat == pytest.approx(np.sqrt(0.8) * t0.tvalues[0], rel=1e-12)


# ---------------------------------------------------------------- moments, regimes, small samples
def test_moments_and_hit_rate_plain_pandas():
    o = make_outcomes(1200, 10, -20.0, seed=5)
    o.loc[o.index[::97], "forward_rate"] = o["spot_rate"]  # some forwards predict no move: excluded
    o["error_bp"] = (o["forward_rate"] - o["realized_rate"]) * 1e4
    row = row_of(summarize(o))
    e, rw = o["error_bp"], o["rw_error_bp"]
    assert row["n"] == 1200
    assert row["first_as_of"] == o["as_of"].min() and row["last_as_of"] == o["as_of"].max()
    assert row["mean_error_bp"] == pytest.approx(e.mean(), rel=1e-12)
    assert row["median_error_bp"] == pytest.approx(e.median(), rel=1e-12)
    assert row["std_error_bp"] == pytest.approx(e.std(), rel=1e-12)  # pandas: ddof = 1
    assert row["rmse_bp"] == pytest.approx(np.sqrt((e**2).mean()), rel=1e-12)
    assert row["mae_bp"] == pytest.approx(e.abs().mean(), rel=1e-12)
    assert row["rw_rmse_bp"] == pytest.approx(np.sqrt((rw**2).mean()), rel=1e-12)
    assert row["rmse_ratio"] == pytest.approx(row["rmse_bp"] / row["rw_rmse_bp"], rel=1e-12)
    pred = np.sign(o["forward_rate"] - o["spot_rate"])
    real = np.sign(o["realized_rate"] - o["spot_rate"])
    assert row["hit_rate"] == pytest.approx((pred == real)[pred != 0].mean(), rel=1e-12)


def test_regimes_are_the_statistics_of_their_subsets():
    """'inverted' / 'normal' rows equal an 'all' summary computed on the subset alone."""
    o = make_outcomes(3000, 21, 10.0, seed=8)
    s = summarize(o)
    assert s["regime"].tolist() == ["all", "inverted", "normal"]
    for regime, subset in (("inverted", o[o["inverted"]]), ("normal", o[~o["inverted"]])):
        got = row_of(s, regime).drop("regime")
        want = row_of(summarize(subset.assign(inverted=False)), "all").drop("regime")
        pd.testing.assert_series_equal(got, want, check_names=False)
    assert row_of(s, "inverted")["n"] + row_of(s, "normal")["n"] == row_of(s)["n"]


def test_small_and_empty_groups():
    """n >= 1: moments; HAC figures need n >= MIN_OBS and h < n; an empty regime has no row."""
    big = make_outcomes(500, 5, 3.0, inverted_share=0.0, seed=1)
    tiny = make_outcomes(MIN_OBS - 1, 1, 3.0, start=6, seed=2)
    single = make_outcomes(1, 1, 3.0, start=9, seed=3)
    s = summarize(pd.concat([big, tiny, single], ignore_index=True))
    assert list(s.columns) == list(SUMMARY_COLUMNS)
    assert len(s.query("start_months == 3 and regime == 'inverted'")) == 0  # never inverted: no row
    t = row_of(s, start_months=6)
    assert t["n"] == MIN_OBS - 1 and np.isfinite(t[["mean_error_bp", "rmse_bp", "std_error_bp"]].astype(float)).all()
    assert t[["hac_t", "dm_stat", "mz_pvalue", "fb_beta"]].astype(float).isna().all()
    one = row_of(s, start_months=9)
    assert one["n"] == 1 and np.isnan(one["std_error_bp"]) and np.isfinite(one["mae_bp"])
    assert np.isfinite(row_of(s, start_months=3)["hac_t"])


def test_start_zero_forward_is_the_spot():
    """Start 0: forward = spot, so DM and Fama-Bliss have nothing to test (NaN, not a crash)."""
    o = make_outcomes(300, 1, 0.0, start=0, seed=4)
    o["forward_rate"] = o["spot_rate"]
    o["error_bp"] = o["rw_error_bp"]
    row = row_of(summarize(o))
    assert np.isnan(row["dm_stat"]) and np.isnan(row["fb_beta"]) and np.isnan(row["hit_rate"])
    assert row["rmse_ratio"] == 1.0


def test_window_by_as_of():
    o = make_outcomes(1000, 5, 3.0)
    first, last = o["as_of"].iloc[100], o["as_of"].iloc[599]
    row = row_of(summarize(o, first=first, last=last))
    assert row["n"] == 500 and row["first_as_of"] == first and row["last_as_of"] == last
    assert row["mean_error_bp"] == pytest.approx(o["error_bp"].iloc[100:600].mean(), rel=1e-12)


def test_groups_are_separate_and_order_free():
    a = make_outcomes(800, 5, 10.0, seed=1, start=3, tenor=12)
    b = make_outcomes(900, 21, -5.0, seed=2, start=12, tenor=12)
    c = make_outcomes(700, 5, 1.0, seed=3, curve="swap")
    mixed = pd.concat([a, b, c], ignore_index=True).sample(frac=1.0, random_state=0)
    s = summarize(mixed)
    for part in (a, b, c):
        k = part.iloc[0]
        got = row_of(s, curve=k["curve"], start_months=k["start_months"], tenor_months=k["tenor_months"])
        want = row_of(summarize(part))
        pd.testing.assert_series_equal(got, want, check_names=False)


# ---------------------------------------------------------------- term premium
@pytest.mark.parametrize(("window", "h"), [(250, 21), (500, 63), (100, 252)],
                         ids=["w250-h21", "w500-h63", "w100-h252-capped"])
def test_term_premium_equals_rolling_and_statsmodels(window, h):
    """premium = plain pandas rolling mean; band = statsmodels HAC on the same slice (sampled)."""
    o = pd.concat([make_outcomes(1500, h, 30.0, seed=1), make_outcomes(1200, 5, -10.0, seed=2, start=1)])
    o = o.sample(frac=1.0, random_state=1)
    tp = term_premium(o, window)
    assert list(tp.columns) == list(TERM_PREMIUM_COLUMNS) and (tp["window_days"] == window).all()
    for start, hh in ((3, h), (1, 5)):
        g = o[o["start_months"] == start].sort_values("as_of").reset_index(drop=True)
        got = tp[tp["start_months"] == start].reset_index(drop=True)
        roll = g["error_bp"].rolling(window).mean()
        assert len(got) == len(g) - window + 1
        np.testing.assert_array_equal(got["as_of"].to_numpy(), g["as_of"].to_numpy()[window - 1 :])
        np.testing.assert_allclose(got["premium_bp"], roll.iloc[window - 1 :], rtol=1e-10)
        lags = min(hh - 1, window - 1)
        # the band's critical value: the overlap-aware fixed-b one (its table is checked against
        # simulation and Kiefer-Vogelsang in test_contenders_fixed_b.py), wider than the normal's
        crit = premium_band_critical(window, hh)
        if hh >= 0.9 * window:  # about one forecast period in the window: no band
            assert np.isnan(crit) and got["lower_bp"].isna().all() and got["upper_bp"].isna().all()
            continue
        assert crit > stats.norm.ppf(0.975)
        for i in (0, 13, len(got) // 3, len(got) - 1):
            sl = g["error_bp"].to_numpy()[i : i + window]
            fit = sm.OLS(sl, np.ones(window)).fit(cov_type="HAC", cov_kwds={"maxlags": lags})
            half = crit * fit.bse[0]  # statsmodels' HAC standard error, scaled by that value
            assert got["upper_bp"][i] - got["premium_bp"][i] == pytest.approx(half, rel=RTOL)
            assert got["premium_bp"][i] - got["lower_bp"][i] == pytest.approx(half, rel=RTOL)


def test_term_premium_needs_a_full_window():
    o = make_outcomes(99, 5, 1.0)
    assert term_premium(o, 100).empty
    assert len(term_premium(o, 99)) == 1


# ---------------------------------------------------------------- recovering a known premium
def test_hac_band_covers_known_premium():
    """Errors = known premium + MA(h-1) noise: the HAC 95 % interval covers the premium about as
    often as Bartlett weights with h-1 lags allow, and far more often than ignoring the overlap
    (Newey-West 1987, tests/REFERENCES.md #20: h-1 lags for overlapping h-step errors).

    For equal-weight MA(h-1) noise the true long-run variance is h^2 s^2, while Bartlett with h-1
    lags converges to h s^2 (1 + (h-1)(2h-1)/(3h)), about 2/3 of it: the nominal 95 % interval
    then covers with probability 2 Phi(1.96 sqrt(ratio)) - 1 (0.89 for h = 20), not 0.95.
    """
    rng = np.random.default_rng(2024)
    n, h, premium, reps = 1500, 20, 25.0, 400
    days = CAL.business_days("2001-01-01", "2030-12-31")
    hits_hac = hits_naive = 0
    for _ in range(reps):  # test-side Monte Carlo loop
        e = premium + np.convolve(rng.normal(0, 10, n + h - 1), np.ones(h), "valid")
        lags = overlap_horizon(days[:n], days[h : n + h]) - 1
        m, se = hac_mean(e, lags)
        hits_hac += abs(m - premium) <= 1.96 * se
        m0, se0 = hac_mean(e, 0)
        hits_naive += abs(m0 - premium) <= 1.96 * se0
    ratio = (1 + (h - 1) * (2 * h - 1) / (3 * h)) / h
    expected = 2 * stats.norm.cdf(1.96 * np.sqrt(ratio)) - 1
    assert 0.88 < expected < 0.90
    assert abs(hits_hac / reps - expected) < 0.04  # binomial sd with 400 draws: 0.016
    assert hits_naive / reps < 0.6


def test_term_premium_band_covers_at_its_nominal_rate_under_overlap():
    """800 independent windows (one cell each) of 250 errors = 25 bp premium + MA(24) noise, the
    overlap of a 25-day-ahead forecast: the view's fixed-b band covers the premium within
    [92 %, 98 %] of the time, while the plain +-1.96 Newey-West band covers too rarely (for equal
    weights, Bartlett with h-1 lags takes about 2/3 of the long-run variance: Newey-West 1987,
    tests/REFERENCES.md #20; and the window is short next to the bandwidth). Seed 404, 800
    replications: binomial sd of the coverage about 0.8 %."""
    rng = np.random.default_rng(404)
    reps, w, h, premium = 800, 250, 25, 25.0
    days = CAL.business_days("2001-01-01", "2010-12-31")[: w + h]
    e = premium + np.stack([np.convolve(rng.normal(0, 5, w + h - 1), np.ones(h), "valid") for _ in range(reps)])
    o = pd.DataFrame({
        "curve": "govt", "as_of": np.tile(days[:w], reps), "start_months": 1,
        "tenor_months": np.repeat(np.arange(1, reps + 1), w), "target_date": np.tile(days[h : w + h], reps),
        "error_bp": e.ravel(),
    })
    tp = term_premium(o, w)
    assert len(tp) == reps  # one full window a cell
    covered = ((tp["lower_bp"] <= premium) & (tp["upper_bp"] >= premium)).mean()
    half = tp["upper_bp"] - tp["premium_bp"]
    plain = (np.abs(tp["premium_bp"] - premium) <= 1.959964 * half / premium_band_critical(w, h)).mean()
    assert 0.92 <= covered <= 0.98, covered
    assert plain < 0.88, plain


def test_summary_and_term_premium_recover_known_premium():
    """One long synthetic record with a 40 bp premium: summarize's HAC interval and most of the
    term-premium bands contain it; a record with no premium is not found significant."""
    o = make_outcomes(8000, 63, 40.0, seed=9, beta=0.0)
    row = row_of(summarize(o))
    assert abs(row["mean_error_bp"] - 40.0) <= 1.96 * row["hac_se_bp"]
    assert row["hac_t"] > 1.96
    tp = term_premium(o, 1000)
    covered = ((tp["lower_bp"] <= 40.0) & (tp["upper_bp"] >= 40.0)).mean()
    assert covered > 0.8
    zero = row_of(summarize(make_outcomes(8000, 63, 0.0, seed=9, beta=0.0)))
    assert abs(zero["hac_t"]) < 1.96


# ---------------------------------------------------------------- verdict
def _row(**over):
    # h = 250: 4,800 outcomes hold 19.2 non-overlapping periods
    base = {"curve": "govt", "start_months": 24, "tenor_months": 12, "regime": "all", "n": 4800,
            "mean_error_bp": 85.0, "std_error_bp": 60.0, "hac_t": 3.1, "dm_stat": 0.9, "dm_pvalue": 0.31,
            "rmse_ratio": 1.04, "n_effective": 19.2, "hac_pvalue": 0.004, "dm_pvalue_fixed_b": 0.31,
            "indicative": False}
    base.update(over)
    return pd.Series(base)


@pytest.mark.parametrize(
    ("over", "expected"),
    [
        ({}, "forwards over-predicted the realised 1Y rate 2Y ahead by 85.0 bp on average "
             "(HAC t = 3.1, fixed-b p = 0.004, n = 4,800, about 19 independent periods); no better than "
             "no-change (DM fixed-b p = 0.31, RMSE ratio 1.04)"),
        ({"mean_error_bp": -12.34, "hac_t": -0.8, "hac_pvalue": 0.6, "dm_stat": -3.0, "dm_pvalue": 0.001,
          "dm_pvalue_fixed_b": 0.004, "rmse_ratio": 0.9},
         "forwards under-predicted the realised 1Y rate 2Y ahead by 12.3 bp on average "
         "(HAC t = -0.8, fixed-b p = 0.60, n = 4,800, about 19 independent periods; not significant at 5 %); "
         "more accurate than no-change (DM fixed-b p = 0.004, RMSE ratio 0.90)"),
        ({"dm_stat": 2.5, "dm_pvalue": 0.002, "dm_pvalue_fixed_b": 0.01, "regime": "inverted", "start_months": 3,
          "tenor_months": 3},
         "inverted curves: forwards over-predicted the realised 3M rate 3M ahead by 85.0 bp on average "
         "(HAC t = 3.1, fixed-b p = 0.004, n = 4,800, about 19 independent periods); less accurate than "
         "no-change (DM fixed-b p = 0.01, RMSE ratio 1.04)"),
        ({"n": 5, "n_effective": 5.0, "indicative": True, "hac_t": np.nan, "hac_pvalue": np.nan, "dm_stat": np.nan,
          "dm_pvalue": np.nan, "dm_pvalue_fixed_b": np.nan},
         "forwards over-predicted the realised 1Y rate 2Y ahead by 85.0 bp on average "
         "(n = 5, no overlap, too few outcomes for a HAC test; indicative only); too few outcomes to compare "
         "with no-change, RMSE ratio 1.04"),
        # the normal reading would call both significant (|t| > 1.96, DM p < 0.05); the fixed-b one decides
        ({"hac_t": 2.5, "hac_pvalue": 0.12, "dm_stat": 2.4, "dm_pvalue": 0.02, "dm_pvalue_fixed_b": 0.2},
         "forwards over-predicted the realised 1Y rate 2Y ahead by 85.0 bp on average "
         "(HAC t = 2.5, fixed-b p = 0.12, n = 4,800, about 19 independent periods; not significant at 5 %); "
         "no better than no-change (DM fixed-b p = 0.20, RMSE ratio 1.04)"),
        # the case of the issue: 1-year-ahead forwards on a 3-year store, h = 250
        ({"n": 489, "n_effective": 1.956, "indicative": True, "mean_error_bp": 42.0, "hac_t": -5.9,
          "hac_pvalue": 0.09, "dm_stat": -1.0, "dm_pvalue": 0.3, "dm_pvalue_fixed_b": 0.52},
         "forwards over-predicted the realised 1Y rate 2Y ahead by 42.0 bp on average "
         "(HAC t = -5.9, fixed-b p = 0.09, n = 489, about 2 independent periods; not significant at 5 %; "
         "indicative only); no better than no-change (DM fixed-b p = 0.52, RMSE ratio 1.04)"),
        ({"hac_pvalue": 3e-9, "dm_stat": -8.0, "dm_pvalue_fixed_b": 2e-7, "n_effective": 9.6, "indicative": True,
          "n": 2400},
         "forwards over-predicted the realised 1Y rate 2Y ahead by 85.0 bp on average "
         "(HAC t = 3.1, fixed-b p < 0.001, n = 2,400, fewer than 10 independent periods; indicative only); "
         "more accurate than no-change (DM fixed-b p < 0.001, RMSE ratio 1.04)"),
        # overlap beyond the fixed-b table (h / n > 0.9): a HAC t, but no test
        ({"n": 100, "n_effective": 100 / 95, "indicative": True, "hac_pvalue": np.nan, "dm_pvalue_fixed_b": np.nan},
         "forwards over-predicted the realised 1Y rate 2Y ahead by 85.0 bp on average "
         "(HAC t = 3.1, n = 100, about 1 independent period; too few independent periods for a test; "
         "indicative only); too few independent periods to compare with no-change, RMSE ratio 1.04"),
    ],
    ids=["over-no-better", "under-better", "inverted-worse", "too-few", "normal-says-yes-fixed-b-no",
         "issue-case-indicative", "tiny-p", "beyond-table"],
)
def test_verdict_wording(over, expected):
    text = verdict(_row(**over))
    assert text == expected
    for advice in ("should", "recommend", "buy", "sell", "hedge", "we "):
        assert advice not in text


def test_verdict_on_real_summary_rows():
    s = summarize(pd.concat([make_outcomes(2000, 21, 15.0), make_outcomes(2000, 21, 15.0, start=12)]))
    lines = [verdict(r) for _, r in s.iterrows()]
    assert len(lines) == len(s) and all(line.startswith(("forwards", "inverted", "normal")) for line in lines)


def test_as_days_round_trip_of_outputs():
    """Dates come back as datetime64 columns readable by the rest of the pipeline."""
    o = make_outcomes(50, 2, 1.0)
    s = summarize(o)
    assert as_days(s["first_as_of"].to_numpy())[0] == as_days(o["as_of"].to_numpy())[0]


# ---------------------------------------------------------------- incremental state (pipeline.audit.state)
# Reference: summarize / term_premium / overlap_horizon over the whole record (themselves checked
# against statsmodels above), and statsmodels directly where named.
from pipeline.audit.state import (  # noqa: E402
    BAND,
    LAG_BAND,
    TAIL_COLUMNS,
    append_cell,
    bartlett_cross,
    bartlett_cross_band,
    build_cell,
    cell_summary,
    premium_increment,
)

STATE_RTOL = 1e-9  # incremental against full recompute


def _cell_rows(o: pd.DataFrame) -> dict:
    return {c: o[c].to_numpy() for c in TAIL_COLUMNS}


def _grow(o: pd.DataFrame, first: int, steps: list[int], window: int | None = 250):
    """Build on o[:first], then append chunks of sizes cycling through ``steps``; a None from
    append_cell rebuilds from the record so far (what the store code does). Returns the state, the
    number of rebuilds and the premium increments."""
    state, tail = build_cell(_cell_rows(o.iloc[:first]), window=window)
    i, j, rebuilds, premium = first, 0, 0, []
    while i < len(o):
        k = steps[j % len(steps)]
        new = _cell_rows(o.iloc[i : i + k])
        res = append_cell(state, tail, new, window=window)
        if res is None:
            rebuilds += 1
            state, tail = build_cell(_cell_rows(o.iloc[: i + k]), window=window)
        else:
            if window:
                premium.append(premium_increment(tail, new, window, res[0].premium_lags))
            state, tail = res
        i, j = i + k, j + 1
    return state, rebuilds, premium


def _assert_row_equal(got: dict, ref: pd.Series) -> None:
    for c in SUMMARY_COLUMNS[4:]:
        a, b = got[c], ref[c]
        if c in ("n", "lags", "first_as_of", "last_as_of", "indicative"):
            assert a == b, c
        elif "pvalue" in c and np.isfinite(b) and b > 0:
            assert np.log(a) == pytest.approx(np.log(b), rel=STATE_RTOL, abs=1e-12), c  # far-tail p-values
        elif "pvalue" in c and np.isfinite(b):
            assert a < 1e-300, c  # underflowed to 0 on the reference side
        elif np.isfinite(b):
            assert a == pytest.approx(b, rel=STATE_RTOL, abs=1e-12), c
        else:
            assert not np.isfinite(a), c


def test_bartlett_cross_equals_statsmodels():
    """statsmodels' S_hac_simple on 11 columns (the state's cross moments), lags below and above n."""
    rng = np.random.default_rng(2)
    W = np.cumsum(rng.normal(size=(900, 11)), axis=0) * 0.1 + rng.normal(size=(900, 11))
    for lags in (0, 5, 300, 1200):
        np.testing.assert_allclose(bartlett_cross(W, lags), S_hac_simple(W, nlags=lags), rtol=1e-10)


@pytest.mark.parametrize(("n", "h", "steps"), [(600, 1, [1]), (2500, 21, [1, 3, 1, 7]), (3000, 252, [1, 2, 40]),
                                               (1500, 700, [1, 5])],
                         ids=["h1-daily", "h21-mixed", "h252-batches", "h700-short"])
def test_state_grown_day_by_day_equals_summarize(n, h, steps):
    """Every statistic of every regime, the state appended a few rows at a time vs the whole record."""
    o = make_outcomes(n, h, 35.0, seed=n + h)
    ref = summarize(o)
    masks = {"all": np.ones(n, bool), "inverted": o["inverted"].to_numpy(), "normal": ~o["inverted"].to_numpy()}
    for regime, mask in masks.items():
        sub = o.loc[mask].reset_index(drop=True)
        state, _, _ = _grow(sub, len(sub) // 2, steps, 250 if regime == "all" else None)
        _assert_row_equal(cell_summary(state), row_of(ref, regime))
        # the overlap horizon from histogram + open rows equals the direct count
        assert state.horizon == overlap_horizon(sub["as_of"], sub["target_date"])


def test_state_with_a_steady_spread_matches_statsmodels():
    """A forward-spot spread that barely moves (a steady slope): the Fama-Bliss SE, whose uncentred
    sums would cancel, still equals statsmodels' HAC OLS."""
    o = make_outcomes(800, 30, 10.0, seed=4, beta=0.0)
    rng = np.random.default_rng(9)
    o["forward_rate"] = o["spot_rate"] + 0.001 + rng.normal(0, 1e-6, len(o))
    o["error_bp"] = (o["forward_rate"] - o["realized_rate"]) * 1e4
    state, _, _ = _grow(o, 400, [1, 2])
    got = cell_summary(state)
    real, fwd, spot = (o[c].to_numpy() for c in ("realized_rate", "forward_rate", "spot_rate"))
    fb = sm.OLS(real - spot, sm.add_constant(fwd - spot)).fit(cov_type="HAC", cov_kwds={"maxlags": got["lags"]})
    assert got["fb_beta"] == pytest.approx(fb.params[1], rel=1e-8)
    assert got["fb_beta_se"] == pytest.approx(fb.bse[1], rel=1e-8)
    _assert_row_equal(got, row_of(summarize(o)))


def test_premium_increments_equal_term_premium():
    o = make_outcomes(2000, 130, 40.0, seed=8)
    _, rebuilds, pieces = _grow(o, 1000, [1, 2, 1, 9])
    assert rebuilds == 0
    ref = term_premium(o, 250).set_index("as_of")
    a = np.concatenate([p["as_of"] for p in pieces])
    assert a.size == 1000  # one window per appended row
    r = ref.loc[pd.DatetimeIndex(a)]
    np.testing.assert_allclose(np.concatenate([p["premium_bp"] for p in pieces]), r["premium_bp"], rtol=STATE_RTOL)
    se = np.concatenate([p["se_bp"] for p in pieces])
    crit = premium_band_critical(250, 130)
    assert np.isfinite(crit)
    np.testing.assert_allclose(se * crit, r["upper_bp"] - r["premium_bp"], rtol=STATE_RTOL)


def test_append_refuses_what_it_cannot_fold_in():
    """A row not after the last as-of date, or a change of the Newey-West lag, means a recompute."""
    o = make_outcomes(900, 21, 0.0, seed=1)
    state, tail = build_cell(_cell_rows(o.iloc[:300]))
    assert append_cell(state, tail, _cell_rows(o.iloc[299:301])) is None  # overlaps the last as-of date
    assert append_cell(state, tail, _cell_rows(o.iloc[[301, 300]])) is None  # not in order
    assert append_cell(state, tail, _cell_rows(o.iloc[300:301])) is not None
    # more rows than the record holds, with targets much further out: the median count moves
    far = o.iloc[300:900].copy()
    far["target_date"] = far["target_date"] + np.timedelta64(400, "D")
    assert overlap_horizon(o["as_of"], pd.concat([o["target_date"][:300], far["target_date"]])) != state.horizon
    assert append_cell(state, tail, _cell_rows(far)) is None


def test_median_band_gives_up_when_the_median_leaves_it():
    """New errors all above the band push the median rank out of it: until then the median is exact."""
    o = make_outcomes(3000, 1, 0.0, seed=6)
    state, tail = build_cell(_cell_rows(o.iloc[:1000]))
    high = o.iloc[1000:].copy()
    high["error_bp"] = 1e4 + np.arange(len(high))  # far above every earlier error
    errors = list(o["error_bp"].iloc[:1000])
    for i in range(len(high)):
        res = append_cell(state, tail, _cell_rows(high.iloc[i : i + 1]))
        if res is None:
            break
        state, tail = res
        errors.append(high["error_bp"].iloc[i])
        assert cell_summary(state)["median_error_bp"] == np.median(errors)
    assert res is None and BAND <= i <= 2 * BAND + 2  # the rank moves half a place a row


def _daily_dates(o: pd.DataFrame, offsets: np.ndarray) -> pd.DataFrame:
    """``o`` on consecutive calendar days, each target ``offsets[i]`` days after its as-of date: the
    overlap count of row i is exactly offsets[i] (the average spacing is one day, so a target past
    the sample is counted as if the days went on)."""
    o = o.copy()
    a = np.datetime64("2031-01-01") + np.arange(len(o))
    o["as_of"] = a
    o["target_date"] = a + np.asarray(offsets, dtype=np.int64)
    return o


def test_bartlett_cross_band_equals_statsmodels():
    rng = np.random.default_rng(3)
    W = rng.normal(size=(400, 11)) + np.cumsum(rng.normal(size=(400, 11)), axis=0) * 0.05
    got = bartlett_cross_band(W, [0, 1, 7, 399, 500])
    for i, lags in enumerate((0, 1, 7, 399, 500)):
        np.testing.assert_allclose(got[i], S_hac_simple(W, nlags=lags), rtol=1e-10)  # statsmodels


@pytest.mark.parametrize("window", [None, 8], ids=["regime-cell", "premium-cell"])
def test_lag_flipping_every_day_needs_no_recompute(window):
    """Counts alternating 20, 21, 20, ...: the median is 21 on an even-sized record (20.5 rounded up)
    and 20 on an odd-sized one, so h and the Newey-West lag flip with every appended row. Each
    append stays incremental and equals summarize over the record so far (premium: term_premium)."""
    n, first = 450, 250
    o = _daily_dates(make_outcomes(n, 21, 25.0, seed=11), 20 + np.arange(n) % 2)
    state, tail = build_cell(_cell_rows(o.iloc[:first]), window=window)
    assert list(state.lag_band) == list(range(state.lags - LAG_BAND, state.lags + LAG_BAND + 1))
    lags, pieces = set(), []
    for i in range(first, n):
        new = _cell_rows(o.iloc[i : i + 1])
        res = append_cell(state, tail, new, window=window)
        assert res is not None, i
        if window:
            pieces.append(premium_increment(tail, new, window, res[0].premium_lags))
        state, tail = res
        got = cell_summary(state)
        ref = row_of(summarize(o.iloc[: i + 1]))  # the whole record's figures (checked against statsmodels above)
        _assert_row_equal(got, ref)
        lags.add(got["lags"])
        # the tail holds what the band's largest lag needs, the cells' state stays O(h)
        assert tail["as_of"].size >= min(int(state.lag_band[-1]), state.n)
    assert lags == {19, 20}  # the lag did flip
    if window:
        ref = term_premium(o, window).set_index("as_of")
        r = ref.loc[pd.DatetimeIndex(np.concatenate([p["as_of"] for p in pieces]))]
        np.testing.assert_allclose(np.concatenate([p["premium_bp"] for p in pieces]), r["premium_bp"],
                                   rtol=STATE_RTOL)
        se = np.concatenate([p["se_bp"] for p in pieces])
        assert np.isnan(premium_band_critical(window, 20)) and np.isnan(premium_band_critical(window, 21))
        assert r["upper_bp"].isna().all()  # h above the window: no band, on both paths
        # the increments' standard errors are still the whole record's, lag capped at window - 1
        _, whole_se = rolling_mean_hac_se(o["error_bp"].to_numpy(), window, window - 1)
        np.testing.assert_allclose(se, whole_se[first - window + 1:], rtol=STATE_RTOL)


def test_lag_leaving_the_band_means_a_recompute():
    """200 rows with count 20 (lag 19, band 17..21), then rows with count 23: the median moves to
    21.5 (lag 21, inside the band, still incremental and exact) and then to 23 (lag 22, outside:
    None). A rebuild centres the band on the new lag and goes on incrementally."""
    n0 = 200
    o = _daily_dates(make_outcomes(n0 + 300, 21, -10.0, seed=12), np.where(np.arange(n0 + 300) < n0, 20, 23))
    state, tail = build_cell(_cell_rows(o.iloc[:n0]))
    assert state.lags == 19 and list(state.lag_band) == [17, 18, 19, 20, 21]
    seen = set()
    for i in range(n0, n0 + 300):
        res = append_cell(state, tail, _cell_rows(o.iloc[i : i + 1]))
        if res is None:
            break
        state, tail = res
        if state.lags not in seen or i % 20 == 0:  # each new lag, and now and then
            _assert_row_equal(cell_summary(state), row_of(summarize(o.iloc[: i + 1])))
        seen.add(state.lags)
    assert res is None and 21 in seen
    # the record up to the refused row has the lag 22, outside the band (summarize: overlap_horizon)
    assert overlap_horizon(o["as_of"][: i + 1], o["target_date"][: i + 1]) - 1 == 22
    state, tail = build_cell(_cell_rows(o.iloc[: i + 1]))
    assert list(state.lag_band) == [20, 21, 22, 23, 24]
    res = append_cell(state, tail, _cell_rows(o.iloc[i + 1 : i + 2]))
    assert res is not None
    _assert_row_equal(cell_summary(res[0]), row_of(summarize(o.iloc[: i + 2])))
