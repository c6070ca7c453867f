"""Benchmark: `afterward build` end to end on 50 years of daily curves, against a QuantLib loop.

    .venv/bin/python benchmarks/bench_build.py [--repeat 3] [--years 50] [--skip-quantlib]

Set-up (not timed): the synthetic market of ``bench_curves.py`` (about 12,600 business days x 13
tenors of continuously compounded zero rates, ACT/365F, a calendar with holidays) is loaded through
the real load step, one long Parquet file per year, into a store with two curves holding the same
quotes: ``lin`` (``linear_zero``) and ``mc`` (``monotone_convex``), each with a forward grid of
12 starts x 8 tenors (about 1.2 million forwards per curve).

Timed, as the median of ``--repeat`` runs, each on a fresh copy of the loaded store: ``run_build``
for one curve - read the quotes from the store, build every day's curve, compute the zero-rate
table, the forward surface and the shape checks, and write zero rates, forwards and findings in
chunked transactions. Side by side: the per-day loop over QuantLib curves of ``bench_curves.py``
computing the same 1.2 million forwards from the same quotes (ZeroCurve/Linear for linear_zero;
MonotonicCubicZeroCurve as the nearest QuantLib curve of comparable cost for monotone_convex).
For linear_zero the largest difference between the stored forwards and QuantLib's is printed.

Targets (issue 4): under 10 s per method on 2 cores, and at least 10x faster than the QuantLib loop.

Where the time goes (cProfile, 50 years): writing the ~1.2 M forward rows is the largest single cost,
and DuckDB's cost per row grows with the number of columns, whatever they hold; so forward rows keep
only what varies (sql/007: a build key, the cell, two dates, two rates) and a day's constants sit once
in built_day. Days are found due in the store and only their quotes are read; the shape-check grid is
evaluated only on days whose method does not guarantee non-negative forwards (monotone convex with
positive discrete forwards, linear zero with non-negative segment-end forwards never need it).
"""

from __future__ import annotations

import argparse
import dataclasses
import shutil
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
from bench_curves import FWD_TENORS, STARTS, TENORS, quantlib_loop, synthetic_market

METHODS = {"linear_zero": "lin", "monotone_convex": "mc"}


def _toml(cal) -> str:  # noqa: ANN001
    holidays = ", ".join(f'"{h}"' for h in cal.holidays)
    quoted = ", ".join(f'"{t}"' for t in TENORS)
    starts = ", ".join(f'"{s}"' for s in STARTS)
    tenors = ", ".join(f'"{t}"' for t in FWD_TENORS)
    text = '[store]\npath = "bench.duckdb"\n'
    for method, name in METHODS.items():
        text += f"""
[curves.{name}]
files = "{name}_*.parquet"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "decimal"
interpolation = "{method}"
tenors = [{quoted}]
calendar.weekend = ["Sat", "Sun"]
calendar.holidays = [{holidays}]
forward.starts = [{starts}]
forward.tenors = [{tenors}]
"""
    return text


def write_files(root: Path, names, days: np.ndarray, zeros: np.ndarray) -> list[Path]:  # noqa: ANN001
    """One long Parquet file (date, tenor, rate, curve) per curve and year."""
    k = len(TENORS)
    years = days.astype("datetime64[Y]")
    out = []
    for name in names:
        for y in np.unique(years):
            sel = years == y
            n = int(sel.sum())
            table = pa.table({
                "date": pa.array(np.repeat(days[sel], k), type=pa.date32()),
                "tenor": pa.array(np.tile(np.array(TENORS, dtype=object), n), type=pa.string()),
                "rate": pa.array(zeros[sel].ravel(), type=pa.float64()),
                "curve": pa.array([name] * (n * k), type=pa.string()),
            })
            path = root / f"{name}_{y}.parquet"
            pq.write_table(table, path)
            out.append(path)
    return out


