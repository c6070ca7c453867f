"""Pairwise tests of a cell: the ``contender_tests`` view (``dm``, ``clark_west``, ``gw``).

All on the cell's common sample, squared-error loss in bp^2, Bartlett HAC with ``L = max(h-1, 0)``
lags, ``h`` the cell's overlap:

``dm``
    Diebold and Mariano (1995) on ``d = e_a^2 - e_b^2``. ``statistic`` is the Harvey, Leybourne
    and Newbold (1997) form (the HAC t times ``sqrt((n + 1 - 2h + h(h-1)/n) / n)``, as
    ``audit_summary.dm_stat``); negative: A had the smaller loss. ``p_value`` (two-sided) is the
    overlap-aware fixed-b p-value of the unscaled HAC t (:mod:`pipeline.audit.fixed_b`); the
    HLN factor and fixed-b correct the same overstatement, so they are not compounded.
    ``p_value_plain`` (beyond the view) is the HLN statistic's Student-t(n-1) p-value.
``clark_west``
    Clark and West (2007), for a nested pair: A (``contender_a``) is the small model nested in B.
    ``f = e_a^2 - (e_b^2 - (f_a - f_b)^2)`` regressed on a constant; ``statistic`` its HAC t;
    ``p_value`` one-sided (H1: B is more accurate), fixed-b; ``p_value_plain`` from the normal.
    Nested pairs: ``no_change`` in every other contender, and ``forward`` in ``premium_adjusted``
    (the forward is the premium-adjusted forward with its premium fixed at zero).
``gw``
    Giacomini and White (2006), conditional: instruments ``(1, d_lag)`` where ``d_lag`` is the
    loss differential of the latest outcome already observed on the row's as-of date
    (``observed_on <= as_of``, so the instrument is known when the forecast is made). Rows with no
    such outcome are dropped (``n`` counts the rest). ``statistic`` is the Wald statistic
    ``n * gbar' S^-1 gbar`` of ``g = Z d`` (demeaned Bartlett HAC ``S``), ``p_value`` chi-square
    with q = 2 degrees of freedom (as the test is defined; the fixed-b correction here is for t
    statistics). With the constant alone it is the square of the unscaled DM t.

A pair whose forecasts are the same on every day (start 0: the forward is the spot) has nothing to
test and gets no row; too short a sample (``n < 8`` or ``h >= n``) gets NaN figures.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np
from scipy import stats

from pipeline.audit import MIN_OBS, TIE
from pipeline.audit.fixed_b import pvalue_one_sided, pvalue_two_sided
from pipeline.audit.hac import bartlett_long_run, hac_mean, hln_factor
from pipeline.contenders.cells import Cell
from pipeline.dates import as_days

__all__ = ["TEST_COLUMNS", "TEST_EXTRA_COLUMNS", "cell_tests", "clark_west", "diebold_mariano_hln",
           "giacomini_white", "is_nested", "known_lag_index"]

TEST_COLUMNS = ("curve", "start_months", "tenor_months", "contender_a", "contender_b", "test", "statistic",
                "p_value", "n")
TEST_EXTRA_COLUMNS = ("p_value_plain", "n_effective", "indicative")
_NAN = float("nan")


def is_nested(small: str, large: str) -> bool:
    """True when ``small`` is a restricted form of ``large`` (see the module notes)."""
    return (small == "no_change" and large != "no_change") or (small, large) == ("forward", "premium_adjusted")


def _testable(n: int, h: int) -> bool:
    return n >= MIN_OBS and h < n


def diebold_mariano_hln(e_a: np.ndarray, e_b: np.ndarray, h: int) -> tuple[float, float, float]:
    """``(DM_HLN, fixed-b p, plain t(n-1) p)`` for squared-error loss; NaNs when untestable."""
    d = e_a * e_a - e_b * e_b
    n = d.size
    if not _testable(n, h) or np.ptp(d) <= 0:
        return _NAN, _NAN, _NAN
    dbar, se = hac_mean(d, max(h - 1, 0))
    k = hln_factor(n, h)
    if not (se > 0 and np.isfinite(k)):
        return _NAN, _NAN, _NAN
    t = dbar / se
    dm = k * t
    return float(dm), pvalue_two_sided(t, n, h), float(2.0 * stats.t.sf(abs(dm), n - 1))


def clark_west(e_small: np.ndarray, e_large: np.ndarray, f_small: np.ndarray, f_large: np.ndarray,
               h: int) -> tuple[float, float, float]:
    """``(t, fixed-b one-sided p, normal one-sided p)``; errors and forecasts in the same units."""
    adj = (f_small - f_large) ** 2
    f = e_small * e_small - (e_large * e_large - adj)
    n = f.size
    if not _testable(n, h) or np.ptp(f) <= 0:
        return _NAN, _NAN, _NAN
    m, se = hac_mean(f, max(h - 1, 0))
    if not se > 0:
        return _NAN, _NAN, _NAN
    t = m / se
    return float(t), pvalue_one_sided(t, n, h), float(stats.norm.sf(t))


def known_lag_index(as_of: np.ndarray, observed_on: np.ndarray) -> np.ndarray:
    """For each row, the index of the latest row whose ``observed_on <= as_of`` of this row
    (rows ordered by as-of date; ``observed_on`` non-decreasing with it), or -1 if none."""
    obs = as_days(observed_on)
    order = np.argsort(obs, kind="stable")
    k = np.searchsorted(obs[order], as_days(as_of), side="right")
    out = np.full(k.size, -1, dtype=np.int64)
    ok = k > 0
    out[ok] = np.maximum.accumulate(order)[k[ok] - 1]  # the latest (by as-of) of the rows known
    return out


def giacomini_white(d: np.ndarray, lag_index: np.ndarray | None, h: int) -> tuple[float, float, int]:
    """``(Wald, chi-square p, n used)`` of ``E[Z_t d_t] = 0``; ``lag_index`` None: the constant
    alone (then Wald = DM t^2, one degree of freedom)."""
    if lag_index is None:
        g = d[:, None]
    else:
        use = lag_index >= 0
        g = np.column_stack([d[use], d[use] * d[lag_index[use]]])
    n, q = g.shape
    if not _testable(n, h) or np.ptp(g, axis=0).min() <= 0:
        return _NAN, _NAN, n
    gbar = g.mean(axis=0)
    s = bartlett_long_run(g - gbar, max(h - 1, 0)) / (n * n)  # covariance of gbar
    try:
        w = float(gbar @ np.linalg.solve(s, gbar))
    except np.linalg.LinAlgError:
        return _NAN, _NAN, n
    return w, float(stats.chi2.sf(w, q)), n


def cell_tests(cell: Cell) -> list[dict[str, object]]:
    """Rows of ``contender_tests`` for every pair of ``cell`` (:data:`TEST_COLUMNS` + extras)."""
    rows = []
    lag_idx = known_lag_index(cell.as_of, cell.observed_on)
    extra = {"n_effective": cell.n_effective, "indicative": bool(cell.n_effective < 10)}
    for i, j in combinations(range(len(cell.names)), 2):
        fa, fb = cell.forecasts[:, i], cell.forecasts[:, j]
        if np.max(np.abs(fa - fb)) <= TIE:
            continue
        a, b = cell.names[i], cell.names[j]
        ea, eb = cell.errors[:, i], cell.errors[:, j]
        dm, p, p_plain = diebold_mariano_hln(ea, eb, cell.h)
        rows.append({**cell.key(), "contender_a": a, "contender_b": b, "test": "dm", "statistic": dm,
                     "p_value": p, "n": cell.n, "p_value_plain": p_plain, **extra})
        w, pw, nw = giacomini_white(ea * ea - eb * eb, lag_idx, cell.h)
        rows.append({**cell.key(), "contender_a": a, "contender_b": b, "test": "gw", "statistic": w,
                     "p_value": pw, "n": nw, "p_value_plain": pw, **extra})
        for small, large, s, t in ((a, b, i, j), (b, a, j, i)):
            if is_nested(small, large):
                cw, pc, pc_plain = clark_west(cell.errors[:, s], cell.errors[:, t], cell.forecasts[:, s] * 1e4,
                                              cell.forecasts[:, t] * 1e4, cell.h)
                rows.append({**cell.key(), "contender_a": small, "contender_b": large, "test": "clark_west",
                             "statistic": cw, "p_value": pc, "n": cell.n, "p_value_plain": pc_plain, **extra})
    return rows
