"""Benchmark: the daily Prefect flow for one new day at 1 and 50 years of history; a 30-year backfill
with 1 and 2 workers.

    .venv/bin/python benchmarks/bench_daily.py [--repeat 3] [--years 1 50] [--skip-backfill]

Daily part. For each history length a synthetic store is made from the invented demo market
(``generate_market`` over the years up to 2025-12-31, clean monthly files, loaded with
``flows.load_step.load_files`` and carried through check, build, realize and audit without Prefect).
Each repeat restores that store, drops the next business day's two files into the inbox and runs
the ``daily`` flow. Prefect's start-up (its temporary server, once per process) is timed apart; the
"work" column is the flow body's own wall time (scan, load, file away, check, build, realize,
audit, artifacts); "per run" adds Prefect's per-run overhead (creating the flow run and its task
runs). Libraries (Great Expectations, SciPy) are already imported, as ``afterward run`` imports them
while Prefect starts. The day's files are given a modification time 10 s in the past, as files that
arrived before the scheduled run (the scan waits only for files modified within its settle interval).
Targets: work under 2 s; 50 years no more than 1.5x 1 year.

Backfill part. The demo's 30 years (721 files) are loaded once; each repeat runs the real command
``afterward backfill --workers N`` on a fresh copy of that store in a new process, for N = 1 and
N = 2, alternating, and reads its own report of start-up and work. Target: 2 workers faster than 1.
A probe of the machine's parallel capacity (one CPU-bound process alone, then two at once) is printed
beside it, because 2 workers can only win where the machine runs two processes at once.

Prints one table per part: medians of the repeats, in seconds, ratios beside them.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

NEW_DAY = "2026-01-02"
LAST_HISTORY_DAY = "2025-12-31"


# --- synthetic stores ---------------------------------------------------------------------------

def write_files(market, days_slice, folder: Path, name: str | None = None) -> list[Path]:  # noqa: ANN001
    """Clean files for ``market.days[days_slice]``: govt wide CSV (percent, 4 dp) and swap long Parquet,
    one pair per month (or one pair named ``name``)."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    days = market.days[days_slice]
    govt = market.quotes["govt"].iloc[days_slice]
    swap = market.quotes["swap"].iloc[days_slice]
    months = days.astype("datetime64[M]")
    groups = [(name, np.ones(len(days), bool))] if name else [(str(m), months == m) for m in np.unique(months)]
    out = []
    for label, mask in groups:
        g = (govt.loc[mask] * 100).round(4)
        g.index = g.index.strftime("%Y-%m-%d")
        g.index.name = "date"
        p = folder / f"govt_{label}.csv"
        g.to_csv(p, float_format="%.4f")
        s = swap.loc[mask]
        k = s.shape[1]
        table = pa.table({
            "date": pa.array(np.repeat(days[mask], k), type=pa.date32()),
            "tenor": pa.array(np.tile(np.array(s.columns, dtype=object), len(s)), type=pa.string()),
            "rate": pa.array(np.round(s.to_numpy(), 8).ravel()),
            "curve": pa.array(["swap"] * (len(s) * k), type=pa.string()),
        })
        q = folder / f"swap_{label}.parquet"
        pq.write_table(table, q)
        out += [p, q]
    return out


def make_history(root: Path, years: int) -> tuple[Path, list[Path]]:
    """A project whose store holds ``years`` of history, built, realised, audited and with its
    term-structure estimate (as a store the daily job has kept is: the month-end estimate is made when
    a month closes, and the new day closes none); returns (config path, new-day files)."""
    from flows.audit_step import run_audit
    from flows.build_step import run_build
    from flows.check_step import run_checks
    from flows.load_step import load_files
    from flows.model_step import run_model
    from flows.realize_step import run_realize
    from pipeline.config import load_config
    from pipeline.demo import demo_config_toml, generate_market
    from pipeline.term_structure import ModelInputError
    from warehouse.connect import writer

    root.mkdir(parents=True)
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    market = generate_market(first_day=f"{2026 - years}-01-01", last_day=NEW_DAY)
    history = root / "history"
    history.mkdir()
    n = len(market.days)
    files = write_files(market, slice(0, n - 1), history)
    load_files(cfg, files)
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)
    run_audit(cfg)
    try:
        run_model(cfg)  # the month-end estimate a kept store carries (the daily job's model step)
    except ModelInputError:
        pass  # too few month ends yet (1 year): the daily job logs the same and goes on
    with writer(cfg.store_path) as con:
        con.execute("CHECKPOINT")
    shutil.copy2(cfg.store_path, root / "snapshot.duckdb")
    spare = root / "new-day"
    spare.mkdir()
    day_files = write_files(market, slice(n - 1, n), spare, name=NEW_DAY)
    return cfg.path, day_files


def run_daily_once(config_path: Path, day_files: list[Path]) -> tuple[float, float, dict]:
    from flows.daily import daily
    from pipeline.config import load_config

    cfg = load_config(config_path)
    shutil.copy2(config_path.parent / "snapshot.duckdb", cfg.store_path)
    for ext in (".wal",):
        Path(str(cfg.store_path) + ext).unlink(missing_ok=True)
    for d in (cfg.loaded, cfg.refused):
        shutil.rmtree(d, ignore_errors=True)
    cfg.inbox.mkdir(exist_ok=True)
    past = time.time() - 10
    for p in day_files:
        target = cfg.inbox / p.name
        shutil.copy2(p, target)
        os.utime(target, (past, past))
    t = time.perf_counter()
    summary = daily(config_path=str(config_path), settle_seconds=1.0)
    per_run = time.perf_counter() - t
    assert summary.files_loaded == 2 and summary.files_refused == 0, summary.files
    assert sum(c["days_built"] for c in summary.curves.values()) == 2, summary.curves
    return summary.work_seconds, per_run, summary.seconds


