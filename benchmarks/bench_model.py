"""Benchmark: the term-structure lens on 30 years of the demo's government curve, pure computation.

What it measures: the demo market's ``govt`` curve (par quotes, semiannual, monotone convex; about
7,700 business days, 360 month ends) is built once (untimed), then, each timed separately:

* ``term_panel``: zero rates at 1..120 months on every built day, month ends picked;
* ``excess_returns`` and ``eh_regressions`` (with the Cochrane-Piazzesi factor);
* ``realtime_fits``: the Adrian-Crump-Moench model re-estimated at every month end from the 60th
  (301 expanding windows, K = 5, N = 120) - **the target: at most 10 s**;
* ``model_term_premium``: real-time and full-sample values on every built day (about 1.9 M rows);
* side by side, the reference implementation ``pyacm`` (PyPI, test extra): one full-sample fit, and
  a per-month loop of it over a sample of the same windows, scaled to all 301 (what a real-time fit
  with the reference would cost).

Run: ``.venv/bin/python benchmarks/bench_model.py [--repeat 3] [--skip-pyacm]``. Prints medians of
the repeats in seconds.
"""

from __future__ import annotations

import argparse
import statistics
import time
import warnings

import numpy as np
import pandas as pd

from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.demo import GOVT_TENORS, generate_market
from pipeline.tenors import parse_tenor
from pipeline.term_structure import (
    cochrane_piazzesi_factor,
    eh_regressions,
    excess_returns,
    longest_tenor_months,
    model_term_premium,
    realtime_fits,
    term_panel,
)

TARGET_S = 10.0
FACTORS = 5
MIN_MONTHS = 60


def _timed(fn, repeat: int):
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def _pyacm_fit(zero_cc: np.ndarray, as_of: np.ndarray):
    from pyacm import NominalACM

    curve = pd.DataFrame(zero_cc, index=pd.DatetimeIndex(as_of), columns=range(1, zero_cc.shape[1] + 1))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return NominalACM(curve, None, n_factors=FACTORS)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--skip-pyacm", action="store_true")
    args = ap.parse_args()

    market = generate_market()
    cfg = CurveConfig(name="govt", quote="par", compounding="semiannual", day_count="ACT/365F",
                      calendar=market.calendar, tenors=tuple(parse_tenor(t) for t in GOVT_TENORS))
    curves = build_curves(market.days, list(GOVT_TENORS), market.quotes["govt"].to_numpy(), cfg)
    longest = longest_tenor_months(GOVT_TENORS)

    rows = []
    t, panel = _timed(lambda: term_panel(curves, longest, 120, "govt", calendar=market.calendar), args.repeat)
    rows.append(("term_panel (all days)", t, f"{panel.days.size} days, {panel.as_of.size} month ends", None))
    t, rx = _timed(lambda: excess_returns(panel), args.repeat)
    rows.append(("excess_returns (1M, 12M)", t, f"{len(rx):,} rows", None))
    t, eh = _timed(lambda: (eh_regressions(panel), cochrane_piazzesi_factor(panel)), args.repeat)
    rows.append(("eh_regressions + CP factor", t, f"{len(eh[0])} rows", None))
    t, fits = _timed(lambda: realtime_fits(panel, FACTORS, MIN_MONTHS), args.repeat)
    rows.append(("realtime_fits", t, f"{len(fits)} windows, K={FACTORS}, N={panel.max_months}", TARGET_S))
    t, out = _timed(lambda: model_term_premium(panel, FACTORS, min_months=MIN_MONTHS), args.repeat)
    rows.append(("model_term_premium (daily)", t, f"{len(out):,} rows, realtime + full", TARGET_S))

    if not args.skip_pyacm:
        t, _ = _timed(lambda: _pyacm_fit(panel.zero_cc, panel.as_of), args.repeat)
        rows.append(("pyacm: one full-sample fit", t, "reference", None))
        sample = np.linspace(MIN_MONTHS, panel.as_of.size, 12).astype(int)
        t0 = time.perf_counter()
        for end in sample:  # a sample of the real-time windows, fitted by the reference one by one
            _pyacm_fit(panel.zero_cc[:end], panel.as_of[:end])
        per = (time.perf_counter() - t0) / sample.size
        rows.append(("pyacm: per-month loop (scaled)", per * len(fits), f"{sample.size} windows timed, x{len(fits)}",
                     None))

    print(f"demo govt curve: {panel.days.size} business days, {panel.as_of.size} month ends, N = {panel.max_months}; "
          f"medians of {args.repeat} runs\n")
    header = f"{'step':<34}{'seconds':>9}  {'target':>8}  {'':<6}{'size'}"
    print(header)
    print("-" * (len(header) + 30))
    for name, secs, size, target in rows:
        verdict = "" if target is None else ("ok" if secs <= target else "MISSED")
        tgt = "" if target is None else f"<= {target:.0f} s"
        print(f"{name:<34}{secs:9.3f}  {tgt:>8}  {verdict:<6}{size}")


if __name__ == "__main__":
    main()
