"""Benchmark: `afterward realize` and `afterward audit` through the store on a 96-point surface.

    .venv/bin/python benchmarks/bench_realize.py [--repeat 3] [--years 50] [--history 5 50]

Set-up (not timed): the synthetic market of ``bench_curves.py`` (daily zero curves, 13 tenors,
ACT/365F, a calendar with holidays) loaded through the real load step into a store, and built with
``linear_zero`` on a grid of 12 starts x 8 tenors = 96 forwards a day (50 years: about 1.2 million
forwards).

Timed, medians of ``--repeat`` runs, each on a fresh copy of the set-up store:

* **full**: ``run_realize`` (match every forward whose target date has been observed with the
  realised zero rate and write the outcomes) then ``run_audit`` (read the outcomes, compute every
  horizon's statistics in three regimes and the trailing term premium, write them); target under
  10 s together for 50 years;
* **daily**: a history of 5 and of 50 years, already realised; one new business day is loaded and
  built (set-up), then ``run_realize`` matches the forwards whose target is that day; target under
  1 s whatever the length of the history. The one-day load and build are shown for information.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
from bench_build import fresh_copy, loaded_store
from bench_curves import FWD_TENORS, STARTS, TENORS

CURVE = "lin"


def _median(xs: list[float]) -> float:
    return statistics.median(xs)


def built_store(root: Path, years: int):  # noqa: ANN201
    from flows.build_step import run_build

    cfg, days, cal, zeros = loaded_store(root, years, names=[CURVE])
    run_build(cfg, CURVE)
    return cfg, days, cal, zeros


def time_full(cfg, scratch: Path, repeat: int) -> dict:  # noqa: ANN001
    from flows.audit_step import run_audit
    from flows.realize_step import run_realize

    real, aud, n = [], [], 0
    for r in range(repeat):
        c = fresh_copy(cfg, scratch / f"full-{r}" / "bench.duckdb")
        t0 = time.perf_counter()
        s = run_realize(c, CURVE)
        t1 = time.perf_counter()
        run_audit(c, CURVE)
        t2 = time.perf_counter()
        real.append(t1 - t0)
        aud.append(t2 - t1)
        n = s.curves[CURVE]["realized"]
    return {"realize": _median(real), "audit": _median(aud), "total": _median([a + b for a, b in zip(real, aud,
                                                                                                     strict=True)]),
            "outcomes": n}


def new_day_file(root: Path, days: np.ndarray, cal, zeros: np.ndarray) -> tuple[Path, np.datetime64]:  # noqa: ANN001
    day = cal.add_business_days(days[-1], 1)
    rng = np.random.default_rng(5)
    row = zeros[-1] + rng.normal(0, 2e-5, zeros.shape[1])
    k = len(TENORS)
    table = pa.table({
        "date": pa.array(np.repeat(np.array([day], dtype="datetime64[D]"), k), type=pa.date32()),
        "tenor": pa.array(TENORS, type=pa.string()),
        "rate": pa.array(row, type=pa.float64()),
        "curve": pa.array([CURVE] * k, type=pa.string()),
    })
    path = root / f"{CURVE}_new_{day}.parquet"
    pq.write_table(table, path)
    return path, day


def time_daily(root: Path, years: int, repeat: int) -> dict:
    from flows.build_step import run_build
    from flows.load_step import load_files
    from flows.realize_step import run_realize

    cfg, days, cal, zeros = built_store(root, years)
    run_realize(cfg, CURVE)  # the history is realised: the daily run only sees the new day
    path, day = new_day_file(root, days, cal, zeros)
    loads, builds, reals, n = [], [], [], 0
    for r in range(repeat):
        c = fresh_copy(cfg, root / f"daily-{r}" / "bench.duckdb")
        t0 = time.perf_counter()
        load_files(c, [path])
        t1 = time.perf_counter()
        b = run_build(c, CURVE)
        t2 = time.perf_counter()
        s = run_realize(c, CURVE)
        t3 = time.perf_counter()
        if b.curves[CURVE]["days_built"] != 1:
            raise SystemExit(f"expected one new day built, got {b.curves[CURVE]}")
        loads.append(t1 - t0)
        builds.append(t2 - t1)
        reals.append(t3 - t2)
        n = s.curves[CURVE]["realized"]
    return {"days": days.size, "load": _median(loads), "build": _median(builds), "realize": _median(reals),
            "outcomes": n, "day": str(day)}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--years", type=int, default=50)
    ap.add_argument("--history", type=int, nargs="+", default=[5, 50])
    args = ap.parse_args()
    grid = len(STARTS) * len(FWD_TENORS)
    with tempfile.TemporaryDirectory(prefix="afterward-bench-realize-") as tmp:
        root = Path(tmp)
        t0 = time.perf_counter()
        cfg, days, _, _ = built_store(root / "full", args.years)
        setup = time.perf_counter() - t0
        print(f"realize + audit through the store: {args.years} years = {days.size:,} days x {grid} forwards = "
              f"{days.size * grid:,} forwards; medians of {args.repeat} runs (set-up load + build {setup:.1f} s, "
              "not timed)\n")
        full = time_full(cfg, root / "full" / "runs", args.repeat)
        header = f"{'step':<34}{'outcomes':>12}{'seconds':>10}{'target':>24}"
        print(header)
        print("-" * len(header))
        print(f"{'run_realize (all forwards)':<34}{full['outcomes']:>12,}{full['realize']:>10.2f}")
        print(f"{'run_audit (all horizons)':<34}{'':>12}{full['audit']:>10.2f}")
        verdict = "met" if full["total"] < 10 else "MISSED"
        print(f"{'realize + audit':<34}{'':>12}{full['total']:>10.2f}{verdict + ' (< 10 s)':>24}")
        print()
        header = (f"{'daily run, history':<20}{'days':>8}{'new outcomes':>14}{'load s':>9}{'build s':>9}"
                  f"{'realize s':>11}{'target':>22}")
        print(header)
        print("-" * len(header))
        for years in args.history:
            d = time_daily(root / f"daily{years}", years, args.repeat)
            verdict = "met" if d["realize"] < 1 else "MISSED"
            print(f"{f'{years} years':<20}{d['days']:>8,}{d['outcomes']:>14,}{d['load']:>9.2f}{d['build']:>9.2f}"
                  f"{d['realize']:>11.3f}{verdict + ' (realize < 1 s)':>22}")
            sys.stdout.flush()


if __name__ == "__main__":
    main()
