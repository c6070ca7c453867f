"""The overlap-aware fixed-b null distribution (pipeline.audit.fixed_b).

Sources: Kiefer & Vogelsang (2005) for the fixed-b idea (bandwidth a fixed share of the sample);
the MA(h-1) equal-weight structure of overlapping h-step errors and the 2/3 Bartlett bias are the
textbook Newey-West / Hansen-Hodrick setting (also derived in tests/pipeline/test_audit.py);
statsmodels 0.15 OLS HAC as the reference Newey-West t. Monte Carlo seeds and sizes are stated.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from pipeline.audit import fixed_b as fb


def test_row_wise_t_equals_statsmodels_hac():
    """nw_t_rows = statsmodels OLS-on-constant HAC t (Bartlett, maxlags, no small-sample factor)."""
    rng = np.random.default_rng(3)
    x = np.cumsum(rng.standard_normal((3, 400)), axis=1) * 0.1 + rng.standard_normal((3, 400))
    for lags in (0, 7, 60):
        ours = fb.nw_t_rows(x, lags)
        for i in range(3):
            ref = sm.OLS(x[i], np.ones(400)).fit(cov_type="HAC", cov_kwds={"maxlags": lags}).tvalues[0]
            assert ours[i] == pytest.approx(ref, rel=1e-10)


def test_bartlett_ratio_closed_form():
    """(1 + (h-1)(2h-1)/(3h)) / h: 1 at h = 1, 0.75 at h = 2 (by hand: (1 + 1/2)/2), -> 2/3."""
    assert fb.bartlett_ratio(1) == 1.0
    assert fb.bartlett_ratio(2) == pytest.approx(0.75)
    assert fb.bartlett_ratio(10_000) == pytest.approx(2 / 3, abs=1e-4)


def test_no_overlap_gives_the_normal_test_back():
    """h = 1 on a long sample: the critical value is the normal 1.96 (to the table's precision)."""
    assert fb.critical_value(100_000, 1) == pytest.approx(stats.norm.ppf(0.975), abs=0.01)
    assert fb.pvalue_two_sided(1.96, 100_000, 1) == pytest.approx(0.05, abs=0.003)


def test_table_reproduces_from_its_generator():
    """A fresh simulation (another seed, 8,000 draws) of one grid point agrees with the shipped table
    within Monte Carlo error; the c = 0 row is the exact |N(0, 3/2)| quantiles."""
    j = int(np.flatnonzero(fb.C_GRID == 0.125)[0])
    fresh = fb.simulate_abs_t_quantiles(0.125, 8000, seed=99)
    k = int(np.flatnonzero(fb.PROBS == 0.95)[0])
    assert fresh[k] == pytest.approx(fb._TABLE[j, k], rel=0.04)
    exact = stats.norm.ppf(0.5 + fb.PROBS / 2) * np.sqrt(1.5)
    assert np.allclose(fb._TABLE[0], exact, atol=1e-4)


@pytest.mark.parametrize(("n", "h", "seed"), [(2000, 250, 2005), (1000, 20, 7), (200, 2, 11)])
def test_fixed_b_size_under_the_overlap_null(n, h, seed):
    """Under the null with overlap h (errors = sums of h i.i.d. daily moves, 2,000 replications,
    seed as given), the fixed-b HAC t at 5 % rejects within [3 %, 8 %]; the plain normal critical
    value on the same draws rejects far more often (about 19 % at h = 250, n = 2,000)."""
    t = fb.overlap_null_t(np.random.default_rng(seed), 2000, n, h)
    cv = fb.critical_value(n, h, 0.05)
    rate = float(np.mean(np.abs(t) > cv))
    assert 0.03 <= rate <= 0.08
    normal = float(np.mean(np.abs(t) > stats.norm.ppf(0.975)))
    assert normal > 0.09
    p = np.array([fb.pvalue_two_sided(x, n, h) for x in t])
    assert 0.03 <= float(np.mean(p < 0.05)) <= 0.08  # p-values agree with the critical value
    one = np.array([fb.pvalue_one_sided(x, n, h) for x in t])
    assert 0.015 <= float(np.mean(one < 0.025)) <= 0.045  # symmetric null: half the two-sided tail


def test_untestable_samples_give_nan():
    assert np.isnan(fb.critical_value(100, 100))
    assert np.isnan(fb.pvalue_two_sided(2.0, 10, 20))
