"""Log excess holding-period returns and one-year forward rates from the month-end panel.

With ``y(n)_t`` the panel's continuously compounded zero rate for ``n`` months at month end ``t``
(decimal a year), a bond of ``n`` months bought at ``t`` and sold ``h`` months later as a bond of
``n - h`` months earns, over the risk-free ``h``-month bond, the log excess return::

    rx(n, h)_{t+h} = [n y(n)_t - (n-h) y(n-h)_{t+h}] / h - y(h)_t        (annualised)

which is ``12 / h`` times the return over the holding period. For ``h = 1`` it is
``n y(n)_t - (n-1) y(n-1)_{t+1} - y(1)_t``; for ``h = 12`` it is the annual return of Fama & Bliss
(1987) and Cochrane & Piazzesi (2005) with maturities in years. Both month ends must be observed
and ``h`` months apart: a return is never computed across a skipped month.

Dating: a return row's ``as_of`` is the month end at which it is *realised* (``t + h``), the day
the archive can first know it, as returns are conventionally dated; the bond was bought
``holding_months`` month ends earlier.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from pipeline.term_structure.errors import ModelInputError
from pipeline.term_structure.panel import TermPanel

__all__ = ["EXCESS_RETURN_COLUMNS", "annual_forwards", "excess_return_grid", "excess_returns"]

EXCESS_RETURN_COLUMNS = ("curve", "as_of", "maturity_months", "holding_months", "rx")
DEFAULT_HOLDINGS = (1, 12)


def excess_return_grid(y: np.ndarray, h: int) -> np.ndarray:
    """``rx(n, h)`` on a month grid ``y`` ``(M, N)`` (consecutive calendar months, NaN rows allowed).

    Returns ``(M - h, N - h)``: row ``i`` is realised at grid month ``i + h`` (bought at ``i``),
    column ``j`` is maturity ``n = h + 1 + j``. NaN where either month is missing.
    """
    m, big_n = y.shape
    if h < 1 or h >= big_n or h >= m:
        return np.empty((max(m - h, 0), max(big_n - h, 0)))
    n = np.arange(h + 1, big_n + 1, dtype=float)
    bought = y[:-h, h:]  # y(n)_t for n = h+1..N
    sold = y[h:, : big_n - h]  # y(n-h)_{t+h}
    return (n * bought - (n - h) * sold) / h - y[:-h, h - 1 : h]


def annual_forwards(y: np.ndarray, maturities: Sequence[int]) -> np.ndarray:
    """One-year forward rates ``f(n) = [n y(n) - (n-12) y(n-12)] / 12`` ending at ``n`` months
    (``n >= 12``; ``f(12) = y(12)``), continuous, decimal: ``(M, len(maturities))`` for ``y`` ``(M, N)``."""
    cols = []
    for n in maturities:  # a handful of maturities, not days
        short = y[:, n - 13] * (n - 12) if n > 12 else 0.0
        cols.append((n * y[:, n - 1] - short) / 12.0)
    return np.column_stack(cols) if cols else np.empty((y.shape[0], 0))


def excess_returns(panel: TermPanel, holding_months: Sequence[int] = DEFAULT_HOLDINGS) -> pd.DataFrame:
    """The ``excess_returns`` view of one curve: log excess returns, annualised (see module notes).

    One row per (as_of, maturity_months, holding_months) for maturities ``holding + 1 .. N`` (a
    bond held to maturity earns no excess return) and month ends ``holding`` months apart that
    are both observed. ``as_of`` is the month end of realisation. Holdings must be shorter than
    ``N`` months.
    """
    bad = [h for h in holding_months if int(h) != h or h < 1 or h >= panel.max_months]
    if bad:
        raise ModelInputError(f"curve {panel.curve!r}: a holding period must be 1 .. {panel.max_months - 1} "
                              f"months (the panel reaches {panel.max_months}), got {bad[0]}")
    _, dates, y = panel.grid()
    parts = []
    for h in holding_months:  # one or two holding periods
        h = int(h)
        rx = excess_return_grid(y, h)
        end = np.broadcast_to(dates[h:, None], rx.shape)
        mat = np.broadcast_to(np.arange(h + 1, panel.max_months + 1, dtype=np.int64)[None, :], rx.shape)
        keep = np.isfinite(rx)
        parts.append(pd.DataFrame({
            "as_of": end[keep],
            "maturity_months": mat[keep],
            "holding_months": np.full(int(keep.sum()), h, dtype=np.int64),
            "rx": rx[keep],
        }))
    out = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(
        {"as_of": np.array([], "datetime64[D]"), "maturity_months": np.array([], np.int64),
         "holding_months": np.array([], np.int64), "rx": np.array([], float)})
    out.insert(0, "curve", pd.Series([panel.curve] * len(out), dtype="str"))
    return out.sort_values(["as_of", "holding_months", "maturity_months"], kind="stable",
                           ignore_index=True)[list(EXCESS_RETURN_COLUMNS)]
