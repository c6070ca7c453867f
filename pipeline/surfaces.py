"""A batch of days built: curves, zero rates, the forward surface and the curve-shape findings.

The one computation behind ``afterward build`` and the backfill's parallel chunks, so both store the
same rows. Pure: arrays in, arrays out (no store), cheap to send between processes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.checks import curve_shape_checks
from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.forwards import ForwardGrid, ZeroGrid, forward_grid, zero_grid

__all__ = ["BuiltDays", "compute_days"]

GRID_BLOCK = 24  # shape-check grid columns evaluated at a time (see _ln_discount_in_blocks)


@dataclass
class BuiltDays:
    """What one batch of days builds: ``ok`` ``(D,)`` per day tried, the zero rates and forward
    surface of the days built (in order), curve-shape findings (or None), the fitted parameters of
    the days built (parametric methods, else None), and the count of failures by reason."""

    ok: np.ndarray
    zeros: ZeroGrid
    forwards: ForwardGrid
    shape: pd.DataFrame | None
    params: np.ndarray | None
    reasons: dict[str, int]


def _grid_times(max_years: float) -> np.ndarray:
    """Year fractions for the shape checks: monthly to 2 years, where curves bend most and money-market
    tenors sit, then quarterly out to the longest tenor (a 30-year curve: 136 points, not 360)."""
    months = np.r_[np.arange(1, 25), np.arange(27, int(np.ceil(max_years * 12)) + 3, 3)]
    return months[months <= max(24, int(np.ceil(max_years * 12)))] / 12.0


def compute_days(as_of: np.ndarray, tenors: list[str], rates: np.ndarray, c: CurveConfig, method: str,
                 warm: np.ndarray | None = None) -> BuiltDays:
    """Build ``(D,)`` days of ``(D, T)`` quotes (decimals as quoted, NaN = missing) with ``method``;
    ``warm`` starts a parametric fit. Zero rates cover the quoted and the forward tenors; rates are in
    the curve's compounding and day count (``*_cc``: continuous)."""
    cs = build_curves(as_of, tenors, rates, c, method=method, warm_start=warm)
    ok = np.asarray(cs.ok, dtype=bool)
    reasons: dict[str, int] = {}
    for r in (cs.reason[i] for i in np.flatnonzero(~ok)):
        reasons[r] = reasons.get(r, 0) + 1
    zero_tenors = sorted(set(c.tenors) | set(c.forward_tenors))
    grid_times = _grid_times(max(t.approx_days for t in c.tenors) / 365.25)
    return BuiltDays(ok, zero_grid(cs, zero_tenors, c), forward_grid(cs, c), _shape_findings(cs, grid_times, c),
                     cs.params[ok] if cs.params is not None else None, reasons)


def _shape_findings(cs, grid_times: np.ndarray, cfg: CurveConfig) -> pd.DataFrame | None:  # noqa: ANN001
    """Shape-check findings of the built days on the check grid.

    Days whose method guarantees non-negative forwards everywhere (``forwards_nonnegative``) cannot
    fail either check, so the grid is evaluated only on the others: the same findings for a fraction
    of the work (monotone convex with positive discrete forwards never needs it).
    """
    need = np.flatnonzero(cs.ok & ~cs.forwards_nonnegative())
    if need.size == 0:
        return None
    grid = np.broadcast_to(grid_times, (need.size, grid_times.size))
    return curve_shape_checks(cs.as_of[need], grid, np.exp(_ln_discount_in_blocks(cs, need, grid)), cfg)


def _ln_discount_in_blocks(cs, rows: np.ndarray, grid: np.ndarray) -> np.ndarray:  # noqa: ANN001
    """``cs.ln_discount_rows(rows, grid)`` for a (rows, K) grid, evaluated GRID_BLOCK columns at a time.

    The same numbers; but evaluating all 360 monthly points of 2,500 days at once made the curve
    methods' temporaries (days x points x nodes) so large that monotone convex ran 3-4x slower.
    """
    k = grid.shape[1]
    if k <= GRID_BLOCK:
        return cs.ln_discount_rows(rows, grid)
    return np.concatenate([cs.ln_discount_rows(rows, grid[:, j:j + GRID_BLOCK]) for j in range(0, k, GRID_BLOCK)],
                          axis=1)