def loaded_store(root: Path, years: int, names=None):  # noqa: ANN001, ANN201
    """A store with the synthetic market loaded through the real load step; returns (cfg, days, cal, zeros)."""
    from flows.load_step import load_files
    from pipeline.config import load_config

    days, cal, zeros = synthetic_market(years)
    root.mkdir(parents=True, exist_ok=True)
    (root / "afterward.toml").write_text(_toml(cal), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    files = write_files(root, names or list(METHODS.values()), days, zeros)
    outcomes = load_files(cfg, files)
    bad = [o for o in outcomes if o.status != "loaded" or o.rows_rejected]
    if bad:
        raise SystemExit(f"set-up load failed: {bad[0]}")
    return cfg, days, cal, zeros


def fresh_copy(cfg, target: Path):  # noqa: ANN001, ANN201
    """The config pointed at a copy of its store (so each timed run starts from the same state)."""
    target.parent.mkdir(parents=True, exist_ok=True)
    shutil.copy2(cfg.store_path, target)
    wal = cfg.store_path.with_name(cfg.store_path.name + ".wal")
    if wal.exists():
        shutil.copy2(wal, target.with_name(target.name + ".wal"))
    return dataclasses.replace(cfg, store_path=target)


def time_build(cfg, name: str, scratch: Path, repeat: int):  # noqa: ANN001, ANN201
    from flows.build_step import run_build

    times, summary = [], None
    for r in range(repeat):
        run_cfg = fresh_copy(cfg, scratch / f"{name}-{r}" / "bench.duckdb")
        t0 = time.perf_counter()
        summary = run_build(run_cfg, name)
        times.append(time.perf_counter() - t0)
    return statistics.median(times), times, summary, run_cfg


def stored_forwards(cfg, name: str) -> np.ndarray:  # noqa: ANN001
    from warehouse.connect import reader

    with reader(cfg.store_path) as con:
        t = con.sql("SELECT forward_rate_cc FROM forwards WHERE curve = ? ORDER BY as_of, start_months, tenor_months",
                    params=[name]).to_arrow_table()
    return t["forward_rate_cc"].to_numpy()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--years", type=int, default=50)
    ap.add_argument("--skip-quantlib", action="store_true")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="afterward-bench-build-") as tmp:
        root = Path(tmp)
        t0 = time.perf_counter()
        cfg, days, cal, zeros = loaded_store(root, args.years)
        setup = time.perf_counter() - t0
        n_fwd = days.size * len(STARTS) * len(FWD_TENORS)
        print(f"build end to end (store -> curves -> forwards -> store): {days.size:,} days x {len(TENORS)} tenors, "
              f"grid {len(STARTS)} x {len(FWD_TENORS)} = {n_fwd:,} forwards per curve; "
              f"medians of {args.repeat} runs (set-up load {setup:.1f} s, not timed)\n")
        header = (f"{'method':<17}{'run_build s':>12}{'runs':>32}{'fwd/s':>12}{'QuantLib s':>12}{'speed-up':>10}"
                  f"{'max diff bp':>13}{'target':>22}")
        print(header)
        print("-" * len(header))
        for method, name in METHODS.items():
            med, runs, summary, last_cfg = time_build(cfg, name, root / "runs", args.repeat)
            info = summary.curves[name]
            if info["forwards"] != n_fwd:
                raise SystemExit(f"{method}: built {info['forwards']} forwards, expected {n_fwd}")
            ql_s, diff = float("nan"), float("nan")
            if not args.skip_quantlib:
                qruns = [quantlib_loop(days, zeros, cal, method) for _ in range(args.repeat)]
                ql_s = statistics.median(r[0] for r in qruns)
                if method == "linear_zero":
                    mine = stored_forwards(last_cfg, name).reshape(days.size, -1)
                    diff = float(np.max(np.abs(mine - qruns[-1][1]))) * 1e4
            ratio = ql_s / med
            ok = med < 10 and (args.skip_quantlib or ratio >= 10)
            runs_s = ", ".join(f"{x:.2f}" for x in runs)
            diff_s = f"{diff:13.2e}" if np.isfinite(diff) else f"{'other curve':>13}"
            print(f"{method:<17}{med:12.2f}{runs_s:>32}{n_fwd / med:12,.0f}{ql_s:12.2f}{ratio:9.1f}x{diff_s}"
                  f"{('met' if ok else 'MISSED') + ' (<10 s, >=10x)':>22}")
            shutil.rmtree(root / "runs", ignore_errors=True)


if __name__ == "__main__":
    main()
