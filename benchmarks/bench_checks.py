"""Benchmark of the data checks: curve-level checks on 30 years of a 12-tenor daily curve, and the
Great Expectations row-level suite on the same history as quote rows and on 1e6 rows.

Run:  .venv/bin/python benchmarks/bench_checks.py [--runs 3]

Prints one table of medians over ``--runs`` runs. The budget for ``curve_checks`` over 30 years is
2 s (issue 3). GX's import and first suite build are timed separately ("cold").
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from pipeline import checks  # noqa: E402
from pipeline.config import CurveConfig  # noqa: E402
from pipeline.dates import BusinessCalendar  # noqa: E402
from pipeline.tenors import parse_tenor  # noqa: E402

LABELS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "15Y", "20Y", "30Y"]
BUDGET_S = 2.0


def history(years: int = 30, seed: int = 1) -> tuple[np.ndarray, np.ndarray, CurveConfig]:
    holidays = [f"{y}-12-25" for y in range(2000, 2000 + years)] + [f"{y}-01-01" for y in range(2000, 2000 + years)]
    cal = BusinessCalendar.of(["Sat", "Sun"], holidays)
    cfg = CurveConfig(
        name="govt", quote="par", tenors=tuple(parse_tenor(t) for t in LABELS), calendar=cal,
        inversion_pairs=((parse_tenor("3M"), parse_tenor("10Y")), (parse_tenor("2Y"), parse_tenor("10Y"))),
    )
    days = cal.business_days(np.datetime64("2000-01-03"), np.datetime64(f"{2000 + years - 1}-12-31"))
    rng = np.random.default_rng(seed)
    n, t = len(days), len(LABELS)
    x = np.linspace(0, 1, t)
    lvl = np.cumsum(rng.normal(0, 4e-4, n))
    slope = np.cumsum(rng.normal(0, 2e-4, n))
    r = 0.04 + lvl[:, None] + slope[:, None] * x + rng.normal(0, 0.5e-4, (n, t))
    # realistic defects: missing days, missing quotes, a stale day, a units error
    drop = rng.choice(n, size=40, replace=False)
    keep = np.ones(n, dtype=bool)
    keep[drop] = False
    r[rng.random(r.shape) < 0.002] = np.nan
    r[n // 2] = r[n // 2 - 1]
    r[n // 3, 5] *= 10
    return days[keep], r[keep], cfg


def rows_of(days: np.ndarray, r: np.ndarray) -> pd.DataFrame:
    """The panel as parsed long-format quote rows (one per non-missing cell)."""
    d_idx, t_idx = np.nonzero(~np.isnan(r))
    n = len(d_idx)
    return pd.DataFrame({
        "line": np.arange(2, n + 2),
        "as_of": pd.Series(days[d_idx].astype("datetime64[s]")),
        "tenor": np.array(LABELS, dtype=object)[t_idx],
        "rate": r[d_idx, t_idx],
        "raw": "",
    })


def median_time(fn, runs: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=3)
    args = ap.parse_args()

    days, r, cfg = history()
    table: list[tuple[str, str, float, str]] = []

    def add(step: str, size: str, seconds: float, note: str = "") -> None:
        table.append((step, size, seconds, note))

    cells = f"{len(days)} d x {len(LABELS)} t"
    sec, found = median_time(lambda: checks.curve_checks(days, LABELS, r, cfg), args.runs)
    add("curve_checks (all)", cells, sec, f"{sec / BUDGET_S:.1%} of the 2 s budget; {len(found)} findings")
    for name, fn in [
        ("  missing_days", lambda: checks.missing_days(days, cfg)),
        ("  missing_tenors", lambda: checks.missing_tenors(days, LABELS, r, cfg)),
        ("  stale_curves", lambda: checks.stale_curves(days, LABELS, r, cfg)),
        ("  jumps", lambda: checks.jumps(days, LABELS, r, cfg)),
        ("  inversions", lambda: checks.inversions(days, LABELS, r, cfg)),
        ("inversion_episodes", lambda: checks.inversion_episodes(days, LABELS, r, cfg)),
    ]:
        s, out = median_time(fn, args.runs)
        add(name, cells, s, f"{len(out)} row(s)")
    # incremental: one new day against a year of previous days
    s, _ = median_time(lambda: checks.curve_checks(days[-1:], LABELS, r[-1:], cfg,
                                                   previous=(days[-261:-1], r[-261:-1])), args.runs)
    add("curve_checks (1 new day)", "1 d + 260 previous", s, "incremental daily run")
    times = np.tile(np.linspace(0, 30, 361), (len(days), 1))
    dfs = np.exp(-0.04 * times)
    s, _ = median_time(lambda: checks.curve_shape_checks(days, times, dfs, cfg), args.runs)
    add("curve_shape_checks", f"{len(days)} d x 361 grid", s, "")

    t0 = time.perf_counter()
    import great_expectations  # noqa: F401

    add("import great_expectations", "-", time.perf_counter() - t0, "once per process")
    from pipeline.expectations import validate_rows

    rows = rows_of(days, r)
    small = rows.iloc[:1000]
    t0 = time.perf_counter()
    validate_rows(small, cfg)
    add("validate_rows cold (suite build)", "1e3 rows", time.perf_counter() - t0, "first call in a process")
    rng = np.random.default_rng(3)
    big = rows.sample(n=1_000_000, replace=True, random_state=4).reset_index(drop=True)
    bad_big = big.copy()
    bad_at = rng.choice(len(bad_big), size=10_000, replace=False)
    bad_big.loc[bad_at, "rate"] = 0.9
    for label, frame, note in [
        ("validate_rows", small, ""),
        ("validate_rows", rows, "30-year history as rows"),
        ("validate_rows", big, "all rows pass"),
        ("validate_rows", bad_big, "1 % out of band"),
    ]:
        s, out = median_time(lambda f=frame: validate_rows(f, cfg), args.runs)
        per = s / len(frame) * 1e6
        add(label, f"{len(frame):,} rows", s, f"{per:.2f} us/row; {out.n_failed:,} failed; {note}".rstrip("; "))

    w = max(len(x[0]) for x in table)
    z = max(len(x[1]) for x in table)
    print(f"data checks benchmark: median of {args.runs} runs (seconds)")
    print(f"{'step':<{w}}  {'size':<{z}}  {'median s':>9}  note")
    print(f"{'-' * w}  {'-' * z}  {'-' * 9}  {'-' * 40}")
    for step, size, s, note in table:
        print(f"{step:<{w}}  {size:<{z}}  {s:9.4f}  {note}")


if __name__ == "__main__":
    main()
