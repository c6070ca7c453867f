"""Per-contender scores of a cell: the ``contender_scores`` view.

Per contender, on the cell's common sample (:mod:`pipeline.contenders.cells`): ``n``,
``n_effective = n / h`` (the number of non-overlapping forecast periods the sample holds),
``mean_error_bp`` with its plain Newey-West t (``hac_t``: Bartlett, ``max(h-1, 0)`` lags, as in
``audit_summary``), ``rmse_bp``, ``mae_bp``, ``rmse_ratio`` (RMSE over that of ``no_change`` on the
same days; NaN without it) and ``indicative`` (``n_effective < 10``). Beyond the view:
``h``, ``lags`` and ``hac_p_value``, the two-sided p-value of ``hac_t`` from the overlap-aware
fixed-b null (:mod:`pipeline.audit.fixed_b`). The HAC figures need ``n >= 8``, ``h < n`` and
errors that vary (NaN otherwise), as in the audit.
"""

from __future__ import annotations

import numpy as np

from pipeline.audit import INDICATIVE_BELOW, MIN_OBS, TIE
from pipeline.audit.fixed_b import pvalue_two_sided
from pipeline.audit.hac import hac_mean
from pipeline.contenders.cells import Cell

__all__ = ["SCORE_COLUMNS", "SCORE_EXTRA_COLUMNS", "cell_scores"]

SCORE_COLUMNS = ("curve", "contender", "start_months", "tenor_months", "n", "n_effective", "mean_error_bp",
                 "hac_t", "rmse_bp", "mae_bp", "rmse_ratio", "indicative")
SCORE_EXTRA_COLUMNS = ("h", "lags", "hac_p_value")
_NAN = float("nan")


def hac_t_of(x: np.ndarray, n: int, h: int) -> tuple[float, float]:
    """Plain Newey-West t of the mean of ``x`` (``max(h-1, 0)`` lags) and its fixed-b p-value."""
    if n < MIN_OBS or h >= n or np.ptp(x) <= TIE * 1e4:
        return _NAN, _NAN
    mean, se = hac_mean(x, max(h - 1, 0))
    if not se > 0:
        return _NAN, _NAN
    t = mean / se
    return float(t), pvalue_two_sided(t, n, h)


def cell_scores(cell: Cell) -> list[dict[str, object]]:
    """One row per contender of ``cell`` (:data:`SCORE_COLUMNS` + :data:`SCORE_EXTRA_COLUMNS`)."""
    e = cell.errors
    rmse = np.sqrt(np.mean(e * e, axis=0))
    mae = np.mean(np.abs(e), axis=0)
    mean = e.mean(axis=0)
    base = rmse[cell.names.index("no_change")] if "no_change" in cell.names else _NAN
    rows = []
    for j, name in enumerate(cell.names):
        t, p = hac_t_of(e[:, j], cell.n, cell.h)
        rows.append({
            **cell.key(), "contender": name, "n": cell.n, "n_effective": cell.n_effective,
            "mean_error_bp": float(mean[j]), "hac_t": t, "rmse_bp": float(rmse[j]), "mae_bp": float(mae[j]),
            "rmse_ratio": float(rmse[j] / base) if base > 0 else _NAN,
            "indicative": bool(cell.n_effective < INDICATIVE_BELOW),
            "h": cell.h, "lags": cell.lags, "hac_p_value": p,
        })
    return rows
