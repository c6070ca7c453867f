"""Benchmark: building 50 years of daily curves and their forward surfaces, against a QuantLib loop.

What it measures (pure computation; reading quotes from and writing forwards to the store are timed
by the store's own benchmark): for about 12,700 business days x 13 tenors of synthetic zero rates,
``build_curves`` followed by ``forward_surface`` on a grid of 12 starts x 8 tenors (about 1.2 million
forwards), for ``linear_zero`` and ``monotone_convex``; side by side, a per-day loop over QuantLib
curves computing the same forwards from QuantLib's own calendar, day counter and dates.

The QuantLib reference curves: ``ZeroCurve`` with ``Linear`` interpolation on continuous zero rates
for ``linear_zero`` (the same curve: the script reports the largest difference in bp); for
``monotone_convex``, QuantLib has Hagan-West only inside its bootstrapped ``PiecewiseYieldCurve``, so
the loop uses ``MonotonicCubicZeroCurve``, the nearest interpolated curve of comparable cost (its
forwards differ, its timing is the point). Par-quote rows (our side only) show the bootstrap's cost.

Run: ``.venv/bin/python benchmarks/bench_curves.py [--repeat 3] [--years 50]``. Prints medians of the
repeats in seconds and the speed-up ratio. Target: our build well under 10 s, >= 10x the QuantLib loop.
"""

from __future__ import annotations

import argparse
import datetime as dt
import statistics
import time

import numpy as np

from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.dates import BusinessCalendar
from pipeline.forwards import forward_surface
from pipeline.tenors import parse_tenor

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "15Y", "20Y", "25Y", "30Y"]
STARTS = ["0M", "1M", "3M", "6M", "9M", "1Y", "18M", "2Y", "3Y", "5Y", "7Y", "10Y"]
FWD_TENORS = ["1M", "3M", "6M", "1Y", "2Y", "5Y", "10Y", "20Y"]
FIXED_HOLIDAYS = ["01-01", "05-01", "07-14", "08-15", "11-01", "11-11", "12-24", "12-25", "12-26"]


def synthetic_market(years: int, seed: int = 11):
    """Business days and continuous zero rates (D, 13) from a seeded level/slope/curvature model."""
    last = 2030
    holidays = [f"{y}-{md}" for y in range(last - years, last + 62) for md in FIXED_HOLIDAYS]
    cal = BusinessCalendar.of(["Sat", "Sun"], holidays)
    days = cal.business_days(np.datetime64(f"{last - years + 1}-01-01"), np.datetime64(f"{last}-12-31"))
    rng = np.random.default_rng(seed)
    n = days.size
    factors = np.zeros((n, 3))
    mean = np.array([0.045, -0.015, 0.005])
    x = mean.copy()
    shocks = rng.normal(0.0, [6e-4, 5e-4, 8e-4], (n, 3))
    for i in range(n):  # the synthetic generator only; the timed code has no day loop
        x = x + 0.004 * (mean - x) + shocks[i]
        factors[i] = x
    t = np.array([parse_tenor(x).months for x in TENORS]) / 12.0
    lam = 0.6
    l1 = (1 - np.exp(-lam * t)) / (lam * t)
    load = np.column_stack([np.ones_like(t), l1, l1 - np.exp(-lam * t)])
    zeros = factors @ load.T + rng.normal(0.0, 5e-5, (n, t.size))
    return days, cal, zeros


def _cfg(cal: BusinessCalendar, quote: str = "zero", compounding: str = "continuous") -> CurveConfig:
    return CurveConfig(
        name="bench", quote=quote, compounding=compounding, day_count="ACT/365F", calendar=cal,
        tenors=tuple(parse_tenor(t) for t in TENORS),
        forward_starts=tuple(parse_tenor(s, allow_zero=True) for s in STARTS),
        forward_tenors=tuple(parse_tenor(t) for t in FWD_TENORS),
    )


def ours(days, zeros, cfg, method):
    t0 = time.perf_counter()
    curves = build_curves(days, cfg.tenors, zeros, cfg, method=method)
    t1 = time.perf_counter()
    surface = forward_surface(curves, cfg)
    t2 = time.perf_counter()
    return t1 - t0, t2 - t1, surface


