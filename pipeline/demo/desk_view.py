"""The demo's user contender: the (invented) Orvane National Treasury desk's weekly house view.

Every Wednesday the desk writes down, for each cell of the forward grid, the zero rate it expects for
the tenor on the target date. The view is noisy but partly informed: it moves the forward a fixed
share of the way towards the rate later realised (so it beats the forward where the forward's term
premium and surprises are large, and loses where there is little to gain, such as a forward starting
today), plus noise that persists from one week to the next. Where the rate is not yet realised the
view is the forward plus the same noise. Pure and seeded: the same forwards and seed give the same
file, byte for byte.

:func:`desk_view_forecasts` makes the view from the demo's built forwards and their outcomes;
:func:`desk_view_csv` writes it as a forecast file in the long layout
(``as_of, curve, start, tenor, rate``, rates in percent), loaded by the demo as :data:`DESK_VIEW_NAME`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from pipeline.forecast_intake import month_label

__all__ = ["DESK_VIEW_FILE", "DESK_VIEW_NAME", "DESK_VIEW_WEEKDAY", "INFORMED_SHARE", "NOISE_BP",
           "desk_view_csv", "desk_view_forecasts"]

DESK_VIEW_NAME = "desk_view"
DESK_VIEW_FILE = "forecasts/desk_view.csv"     # under the demo folder
DESK_VIEW_WEEKDAY = 3                          # ISO weekday: Wednesday
INFORMED_SHARE = 0.25                          # share of the realised surprise the desk anticipates
NOISE_BP = 15.0                                # standard deviation of the desk's own error a year ahead, bp
NOISE_PERSISTENCE = 0.7                        # week-to-week autocorrelation of that error
DESK_SEED = 20_260_917


def desk_view_forecasts(forwards: pd.DataFrame, seed: int = DESK_SEED) -> pd.DataFrame:
    """The desk's view for every row of ``forwards``.

    ``forwards``: ``curve, as_of, start_months, tenor_months, forward_rate, realized_rate`` (decimals
    in each curve's compounding and day count; ``realized_rate`` NaN while pending), one row per
    forward the desk forecasts. Returns ``curve, as_of, start_months, tenor_months, rate`` (decimal,
    same compounding and day count), sorted by curve, start, tenor, as_of. The forecast is
    ``forward + INFORMED_SHARE * (realised - forward) + e`` (``e`` an AR(1) in weeks within each cell,
    ``NOISE_PERSISTENCE`` autocorrelation, standard deviation ``NOISE_BP * sqrt((start + 12) / 24)``
    with ``start`` in months: 15 bp a year ahead, more further out); pending rows drop the middle term.
    """
    key = ["curve", "start_months", "tenor_months", "as_of"]
    f = forwards.sort_values(key, kind="stable", ignore_index=True)
    fwd = f["forward_rate"].to_numpy(dtype=float)
    realised = f["realized_rate"].to_numpy(dtype=float)
    surprise = np.where(np.isfinite(realised), realised - fwd, 0.0)
    rng = np.random.default_rng(seed)
    phi = NOISE_PERSISTENCE
    shocks = rng.standard_normal(len(f)) * (NOISE_BP / 1e4) * np.sqrt(1.0 - phi * phi)
    # each cell's noise starts afresh: a full-variance first shock, then the AR(1) within the cell
    cell = f.groupby(["curve", "start_months", "tenor_months"], sort=False).ngroup().to_numpy()
    first = np.r_[True, cell[1:] != cell[:-1]] if len(f) else np.zeros(0, dtype=bool)
    shocks[first] /= np.sqrt(1.0 - phi * phi)
    noise = lfilter([1.0], [1.0, -phi], shocks)
    # subtract what the filter carried over a cell boundary: phi^k times the previous cell's last value
    starts = np.flatnonzero(first)
    if starts.size > 1:
        carried = np.zeros(len(f))
        carried[starts[1:]] = noise[starts[1:] - 1]
        seg = np.cumsum(first) - 1
        k = np.arange(len(f)) - starts[seg]
        noise = noise - carried[starts[seg]] * phi ** (k + 1) * (seg > 0)
    scale = np.sqrt((f["start_months"].to_numpy(dtype=float) + 12.0) / 24.0)
    rate = fwd + INFORMED_SHARE * surprise + noise * scale
    return pd.DataFrame({"curve": f["curve"].to_numpy(dtype=object), "as_of": f["as_of"].to_numpy(),
                         "start_months": f["start_months"].to_numpy(dtype=np.int64),
                         "tenor_months": f["tenor_months"].to_numpy(dtype=np.int64), "rate": rate})


def desk_view_csv(view: pd.DataFrame) -> bytes:
    """The view as a forecast file: ``as_of,curve,start,tenor,rate``, rates in percent to 4 decimals
    (0.01 bp), rows by as_of, curve, start, tenor."""
    v = view.sort_values(["as_of", "curve", "start_months", "tenor_months"], kind="stable")
    months = np.r_[v["start_months"].to_numpy(), v["tenor_months"].to_numpy()]
    uniq = np.unique(months)
    labels = np.array([month_label(int(m)) for m in uniq.tolist()], dtype=object)
    start = labels[np.searchsorted(uniq, v["start_months"].to_numpy())]
    tenor = labels[np.searchsorted(uniq, v["tenor_months"].to_numpy())]
    day = np.datetime_as_string(v["as_of"].to_numpy().astype("datetime64[D]"), unit="D").astype(object)
    rate = np.char.mod("%.4f", np.round(v["rate"].to_numpy(dtype=float) * 100.0, 4)).astype(object)
    lines = day + "," + v["curve"].to_numpy(dtype=object) + "," + start + "," + tenor + "," + rate
    return ("as_of,curve,start,tenor,rate\n" + "\n".join(lines.tolist()) + ("\n" if len(lines) else "")).encode()