def bench_daily(years_list: list[int], repeat: int, base: Path) -> None:
    from flows.prefect_commands import start_prefect

    with start_prefect() as startup:
        print(f"{startup.describe()} (once for this process; excluded below)")
        results = {}
        for years in years_list:
            t = time.perf_counter()
            config_path, day_files = make_history(base / f"hist-{years}y", years)
            print(f"made a {years}-year history in {time.perf_counter() - t:.0f} s", flush=True)
            runs = [run_daily_once(config_path, day_files) for _ in range(repeat)]
            steps = {k: statistics.median(r[2][k] for r in runs) for k in runs[0][2]}
            results[years] = (statistics.median(r[0] for r in runs), statistics.median(r[1] for r in runs), steps)
    names = list(dict.fromkeys(n for r in results.values() for n in r[2]))  # a step not due in a run: "-"
    print()
    print(f"daily run, one new day (medians of {repeat}; seconds)")
    head = f"{'history':>8} {'work':>7} {'per run':>8} " + " ".join(f"{n:>9}" for n in names)
    print(head)
    for years, (work, per_run, steps) in results.items():
        cells = " ".join(f"{steps[n]:9.3f}" if n in steps else f"{'-':>9}" for n in names)
        print(f"{str(years) + ' y':>8} {work:7.2f} {per_run:8.2f} {cells}")
    if len(results) >= 2:
        lo, hi = min(results), max(results)
        ratio = results[hi][0] / results[lo][0]
        print(f"{hi} y / {lo} y work: {ratio:.2f}x (target <= 1.5x); "
              f"work at {hi} y {results[hi][0]:.2f} s (target < 2 s)")


# --- backfill -----------------------------------------------------------------------------------

def _burn(n: int) -> float:
    t = time.perf_counter()
    x = 0
    for i in range(n):
        x += i
    return time.perf_counter() - t


def parallel_probe() -> tuple[float, float]:
    """Seconds for one CPU-bound job alone, and for two at once in two processes (the slower one)."""
    n = 4_000_000
    alone = statistics.median(_burn(n) for _ in range(3))
    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(2) as pool:
        pool.map(_burn, [1000, 1000])
        both = statistics.median(max(pool.map(_burn, [n, n])) for _ in range(3))
    return alone, both


def bench_backfill(repeat: int, base: Path) -> None:
    from flows.demo import make_demo_folder
    from flows.load_step import load_files
    from pipeline.config import load_config
    from warehouse.connect import writer

    template = base / "demo"
    cfg = load_config(make_demo_folder(template))
    load_files(cfg, sorted(p for p in cfg.inbox.iterdir() if p.is_file()))
    with writer(cfg.store_path) as con:
        con.execute("CHECKPOINT")
    shutil.rmtree(cfg.inbox)
    alone, both = parallel_probe()
    pattern = re.compile(r"Prefect start-up ([\d.]+) s.*?(?:local Dask cluster ([\d.]+) s alongside)?; "
                         r"the job's own work ([\d.]+) s .*?total ([\d.]+) s")
    rows: dict[int, list[tuple[float, float, float, float]]] = {1: [], 2: []}
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    for i in range(repeat):
        for workers in (1, 2) if i % 2 == 0 else (2, 1):
            work_dir = base / f"bf-{workers}-{i}"
            shutil.copytree(template, work_dir)
            t = time.perf_counter()
            proc = subprocess.run([sys.executable, "-m", "flows.cli", "--config", str(work_dir / "afterward.toml"),
                                   "backfill", "--from", "1996-01-01", "--to", LAST_HISTORY_DAY,
                                   "--workers", str(workers)], capture_output=True, text=True, env=env, timeout=900)
            wall = time.perf_counter() - t
            m = pattern.search(" ".join(proc.stdout.split()))
            if proc.returncode != 0 or m is None:
                raise SystemExit(f"backfill --workers {workers} failed:\n{proc.stdout}\n{proc.stderr}")
            rows[workers].append((float(m.group(1)), float(m.group(2) or 0), float(m.group(3)), wall))
            shutil.rmtree(work_dir)
            print(f"backfill --workers {workers}: work {float(m.group(3)):.2f} s, command {wall:.1f} s", flush=True)
    med = {w: [statistics.median(r[k] for r in rs) for k in range(4)] for w, rs in rows.items()}
    print()
    print(f"30-year demo backfill, `afterward backfill --workers N` (medians of {repeat}; seconds)")
    print(f"{'workers':>8} {'start-up':>9} {'cluster':>8} {'work':>7} {'command':>8}")
    for w, (st, cl, work, wall) in med.items():
        print(f"{w:>8} {st:9.1f} {cl:8.1f} {work:7.2f} {wall:8.1f}")
    print(f"2 workers / 1 worker: work {med[2][2] / med[1][2]:.2f}x, command {med[2][3] / med[1][3]:.2f}x "
          "(target < 1)")
    print(f"machine probe: one CPU-bound process alone {alone:.2f} s, two at once {both:.2f} s each "
          f"({2 * alone / both:.2f}x the throughput of one)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--years", type=int, nargs="+", default=[1, 50])
    parser.add_argument("--skip-backfill", action="store_true")
    parser.add_argument("--skip-daily", action="store_true")
    args = parser.parse_args()
    from flows.prefect_commands import prefect_environment

    prefect_environment()
    base = Path(tempfile.mkdtemp(prefix="afterward-bench-daily-"))
    try:
        if not args.skip_daily:
            bench_daily(args.years, args.repeat, base)
        if not args.skip_backfill:
            bench_backfill(args.repeat, base)
    finally:
        shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    main()
