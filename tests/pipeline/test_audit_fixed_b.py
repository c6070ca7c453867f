"""The audit's overlap-honest columns (n_effective, hac_pvalue, dm_pvalue_fixed_b, indicative).

Sources named beside each check:
- statsmodels 0.15 OLS on a constant with ``cov_type="HAC"``, ``maxlags = h - 1``,
  ``use_correction=False`` as the reference Newey-West t (tests/REFERENCES.md #20);
- Diebold & Mariano (1995) with the Harvey, Leybourne & Newbold (1997) factor (tests/REFERENCES.md #19):
  the DM statistic is the HAC t of the loss differential times that factor;
- the fixed-b null itself is :func:`pipeline.audit.fixed_b.pvalue_two_sided` (held to its own
  simulation in tests/pipeline/test_contenders_fixed_b.py); here it is applied to the statsmodels t.
Monte Carlo seeds and sizes are stated beside each simulation.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats

from pipeline.audit import INDICATIVE_BELOW, OVERLAP_COLUMNS, SUMMARY_COLUMNS, summarize
from pipeline.audit.fixed_b import pvalue_two_sided
from pipeline.audit.state import build_cell, cell_summary
from pipeline.dates import BusinessCalendar
from tests.pipeline.test_audit import make_outcomes, row_of

CAL = BusinessCalendar.of()


def test_overlap_columns_come_after_the_contracts_columns():
    assert SUMMARY_COLUMNS[-len(OVERLAP_COLUMNS):] == OVERLAP_COLUMNS
    assert OVERLAP_COLUMNS == ("n_effective", "hac_pvalue", "dm_pvalue_fixed_b", "indicative")


@pytest.mark.parametrize(("n", "h"), [(400, 1), (2500, 21), (3000, 252), (1500, 700)],
                         ids=["h1", "h21", "h252", "h700-short"])
def test_overlap_columns_equal_an_independent_recomputation(n, h):
    """n_effective = n / h; hac_pvalue = fixed-b p of statsmodels' HAC t (tests/REFERENCES.md #20);
    dm_pvalue_fixed_b = fixed-b p of statsmodels' HAC t of d = e^2 - rw^2, which is dm_stat with the
    HLN factor taken out (tests/REFERENCES.md #19); the plain dm_pvalue stays Student's t(n - 1)."""
    o = make_outcomes(n, h, 35.0, seed=n + h)
    row = row_of(summarize(o))
    assert int(row["lags"]) == h - 1
    e, rw = o["error_bp"].to_numpy(), o["rw_error_bp"].to_numpy()
    hac = {"cov_type": "HAC", "cov_kwds": {"maxlags": h - 1, "use_correction": False}}

    t_ref = sm.OLS(e, np.ones(n)).fit(**hac).tvalues[0]
    assert row["hac_t"] == pytest.approx(t_ref, rel=1e-8)
    assert row["n_effective"] == n / h
    assert bool(row["indicative"]) == (n / h < 10)
    assert row["hac_pvalue"] == pytest.approx(pvalue_two_sided(t_ref, n, h), rel=1e-6, abs=1e-300)

    t_d = sm.OLS(e**2 - rw**2, np.ones(n)).fit(**hac).tvalues[0]
    hln = np.sqrt((n + 1 - 2 * h + h * (h - 1) / n) / n)
    assert row["dm_stat"] == pytest.approx(hln * t_d, rel=1e-8)
    assert row["dm_pvalue_fixed_b"] == pytest.approx(pvalue_two_sided(t_d, n, h), rel=1e-6, abs=1e-300)
    assert row["dm_pvalue"] == pytest.approx(2 * stats.t.sf(abs(hln * t_d), n - 1), rel=1e-6)  # unchanged
    if h > 1:  # once forecasts overlap the fixed-b null has heavier tails than the normal
        assert row["hac_pvalue"] > 2 * stats.norm.sf(abs(t_ref))


def test_running_state_gives_the_same_overlap_columns():
    """cell_summary (the incremental path) against summarize over the same record."""
    o = make_outcomes(1800, 120, 20.0, seed=5)
    ref = row_of(summarize(o))
    rows = {c: o[c].to_numpy() for c in ("as_of", "target_date", "forward_rate", "realized_rate", "spot_rate",
                                         "error_bp", "rw_error_bp")}
    got = cell_summary(build_cell(rows)[0])
    assert got["n_effective"] == ref["n_effective"] == 1800 / 120
    assert got["indicative"] is bool(ref["indicative"]) is False
    for c in ("hac_pvalue", "dm_pvalue_fixed_b"):
        assert got[c] == pytest.approx(ref[c], rel=1e-9), c


def test_indicative_below_ten_independent_periods():
    """8 periods (2,000 / 250) are flagged, 12 (3,000 / 250) are not; a sample too short for any HAC
    figure still carries n_effective and the flag."""
    assert INDICATIVE_BELOW == 10
    short = row_of(summarize(make_outcomes(2000, 250, 0.0, seed=1)))
    long = row_of(summarize(make_outcomes(3000, 250, 0.0, seed=1)))
    assert short["n_effective"] == 8.0 and bool(short["indicative"])
    assert long["n_effective"] == 12.0 and not bool(long["indicative"])
    tiny = row_of(summarize(make_outcomes(5, 1, 0.0, seed=1)))
    assert np.isnan(tiny["hac_pvalue"]) and np.isnan(tiny["dm_pvalue_fixed_b"])
    assert tiny["n_effective"] == 5.0 and bool(tiny["indicative"])
    s = summarize(make_outcomes(2000, 250, 0.0, seed=1))
    assert s["indicative"].dtype == bool


def _null_record(reps: int, n: int, h: int, seed: int) -> pd.DataFrame:
    """``reps`` cells (one per start_months) of ``n`` overlapping h-step forecasts of a random walk by
    the no-change rule plus a constant: errors are sums of h i.i.d. daily moves, mean zero (the null)."""
    rng = np.random.default_rng(seed)
    days = CAL.business_days("2001-01-01", "2040-12-31")[: n + h]
    level = 0.03 + np.cumsum(rng.normal(0.0, 1e-4, (reps, n + h)), axis=1)
    spot, realized = level[:, :n], level[:, h:]
    forward = spot + 1e-4 * rng.normal(0.0, 1.0, (reps, 1))  # a constant spread per cell, so DM is defined
    return pd.DataFrame({
        "curve": "mc", "as_of": np.tile(days[:n], reps), "start_months": np.repeat(np.arange(reps), n),
        "tenor_months": 12, "target_date": np.tile(days[h:], reps), "forward_rate": forward.ravel(),
        "realized_rate": realized.ravel(), "spot_rate": spot.ravel(),
        "error_bp": ((forward - realized) * 1e4).ravel(), "rw_error_bp": ((spot - realized) * 1e4).ravel(),
        "inverted": pd.array([pd.NA] * (reps * n), dtype="boolean"),  # no regime split: one cell per rep
    })


def test_audit_hac_pvalue_has_its_size_under_heavy_overlap():
    """Through summarize itself: under the null with overlap h = 250 and n = 2,000 (2,000 replications,
    seed 17), the audit's hac_pvalue rejects at 5 % within [3 %, 8 %]; the plain normal reading of the
    same hac_t rejects far more often (Bartlett with h - 1 lags takes about 2/3 of the long-run
    variance: see tests/pipeline/test_audit.py)."""
    reps, n, h = 2000, 2000, 250
    s = summarize(_null_record(reps, n, h, seed=17))
    s = s[s["regime"] == "all"]
    assert len(s) == reps and (s["lags"] == h - 1).all()
    rate = float((s["hac_pvalue"] < 0.05).mean())
    assert 0.03 <= rate <= 0.08, rate
    normal = float((np.abs(s["hac_t"]) > stats.norm.ppf(0.975)).mean())
    assert normal > 0.12, normal