def quantlib_loop(days, zeros, cal, method):
    import QuantLib as ql

    qcal = ql.BespokeCalendar("bench")
    qcal.addWeekend(ql.Saturday)
    qcal.addWeekend(ql.Sunday)
    for h in cal.holidays:
        x = dt.date.fromisoformat(str(h))
        qcal.addHoliday(ql.Date(x.day, x.month, x.year))
    dc = ql.Actual365Fixed()
    node_p = [ql.Period(parse_tenor(t).months, ql.Months) for t in TENORS]
    s_m = [parse_tenor(s, allow_zero=True).months for s in STARTS]
    m_m = [parse_tenor(t).months for t in FWD_TENORS]
    out = np.empty((days.size, len(s_m) * len(m_m)))
    t0 = time.perf_counter()
    for i, day in enumerate(days.tolist()):  # the reference: one QuantLib curve per day
        ref = ql.Date(day.day, day.month, day.year)
        dates = [ref] + [qcal.advance(ref, p, ql.ModifiedFollowing) for p in node_p]
        rates = [float(zeros[i, 0])] + [float(r) for r in zeros[i]]
        if method == "linear_zero":
            curve = ql.ZeroCurve(dates, rates, dc, qcal, ql.Linear(), ql.Continuous)
        else:
            curve = ql.MonotonicCubicZeroCurve(dates, rates, dc, qcal, ql.MonotonicCubic(), ql.Continuous)
        curve.enableExtrapolation()
        k = 0
        for s in s_m:
            start = qcal.advance(ref, ql.Period(s, ql.Months), ql.ModifiedFollowing)
            for m in m_m:
                end = qcal.advance(ref, ql.Period(s + m, ql.Months), ql.ModifiedFollowing)
                out[i, k] = curve.forwardRate(start, end, dc, ql.Continuous).rate()
                k += 1
    return time.perf_counter() - t0, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--years", type=int, default=50)
    ap.add_argument("--skip-quantlib", action="store_true")
    args = ap.parse_args()
    days, cal, zeros = synthetic_market(args.years)
    cfg = _cfg(cal)
    print(f"{days.size} days x {len(TENORS)} tenors; grid {len(STARTS)} starts x {len(FWD_TENORS)} tenors "
          f"= {days.size * len(STARTS) * len(FWD_TENORS):,} forwards; medians of {args.repeat} runs\n")
    header = f"{'method':<18}{'quotes':<7}{'build s':>9}{'fwd s':>8}{'total s':>9}{'QuantLib s':>12}{'speed-up':>10}" \
             f"{'max diff bp':>13}"
    print(header)
    print("-" * len(header))
    for method in ("linear_zero", "monotone_convex"):
        runs = [ours(days, zeros, cfg, method) for _ in range(args.repeat)]
        b = statistics.median(r[0] for r in runs)
        f = statistics.median(r[1] for r in runs)
        surface = runs[-1][2]
        ql_s, diff = float("nan"), float("nan")
        if not args.skip_quantlib:
            qruns = [quantlib_loop(days, zeros, cal, method) for _ in range(args.repeat)]
            ql_s = statistics.median(r[0] for r in qruns)
            if method == "linear_zero":
                mine = surface["forward_rate_cc"].to_numpy().reshape(days.size, -1)
                diff = float(np.max(np.abs(mine - qruns[-1][1]))) * 1e4
        ratio = ql_s / (b + f)
        diff_s = f"{diff:13.2e}" if np.isfinite(diff) else f"{'other curve':>13}"
        print(f"{method:<18}{'zero':<7}{b:9.3f}{f:8.3f}{b + f:9.3f}{ql_s:12.2f}{ratio:9.1f}x{diff_s}")
    pcfg = _cfg(cal, quote="par", compounding="semiannual")
    par = zeros  # the same numbers read as semiannual par yields
    for method in ("linear_zero", "monotone_convex"):
        runs = [ours(days, par, pcfg, method) for _ in range(args.repeat)]
        b = statistics.median(r[0] for r in runs)
        f = statistics.median(r[1] for r in runs)
        print(f"{method:<18}{'par':<7}{b:9.3f}{f:8.3f}{b + f:9.3f}{'':>12}{'':>10}{'':>13}")


if __name__ == "__main__":
    main()
