"""Forecast contenders: built-ins, scores, pairwise tests, the confidence set and verdicts.

Sources named beside each check:
- statsmodels 0.15: ``tsa.stattools.diebold_mariano_test`` (lags passed explicitly,
  ``harvey_adj=True``), ``OLS(...).fit(cov_type="HAC")``, ``stats.sandwich_covariance.S_hac_simple``;
- Clark & West (2007): the adjusted loss differential f = e1^2 - (e2^2 - (f1 - f2)^2) on a constant;
- Giacomini & White (2006): with the constant instrument alone the test is the unconditional DM
  test, so its Wald statistic is the DM t squared;
- Hansen, Lunde & Nason (2011) as implemented by ``arch.bootstrap.MCS`` (PyPI arch) and,
  independently, ``model_confidence_set.ModelConfidenceSet`` (PyPI model-confidence-set);
- plain-Python / pandas recomputations for the trailing premium and the known-lag instrument.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.stats.sandwich_covariance import S_hac_simple
from statsmodels.tsa.stattools import diebold_mariano_test

from pipeline.audit.hac import hac_mean
from pipeline.contenders import builtin_contenders, compare, is_user_name, trailing_premium
from pipeline.contenders.cells import aligned_cells
from pipeline.contenders.comparisons import clark_west, diebold_mariano_hln, giacomini_white, known_lag_index
from pipeline.contenders.confidence_set import cell_confidence_set
from pipeline.contenders.forecasts import CONTENDER_OUTCOME_COLUMNS, attach_outcomes
from pipeline.dates import BusinessCalendar

CAL = BusinessCalendar.of()


def overlap_path(rng: np.random.Generator, n: int, h: int, scale_bp: float = 10.0) -> np.ndarray:
    """Realised minus spot (bp) of n overlapping h-step forecasts on a random walk: MA(h-1)."""
    return np.convolve(rng.normal(0, scale_bp, n + h - 1), np.ones(h), "valid")


def outcomes_frame(n: int, h: int, *, seed: int = 0, premium_bp: float = 30.0, start: int = 3,
                   tenor: int = 12, curve: str = "govt") -> pd.DataFrame:
    """Forward outcomes of one cell: as-of dates are business days, targets h days later."""
    rng = np.random.default_rng(seed)
    days = CAL.business_days("2001-01-01", "2080-12-31")[: n + h]
    spot = 0.04 + np.cumsum(rng.normal(0, 4e-4, n + h))
    realized = spot[h : n + h]
    fwd = spot[:n] + premium_bp / 1e4 + rng.normal(0, 2e-4, n)
    return pd.DataFrame({
        "curve": curve, "as_of": days[:n], "start_months": start, "tenor_months": tenor,
        "target_date": days[h : n + h], "observed_on": days[h : n + h], "forward_rate": fwd,
        "realized_rate": realized, "spot_rate": spot[:n], "error_bp": (fwd - realized) * 1e4,
        "rw_error_bp": (spot[:n] - realized) * 1e4,
    })


# ---------------------------------------------------------------- built-in contenders
def test_trailing_premium_equals_a_plain_loop():
    """Mean of the last `window` errors observed on or before the as-of date (plain Python loop)."""
    o = outcomes_frame(400, 15, seed=1)
    o.loc[o.index[::7], "observed_on"] = o["observed_on"].iloc[::7] + np.timedelta64(2, "D")  # late days
    prem, k = trailing_premium(o, o, window=50, min_history=20)
    obs, asof, err = o["observed_on"].to_numpy(), o["as_of"].to_numpy(), o["error_bp"].to_numpy()
    for i in range(0, 400, 13):
        known = sorted((obs[j], asof[j], err[j]) for j in range(400) if obs[j] <= asof[i])
        assert k[i] == len(known)
        if len(known) < 20:
            assert np.isnan(prem[i])
        else:
            assert prem[i] == pytest.approx(np.mean([e for *_, e in known[-50:]]), rel=1e-12)


def test_builtin_rows_and_columns():
    o = pd.concat([outcomes_frame(300, 10, seed=2), outcomes_frame(200, 5, seed=3, start=12, curve="swap")])
    co = builtin_contenders(o, window=40, min_history=30)
    assert tuple(co.columns) == CONTENDER_OUTCOME_COLUMNS
    counts = co.groupby("contender").size()
    assert counts["forward"] == counts["no_change"] == 500
    assert 0 < counts["premium_adjusted"] < 500  # absent until 30 outcomes are known
    fwd = co[co["contender"] == "forward"]
    merged = fwd.merge(o, on=["curve", "as_of", "start_months", "tenor_months"])
    assert np.array_equal(merged["error_bp_x"].to_numpy(), merged["error_bp_y"].to_numpy())  # realize's own bp
    assert not co.duplicated(["curve", "contender", "as_of", "start_months", "tenor_months"]).any()


def test_premium_adjusted_has_no_look_ahead():
    """Forecasts before D are byte-identical when every rate realised after D changes."""
    o = pd.concat([outcomes_frame(900, 60, seed=4), outcomes_frame(900, 20, seed=5, start=12)],
                  ignore_index=True)
    cut = o["as_of"].sort_values().iloc[500]
    changed = o.copy()
    late = changed["observed_on"] > cut
    changed.loc[late, "realized_rate"] += np.random.default_rng(0).normal(0, 0.01, late.sum())
    changed["error_bp"] = (changed["forward_rate"] - changed["realized_rate"]) * 1e4
    a = builtin_contenders(o, window=100, min_history=30)
    b = builtin_contenders(changed, window=100, min_history=30)
    sel = lambda f: f[(f["contender"] == "premium_adjusted") & (f["as_of"] < cut)]  # noqa: E731
    fa, fb_ = sel(a), sel(b)
    assert len(fa) > 300
    assert fa["forecast_rate"].to_numpy().tobytes() == fb_["forecast_rate"].to_numpy().tobytes()
    # and the change did reach the forecasts after D (the test can see a leak)
    after = lambda f: f[(f["contender"] == "premium_adjusted") & (f["as_of"] > cut)]  # noqa: E731
    assert not np.array_equal(after(a)["forecast_rate"].to_numpy(), after(b)["forecast_rate"].to_numpy())


def test_user_names_and_grid_attachment():
    assert is_user_name("house_view") and not is_user_name("forward") and not is_user_name("House")
    o = outcomes_frame(100, 5, seed=6)
    f = pd.DataFrame({"curve": "govt", "contender": "house_view", "as_of": o["as_of"].iloc[:50],
                      "start_months": 3, "tenor_months": 12, "forecast_rate": 0.05})
    off = f.iloc[:3].assign(start_months=7)
    got, left = attach_outcomes(pd.concat([f, off]), o)
    assert len(got) == 50 and len(left) == 3
    assert np.allclose(got["error_bp"], (0.05 - o["realized_rate"].iloc[:50].to_numpy()) * 1e4)


# ---------------------------------------------------------------- tests against references
def test_dm_hln_equals_statsmodels():
    """DM with the HLN factor = statsmodels diebold_mariano_test(lags=h-1, harvey_adj=True)."""
    rng = np.random.default_rng(7)
    n, h = 800, 12
    x = overlap_path(rng, n, h)
    y = np.zeros(n)
    fa, fb_ = -x + rng.normal(0, 5, n), -x + 3 + rng.normal(0, 5, n)  # forecasts of y in bp
    dm, p, p_plain = diebold_mariano_hln(fa - y, fb_ - y, h)
    ref = diebold_mariano_test(y, fa, fb_, lags=h - 1, harvey_adj=True, horizon=h)
    assert dm == pytest.approx(ref.statistic, rel=1e-9)
    assert p_plain == pytest.approx(ref.pvalue, rel=1e-7)
    assert 0 <= p <= 1


def test_clark_west_equals_statsmodels_ols():
    """CW t = HAC t of an OLS of f = e1^2 - (e2^2 - (f1 - f2)^2) on a constant (statsmodels)."""
    rng = np.random.default_rng(8)
    n, h = 600, 9
    x = overlap_path(rng, n, h)
    f1 = np.zeros(n)
    f2 = np.convolve(rng.normal(0, 1, n + 49), np.ones(50) / 50, "valid")[:n] * 20
    e1, e2 = f1 - x, f2 - x
    t, p, p_plain = clark_west(e1, e2, f1, f2, h)
    f = e1**2 - (e2**2 - (f1 - f2) ** 2)
    ref = sm.OLS(f, np.ones(n)).fit(cov_type="HAC", cov_kwds={"maxlags": h - 1})
    assert t == pytest.approx(ref.tvalues[0], rel=1e-9)
    assert p_plain == pytest.approx(ref.pvalues[0] / 2 if t > 0 else 1 - ref.pvalues[0] / 2, rel=1e-7)


def test_gw_unconditional_is_dm_squared_and_conditional_matches_statsmodels():
    """GW with the constant alone = (unscaled DM t)^2 (Giacomini-White's unconditional case); with
    (1, d_lag) the Wald statistic = gbar' (S/n^2)^-1 gbar with S statsmodels' S_hac_simple."""
    rng = np.random.default_rng(9)
    n, h = 700, 6
    x = overlap_path(rng, n, h)
    ea, eb = x + rng.normal(0, 4, n), x + 1 + rng.normal(0, 4, n)
    d = ea**2 - eb**2
    w, p, used = giacomini_white(d, None, h)
    m, se = hac_mean(d, h - 1)
    assert w == pytest.approx((m / se) ** 2, rel=1e-10) and used == n
    lag = np.arange(n) - h  # row i knows the outcome of row i - h
    lag[lag < 0] = -1
    w2, p2, used2 = giacomini_white(d, lag, h)
    g = np.column_stack([d[h:], d[h:] * d[:-h]])
    s = S_hac_simple(g - g.mean(0), nlags=h - 1)  # the kernel-weighted sum: Var(gbar) = S / n^2
    ref = len(g) ** 2 * g.mean(0) @ np.linalg.solve(s, g.mean(0))
    assert used2 == n - h and w2 == pytest.approx(ref, rel=1e-9) and 0 <= p2 <= 1


def test_known_lag_index_plain_loop():
    o = outcomes_frame(120, 7, seed=10)
    a, obs = o["as_of"].to_numpy(), o["observed_on"].to_numpy()
    got = known_lag_index(a, obs)
    for i in range(120):
        known = [j for j in range(120) if obs[j] <= a[i]]
        assert got[i] == (max(known) if known else -1)


# ---------------------------------------------------------------- simulations with a known answer
def _contender_frame(o: pd.DataFrame, name: str, forecast: np.ndarray) -> pd.DataFrame:
    return pd.DataFrame({
        "curve": o["curve"].to_numpy(), "contender": name, "as_of": o["as_of"].to_numpy(),
        "start_months": o["start_months"].to_numpy(), "tenor_months": o["tenor_months"].to_numpy(),
        "target_date": o["target_date"].to_numpy(), "observed_on": o["observed_on"].to_numpy(),
        "forecast_rate": forecast, "realized_rate": o["realized_rate"].to_numpy(),
        "error_bp": (forecast - o["realized_rate"].to_numpy()) * 1e4,
    })


def test_informed_contender_wins_and_a_biased_one_is_excluded():
    """A contender = realised rate + 2 bp noise is in the set and beats the forward (DM); one
    biased by 100 bp is excluded; the seeded MCS gives the same set on a rerun."""
    rng = np.random.default_rng(11)
    o = outcomes_frame(1500, 21, seed=11, premium_bp=40.0)
    real = o["realized_rate"].to_numpy()
    co = pd.concat([
        builtin_contenders(o, window=250, min_history=60),
        _contender_frame(o, "oracle", real + rng.normal(0, 2e-4, len(o))),
        _contender_frame(o, "biased", o["spot_rate"].to_numpy() + 0.01),
    ], ignore_index=True)
    c = compare(co)
    mcs = c.confidence_set.set_index("contender")
    assert bool(mcs.loc["oracle", "included"]) and not bool(mcs.loc["biased", "included"])
    assert not bool(mcs.loc["forward", "included"])
    dm = c.tests[(c.tests["test"] == "dm") & (c.tests["contender_a"] == "forward")
                 & (c.tests["contender_b"] == "oracle")].iloc[0]
    assert dm["statistic"] > 0 and dm["p_value"] < 0.05  # positive: the forward's loss is larger
    again = compare(co)
    pd.testing.assert_frame_equal(c.confidence_set, again.confidence_set)
    line = c.verdicts["verdict"].iloc[0]
    assert line.startswith("1Y rate 3M ahead: the oracle view is not beaten (MCS 10 %)") and "the biased view" in line


def test_threads_change_nothing_and_each_cell_is_arch_with_its_own_seed():
    """Cells of THREAD_MIN_DAYS days or more run on threads, shorter ones on the caller: 1, 2 and
    5 threads give the same frames bit for bit, and each cell's p-values are those of
    ``arch.bootstrap.MCS`` called directly with the cell's seed (so the thread a cell ran on cannot
    enter its bootstrap)."""
    from arch.bootstrap import MCS

    from pipeline.contenders.compare import THREAD_MIN_DAYS
    from pipeline.contenders.confidence_set import cell_seed

    rng = np.random.default_rng(31)
    parts = []
    for k, (start, tenor, curve, n) in enumerate([(3, 12, "govt", THREAD_MIN_DAYS + 400), (6, 24, "govt", 600),
                                                  (12, 12, "swap", THREAD_MIN_DAYS + 400), (3, 60, "swap", 700)]):
        o = outcomes_frame(n, 21 * max(start // 3, 1), seed=40 + k, start=start, tenor=tenor, curve=curve)
        parts += [builtin_contenders(o, window=100, min_history=30),
                  _contender_frame(o, "house_view", o["realized_rate"].to_numpy() + rng.normal(0, 8e-4, len(o)))]
    co = pd.concat(parts, ignore_index=True)
    assert sorted(c.n >= THREAD_MIN_DAYS for c in aligned_cells(co)) == [False, False, True, True]
    one = compare(co, workers=1)
    for w in (2, 5):
        other = compare(co, workers=w)
        for frame in ("scores", "tests", "confidence_set", "verdicts"):
            pd.testing.assert_frame_equal(getattr(one, frame), getattr(other, frame), check_exact=True)
    assert one.confidence_set.groupby(["curve", "start_months", "tenor_months"]).ngroups == 4
    assert one.confidence_set["mcs_p_value"].between(0.001, 0.999).any()  # not only the trivial 0 / 1
    for cell in aligned_cells(co):
        assert len(cell.names) == 4  # forward, premium_adjusted, house_view, no_change: all distinct here
        losses = cell.errors ** 2
        direct = MCS(losses, size=0.1, reps=1000, block_size=cell.h, method="R", bootstrap="circular",
                     seed=cell_seed(cell))
        direct.compute()
        got = one.confidence_set.set_index(["curve", "start_months", "tenor_months", "contender"])
        for j, name in enumerate(cell.names):
            assert got.loc[(cell.curve, cell.start_months, cell.tenor_months, name), "mcs_p_value"] == \
                float(direct.pvalues["Pvalue"].loc[j])


def test_mcs_agrees_with_the_independent_package():
    """On a clear-cut case (losses 0, 0.2, 5, 9 bp^2 apart, 2,000 days) arch's included set equals
    that of model-confidence-set (block bootstrap, block length h, 1,000 replications, 10 %)."""
    from arch.bootstrap import MCS
    from model_confidence_set import ModelConfidenceSet

    rng = np.random.default_rng(12)
    n, h = 2000, 5
    x = overlap_path(rng, n, h, 3.0)
    e = x[:, None] + np.array([0.0, 0.1, 10.0, 15.0]) + rng.normal(0, 2, (n, 4))
    losses = e**2
    a = MCS(losses, size=0.1, reps=1000, block_size=h, method="R", bootstrap="circular", seed=1)
    a.compute()
    b = ModelConfidenceSet(losses, n_boot=1000, alpha=0.1, block_len=h, bootstrap_variant="block", method="R")
    b.compute()
    assert sorted(a.included) == sorted(int(i) - 1 for i in b.included) == [0, 1]


def test_identical_contenders_share_one_column():
    """Start 0: forward = spot; the MCS runs without them colliding (no 0/0), same p-values."""
    o = outcomes_frame(400, 1, seed=13, premium_bp=0.0, start=0)
    o["forward_rate"] = o["spot_rate"]
    o["error_bp"] = o["rw_error_bp"]
    co = pd.concat([builtin_contenders(o, window=50, min_history=20),
                    _contender_frame(o, "house_view", o["spot_rate"].to_numpy() + 5e-4)])
    cell = next(aligned_cells(co))
    rows = pd.DataFrame(cell_confidence_set(cell)).set_index("contender")
    assert rows.loc["forward", "mcs_p_value"] == rows.loc["no_change", "mcs_p_value"]


def test_dm_and_cw_size_under_the_null_over_400_seeds():
    """Two contenders with the same loss distribution (each forecast = the truth + its own slowly
    moving view error, AR(1) with memory ~h); and a nested pair whose larger model adds a view that
    is pure noise (Clark-West's null). 400 seeds (seed = 1000 + i), n = 1,000, h = 20: the DM and
    CW rejection rates at 5 % are within [2 %, 9 %]."""
    n, h, reps = 1000, 20, 400
    phi = 1 - 1 / h
    rej_dm = rej_cw = 0
    for i in range(reps):  # test-side Monte Carlo over seeds; each draw vectorised
        rng = np.random.default_rng(1000 + i)
        x = overlap_path(rng, n, h)
        shocks = rng.normal(0, 3, (3, n + 200))
        v = np.empty_like(shocks)
        v[:, 0] = shocks[:, 0]
        for t in range(1, shocks.shape[1]):  # AR(1) recursion over time for 3 series at once
            v[:, t] = phi * v[:, t - 1] + shocks[:, t]
        va, vb, vc = v[:, 200:]
        _, p, _ = diebold_mariano_hln(va - x, vb - x, h)
        rej_dm += p < 0.05
        _, pc, _ = clark_west(-x, vc - x, np.zeros(n), vc, h)
        rej_cw += pc < 0.05
    assert 0.02 <= rej_dm / reps <= 0.09
    assert 0.02 <= rej_cw / reps <= 0.09


# ---------------------------------------------------------------- scores and verdicts
def test_scores_against_plain_formulas_and_indicative_flag():
    o = outcomes_frame(300, 40, seed=14)
    c = compare(builtin_contenders(o, window=100, min_history=60), confidence_set=False)
    s = c.scores.set_index("contender")
    cell = next(aligned_cells(builtin_contenders(o, window=100, min_history=60)))
    e = cell.errors[:, cell.names.index("forward")]
    assert s.loc["forward", "rmse_bp"] == pytest.approx(np.sqrt(np.mean(e**2)))
    ref = sm.OLS(e, np.ones(e.size)).fit(cov_type="HAC", cov_kwds={"maxlags": cell.h - 1}).tvalues[0]
    assert s.loc["forward", "hac_t"] == pytest.approx(ref, rel=1e-9)
    assert s.loc["no_change", "rmse_ratio"] == 1.0
    assert s.loc["forward", "n_effective"] == pytest.approx(cell.n / 40, rel=0.05)
    assert bool(s.loc["forward", "indicative"])  # 240 days / h 40 = 6 periods
    assert "indicative only" in c.verdicts["verdict"].iloc[0]
    long = compare(builtin_contenders(outcomes_frame(3000, 20, seed=15), window=100, min_history=60),
                   confidence_set=False)
    assert not long.scores["indicative"].any() and "indicative" not in long.verdicts["verdict"].iloc[0]


def test_model_expected_is_the_risk_neutral_forward_in_the_curves_compounding() -> None:
    """The model's expected M-month rate S months ahead: the continuous forward of its risk-neutral yields,
    (rn(S+M)(S+M) - rn(S) S) / M (ACM 2013, tests/REFERENCES.md #24: risk-neutral yields price with zero
    prices of risk), then the equivalent simple ACT/360 rate over the forward's own dates, by QuantLib's
    ``InterestRate.equivalentRate`` (an outside reference for the conversion)."""
    import QuantLib as ql

    from pipeline.contenders import model_expected_forecasts
    from pipeline.dates import maturity_dates, year_fraction
    from pipeline.tenors import Tenor

    days = CAL.business_days("2021-01-04", "2021-03-31")[:20]
    mats = np.arange(1, 61)
    rn_curve = 0.01 + 0.0004 * mats  # an upward-sloping risk-neutral curve, continuous, per year
    rn = pd.DataFrame({"as_of": np.repeat(days, mats.size), "maturity_months": np.tile(mats, days.size),
                       "risk_neutral_yield": np.tile(rn_curve, days.size)})
    keys = pd.DataFrame([(d, s, m) for d in days for s, m in ((0, 3), (12, 12), (24, 36), (48, 24))],
                        columns=["as_of", "start_months", "tenor_months"]).assign(curve="mm")
    got = model_expected_forecasts(keys, rn, compounding="simple", day_count="ACT/360", calendar=CAL)
    # (48, 24): 72 months is beyond the model's 60: left out, never extrapolated
    assert set(zip(got["start_months"], got["tenor_months"], strict=True)) == {(0, 3), (12, 12), (24, 36)}
    assert len(got) == 3 * days.size and set(got["contender"]) == {"model_expected"}
    for _, r in got.iterrows():
        s, m = int(r["start_months"]), int(r["tenor_months"])
        rn_s = rn_curve[s - 1] if s else 0.0
        f_cc = (rn_curve[s + m - 1] * (s + m) - rn_s * s) / m
        d0 = maturity_dates(np.datetime64(r["as_of"], "D"), Tenor(s, "M"), CAL)
        d1 = maturity_dates(np.datetime64(r["as_of"], "D"), Tenor(s + m, "M"), CAL)
        tau = float(year_fraction(d0, d1, "ACT/360"))
        want = ql.InterestRate(f_cc, ql.Actual360(), ql.Continuous, ql.NoFrequency).equivalentRate(
            ql.Simple, ql.NoFrequency, tau).rate()
        assert r["forecast_rate"] == pytest.approx(want, abs=1e-15)
