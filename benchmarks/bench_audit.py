"""Benchmark: realisation and the forecast audit on a synthetic daily 96-point forward surface.

    .venv/bin/python benchmarks/bench_audit.py [--repeat N] [--years 5 50]

For each history length it builds one curve of daily zero curves (8 tenors) and forwards
(12 starts x 8 tenors = 96 per day; 50 years is about 1.25 million forwards), then times, as the
median of ``--repeat`` runs:

* full realisation of every forward (``realize``), ``summarize`` over all horizons and regimes,
  and ``term_premium`` with a 250-day window (target: under 10 s together for 50 years);
* the daily incremental step: one new observed day arrives; ``due_forwards`` picks the forwards
  it realises and ``realize`` matches them (target: under 1 s at any history length). "scan"
  passes the whole in-memory history (the selection is a vectorised O(n) scan, a few tens of ms
  at 50 years); "indexed" first narrows the forwards by ``due_target_window`` and fetches only the
  needed days' zeros, as a store query would, and is flat in the history length.

The data are synthetic (a random-walk level, invented premiums); only the shapes matter here.
Prints one table; the last column is the 50-year figure over the 5-year one.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
import pandas as pd

from pipeline.audit import summarize, term_premium
from pipeline.dates import BusinessCalendar, add_months
from pipeline.realize import due_forwards, due_target_window, realize

STARTS = np.array([0, 1, 3, 6, 9, 12, 18, 24, 36, 60, 84, 120])
TENORS = np.array([1, 3, 6, 12, 24, 60, 84, 120])
TOLERANCE = 3
WINDOW = 250


def market(years: int, seed: int = 0) -> dict:
    """One curve's history: observed days, zeros at TENORS, forwards for STARTS x TENORS."""
    rng = np.random.default_rng(seed)
    first = np.datetime64("1990-01-01")
    last = np.datetime64(f"{1990 + years}-01-01") - 1
    years_span = np.arange(1990, 1991 + years)
    holidays = np.concatenate([
        np.array([f"{y}-12-25" for y in years_span], dtype="datetime64[D]"),
        np.array([f"{y}-01-01" for y in years_span], dtype="datetime64[D]"),
    ])
    cal = BusinessCalendar.of(("Sat", "Sun"), holidays.tolist())
    days = cal.business_days(first, last)
    observed = days[rng.random(days.size) > 0.01]  # about 1 % of the files never arrived
    new_day = cal.add_business_days(days[-1], 1)  # the day the incremental step receives
    all_days = np.append(observed, new_day)
    n = all_days.size
    level = 0.04 + np.cumsum(rng.normal(0, 4e-4, n))
    slope = 0.01 + np.cumsum(rng.normal(0, 1e-4, n))
    shape = 1 - np.exp(-TENORS / 36.0)
    zero = level[:, None] + slope[:, None] * shape[None, :]  # days x tenors
    zeros = pd.DataFrame({
        "as_of": np.repeat(all_days, TENORS.size),
        "tenor_months": np.tile(TENORS, n),
        "zero_rate": zero.ravel(),
    })
    k = STARTS.size * TENORS.size
    as_of = np.repeat(all_days, k)
    start = np.tile(np.repeat(STARTS, TENORS.size), n)
    tenor = np.tile(TENORS, n * STARTS.size)
    spot = np.repeat(zero, STARTS.size, axis=0).ravel()
    forwards = pd.DataFrame({
        "as_of": as_of,
        "start_months": start,
        "tenor_months": tenor,
        "start_date": cal.roll(add_months(as_of, start)),
        "end_date": cal.roll(add_months(as_of, start + tenor)),
        "forward_rate": spot + 0.0004 * np.sqrt(start / 12.0) + rng.normal(0, 1e-4, as_of.size),
    })
    return {"cal": cal, "observed": observed, "new_day": new_day, "zeros": zeros, "forwards": forwards}


