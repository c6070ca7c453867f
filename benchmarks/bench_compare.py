"""Benchmark: the contender comparison against the forecast audit on the same outcomes.

    .venv/bin/python benchmarks/bench_compare.py [--repeat N] [--years 30]

Synthetic outcomes of two curves over ``--years`` of business days on the demo market's forward
grid (starts 0M, 3M, 6M, 1Y, 2Y, 3Y, 5Y x tenors 3M, 1Y, 2Y, 5Y: 28 cells a curve), five
contenders (forward, no_change, premium_adjusted and two invented views: a noisy but partly
informed desk view and a survey that lags the spot). Times, as medians of ``--repeat`` runs:

* the audit's pure computation: ``pipeline.audit.summarize`` + ``term_premium`` (250-outcome window);
* the comparison: the built-in contenders, then ``pipeline.contenders.compare`` (scores, DM / CW /
  GW tests, the MCS with 1,000 block-bootstrap replications per cell) on one thread and on the
  default threads (:func:`pipeline.contenders.compare.default_workers`), and the same without the MCS;
* the floor the MCS sets: ``arch.bootstrap.MCS(...).compute()`` alone, called directly on every
  cell's losses exactly as the comparison calls it (serial), and its median per cell.

Target: the full comparison at most 3x the audit. The last lines say whether it is met, and whether
arch's MCS alone already exceeds it (then no change to our own code can meet it). The data are
invented; only the shapes matter.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
import pandas as pd

from pipeline.audit import summarize, term_premium
from pipeline.contenders import builtin_contenders, compare
from pipeline.contenders.cells import aligned_cells
from pipeline.contenders.compare import default_workers
from pipeline.contenders.confidence_set import MCS_REPS, MCS_SIZE, _distinct, cell_seed
from pipeline.dates import BusinessCalendar

STARTS = (0, 3, 6, 12, 24, 36, 60)
TENORS = (3, 12, 24, 60)
WINDOW = 250
MIN_HISTORY = 60


def outcomes(years: int, seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Forward outcomes of two curves, and the two invented views' contender rows."""
    rng = np.random.default_rng(seed)
    cal = BusinessCalendar.of()
    days = cal.business_days("1995-01-02", f"{1995 + years + 6}-12-31")
    n_all = days.size
    frames, views = [], []
    for curve in ("govt", "swap"):
        level = 0.04 + np.cumsum(rng.normal(0, 4e-4, n_all))
        for s in STARTS:
            h = max(int(round(s * 21)), 1)
            for m in TENORS:
                n = min(years * 252, n_all - h)
                spot = level[:n] + 1e-3 * np.log1p(m / 12)
                real = level[h : h + n] + 1e-3 * np.log1p(m / 12)
                fwd = spot + (s / 12) * 8e-4 + rng.normal(0, 1e-4, n) * (s > 0)
                o = pd.DataFrame({
                    "curve": curve, "as_of": days[:n], "start_months": s, "tenor_months": m,
                    "target_date": days[h : h + n], "observed_on": days[h : h + n], "forward_rate": fwd,
                    "realized_rate": real, "spot_rate": spot, "error_bp": (fwd - real) * 1e4,
                    "rw_error_bp": (spot - real) * 1e4, "inverted": False,
                })
                frames.append(o)
                # a desk view: half the coming move foreseen, plus slowly moving noise
                noise = np.convolve(rng.normal(0, 6e-4, n + 59), np.ones(60) / 60 ** 0.5, "valid")[:n] / 8
                desk = spot + 0.5 * (real - spot) + noise
                survey = np.concatenate([spot[:5], spot[:-5]]) + 2e-4  # last week's spot, a little high
                for name, f in (("desk_view", desk), ("survey", survey)):
                    views.append(pd.DataFrame({
                        "curve": curve, "contender": name, "as_of": o["as_of"].to_numpy(), "start_months": s,
                        "tenor_months": m, "target_date": o["target_date"].to_numpy(),
                        "observed_on": o["observed_on"].to_numpy(), "forecast_rate": f, "realized_rate": real,
                        "error_bp": (f - real) * 1e4,
                    }))
    return pd.concat(frames, ignore_index=True), pd.concat(views, ignore_index=True)


def timed(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--years", type=int, default=30)
    args = ap.parse_args()
    o, views = outcomes(args.years)
    res: dict[str, float] = {}
    res["audit: summarize"], _ = timed(lambda: summarize(o), args.repeat)
    res["audit: term_premium"], _ = timed(lambda: term_premium(o, WINDOW), args.repeat)
    audit = res["audit: summarize"] + res["audit: term_premium"]
    res["contenders: built-ins"], co = timed(lambda: builtin_contenders(o, window=WINDOW, min_history=MIN_HISTORY),
                                             args.repeat)
    allc = pd.concat([co, views], ignore_index=True)
    res["compare without MCS"], _ = timed(lambda: compare(allc, confidence_set=False, workers=1), args.repeat)
    cells = list(aligned_cells(allc))
    per_cell: list[float] = []

    def arch_alone() -> None:
        from arch.bootstrap import MCS

        per_cell.clear()
        for cell in cells:
            uniq = np.unique(_distinct(cell.forecasts))
            if uniq.size < 2 or cell.h >= cell.n:
                continue
            t0 = time.perf_counter()
            MCS(cell.errors[:, uniq] ** 2, size=MCS_SIZE, reps=MCS_REPS, block_size=cell.h, method="R",
                bootstrap="circular", seed=cell_seed(cell)).compute()
            per_cell.append(time.perf_counter() - t0)

    res["arch MCS alone (serial)"], _ = timed(arch_alone, args.repeat)
    res["compare, 1 thread"], _ = timed(lambda: compare(allc, workers=1), args.repeat)
    threads = default_workers()
    res[f"compare, {threads} threads"], c = timed(lambda: compare(allc), args.repeat)
    full = res["contenders: built-ins"] + res[f"compare, {threads} threads"]
    print(f"contender comparison vs audit: {args.years} years x 2 curves x {len(STARTS) * len(TENORS)} cells, "
          f"{len(o):,} outcomes, {allc['contender'].nunique()} contenders ({len(allc):,} rows); "
          f"median of {args.repeat}")
    print(f"{'':28}{'seconds':>10}{'x audit':>10}")
    print("-" * 48)
    for k, v in res.items():
        print(f"{k:28}{v:>10.2f}{v / audit:>10.2f}")
    print(f"{'audit total':28}{audit:>10.2f}{1.0:>10.2f}")
    print(f"{'comparison total':28}{full:>10.2f}{full / audit:>10.2f}")
    print(f"\narch MCS per cell: median {statistics.median(per_cell):.3f} s over {len(per_cell)} cells "
          f"({MCS_REPS:,} replications, n up to {max(cell.n for cell in cells):,} days)")
    ours = res["contenders: built-ins"] + res["compare without MCS"]
    print(f"our own part (built-ins + scores + tests): {ours:.2f} s = {ours / audit:.2f}x the audit")
    print(f"comparison within 3x the audit: {'yes' if full <= 3 * audit else 'MISSED'}")
    floor = res["arch MCS alone (serial)"] / threads
    print(f"arch's MCS alone, spread ideally over {threads} threads: {floor:.2f} s = {floor / audit:.2f}x the audit"
          f" ({'above' if floor > 3 * audit else 'within'} the 3x target by itself)")
    print(f"example verdict: {c.verdicts['verdict'].iloc[len(c.verdicts) // 2]}")

if __name__ == "__main__":
    main()