def timed(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def run(years: int, repeat: int) -> dict[str, float]:
    m = market(years)
    cal, observed, zeros = m["cal"], m["observed"], m["zeros"]
    history = m["forwards"][m["forwards"]["as_of"] < m["new_day"]]  # what was known before the new day
    res: dict[str, float] = {"forwards": len(history)}

    t, outcomes = timed(lambda: realize(history, zeros, observed, cal, TOLERANCE), repeat)
    res["realize (all)"] = t
    res["outcomes"] = len(outcomes)
    outcomes = outcomes.assign(curve="govt", inverted=(outcomes["spot_rate"].to_numpy() > 0.05))
    res["summarize"], summary = timed(lambda: summarize(outcomes), repeat)
    res["summary rows"] = len(summary)
    res[f"term_premium ({WINDOW})"], tp = timed(lambda: term_premium(outcomes, WINDOW), repeat)
    res["premium rows"] = len(tp)
    res["total"] = res["realize (all)"] + res["summarize"] + res[f"term_premium ({WINDOW})"]

    # Incremental: the new day arrives; realise only the forwards it settles.
    new = np.array([m["new_day"]])
    seen = np.append(observed, new)
    forwards = m["forwards"]

    def one_day():
        due = due_forwards(forwards, new, cal, TOLERANCE, observed_days=seen)
        return realize(due, zeros, seen, cal, TOLERANCE)

    res["one new day (scan)"], day = timed(one_day, max(repeat, 5))
    res["realised that day"] = len(day)

    # The same step as the store serves it: forwards narrowed by start_date (an indexed range
    # query, emulated by searchsorted on a sorted copy) and zeros fetched for the needed days only.
    by_start = forwards.sort_values("start_date", kind="stable").reset_index(drop=True)
    start_days = by_start["start_date"].to_numpy().astype("datetime64[D]")
    zeros_by_day = zeros.sort_values("as_of", kind="stable").reset_index(drop=True)
    zero_days = zeros_by_day["as_of"].to_numpy().astype("datetime64[D]")

    def rows_of(days: np.ndarray) -> np.ndarray:
        lo, hi = np.searchsorted(zero_days, days, "left"), np.searchsorted(zero_days, days, "right")
        size = hi - lo
        return np.repeat(lo - np.cumsum(size) + size, size) + np.arange(size.sum())

    def one_day_indexed():
        lo, hi = due_target_window(new, cal, TOLERANCE)
        i0, i1 = np.searchsorted(start_days, [lo, hi], side="left")[0], np.searchsorted(start_days, hi, "right")
        due = due_forwards(by_start.iloc[i0:i1], new, cal, TOLERANCE, observed_days=seen)
        needed = np.union1d(due["as_of"].to_numpy().astype("datetime64[D]"), new)
        z = zeros_by_day.iloc[rows_of(needed)]
        return realize(due, z, seen, cal, TOLERANCE)

    res["one new day (indexed)"], day2 = timed(one_day_indexed, max(repeat, 5))
    assert len(day2) == len(day)
    return res


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--years", type=int, nargs=2, default=[5, 50])
    args = parser.parse_args()
    short, long = (run(y, args.repeat) for y in args.years)
    counts = {"forwards", "outcomes", "summary rows", "premium rows", "realised that day"}
    print(f"realise + audit, one curve, {STARTS.size * TENORS.size}-point daily surface "
          f"(median of {args.repeat} runs; one new day: median of {max(args.repeat, 5)})")
    head = f"{'':22}{args.years[0]:>5} years{args.years[1]:>10} years{'ratio':>9}"
    print(head)
    print("-" * len(head))
    for key in short:
        a, b = short[key], long[key]
        cell = (lambda v: f"{int(v):>11,}") if key in counts else (lambda v: f"{v * 1000:>9.0f} ms")
        print(f"{key:22}{cell(a)}{cell(b):>15}{b / a if a else float('nan'):>9.1f}")
    ok_total = long["total"] < 10.0
    ok_day = max(short["one new day (scan)"], long["one new day (scan)"]) < 1.0
    print(f"\n{args.years[1]}-year realise + audit under 10 s: {'yes' if ok_total else 'NO'}; "
          f"one new day under 1 s at both lengths: {'yes' if ok_day else 'NO'}")


if __name__ == "__main__":
    main()
