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

Store part (``--stores CONFIG_1Y CONFIG_50Y``, or ``--make-stores DIR`` to build both with
``benchmarks/bench_daily.py``'s ``make_history``, which takes minutes): the audit step over a real
store. The outcomes realised on the store's last observed day are held back and the full audit
(``run_audit``, which also stores the running state) is run on the rest; each repeat then restores
that copy, re-inserts the held day's outcomes as a realisation run would, and times the daily
``refresh_audit_incremental`` (opening the store included) against ``run_audit`` on the same data,
and lists the (curve, start x tenor) cells the refresh recomputed from their record (a Newey-West lag
outside the cell's stored lag band, a moved term-premium lag, an exhausted median band, a new cell).
Target: the daily refresh at 50 years well under 0.15 s and close to its 1-year figure.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

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


def _store_copy(config: Path, work: Path) -> Path:
    """A private copy of a project's store and config (the original is never written). A
    ``snapshot.duckdb`` beside the config (what ``make_history`` leaves) is preferred to the live store,
    which a running benchmark may be rewriting."""
    from pipeline.config import load_config

    src = load_config(config)
    work.mkdir(parents=True, exist_ok=True)
    snapshot = config.parent / "snapshot.duckdb"
    store = snapshot if snapshot.exists() else src.store_path
    shutil.copy2(store, work / "store.duckdb")
    wal = store.with_name(store.name + ".wal")
    if wal.exists():
        shutil.copy2(wal, work / "store.duckdb.wal")
    lines = config.read_text(encoding="utf-8").splitlines()
    at = lines.index("[store]")
    for i in range(at + 1, len(lines)):
        if lines[i].strip().startswith("path"):
            lines[i] = 'path = "store.duckdb"'
            break
    (work / "afterward.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return work / "afterward.toml"


def run_store(config: Path, repeat: int, work: Path) -> dict[str, float]:
    """Daily incremental refresh vs full recompute of the audit on a copy of a real store."""
    from flows.audit_step import refresh_audit_incremental, run_audit
    from pipeline.config import load_config
    from warehouse.connect import writer
    from warehouse.loads import utc_now

    cfg = load_config(_store_copy(config, work))
    with writer(cfg.store_path) as con:
        day = con.execute("SELECT max(observed_on) FROM outcome").fetchall()[0][0]
        con.execute("CREATE TABLE bench_held AS SELECT * FROM outcome WHERE observed_on = ? "
                    "AND superseded_at IS NULL", [day])
        con.execute("DELETE FROM outcome WHERE observed_on = ? AND superseded_at IS NULL", [day])
        outcomes = con.execute("SELECT count(*) FROM outcome WHERE superseded_at IS NULL").fetchall()[0][0]
        held = con.execute("SELECT count(*) FROM bench_held").fetchall()[0][0]
    run_audit(cfg)
    with writer(cfg.store_path) as con:
        con.execute("CHECKPOINT")
    base = work / "base.duckdb"
    shutil.copy2(cfg.store_path, base)

    def fresh_day() -> None:
        shutil.copy2(base, cfg.store_path)
        with writer(cfg.store_path) as con:
            con.execute("INSERT INTO outcome SELECT curve, as_of, start_months, tenor_months, target_date, "
                        "observed_on, forward_rate, realized_rate, spot_rate, error_bp, rw_error_bp, ?, NULL "
                        "FROM bench_held", [utc_now()])

    res: dict[str, float] = {"outcomes": outcomes, "new outcomes": held}
    inc, full, modes, cells = [], [], set(), set()
    for _ in range(repeat):
        fresh_day()
        t0 = time.perf_counter()
        done = refresh_audit_incremental(cfg)
        inc.append(time.perf_counter() - t0)
        modes |= {(d.mode, len(d.recomputed)) for d in done.values()}
        cells |= {(name, s, m) for name, d in done.items() for s, m in d.recomputed}
        fresh_day()
        t0 = time.perf_counter()
        run_audit(cfg)
        full.append(time.perf_counter() - t0)
    res["daily refresh"] = statistics.median(inc)
    res["full recompute"] = statistics.median(full)
    res["modes"] = modes  # type: ignore[assignment]
    res["recomputed"] = cells  # type: ignore[assignment]
    return res


def store_part(configs: list[Path], repeat: int) -> None:
    with tempfile.TemporaryDirectory(prefix="bench-audit-") as tmp:
        short, long = (run_store(c, repeat, Path(tmp) / str(i)) for i, c in enumerate(configs))
    print(f"\naudit step on a store, both curves (median of {repeat}; the daily refresh folds in one observed day)")
    head = f"{'':22}{'1 year':>11}{'50 years':>15}{'ratio':>9}"
    print(head)
    print("-" * len(head))
    for key in ("outcomes", "new outcomes"):
        print(f"{key:22}{int(short[key]):>11,}{int(long[key]):>15,}{long[key] / short[key]:>9.1f}")
    for key in ("daily refresh", "full recompute"):
        a, b = short[key], long[key]
        print(f"{key:22}{a * 1000:>8.0f} ms{b * 1000:>12.0f} ms{b / a:>9.2f}")
    print(f"daily refresh vs full recompute at 50 years: {long['daily refresh'] / long['full recompute']:.3f}x; "
          f"paths taken: {sorted(short['modes'] | long['modes'])}")  # type: ignore[operator]
    for label, r in (("1 year", short), ("50 years", long)):
        cells = ", ".join(f"{c} {s}x{m}" for c, s, m in sorted(r["recomputed"])) or "none"  # type: ignore[arg-type]
        print(f"cells recomputed from their record, {label}: {cells}")
    print(f"daily refresh at 50 years under 0.15 s: {'yes' if long['daily refresh'] < 0.15 else 'NO'}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--years", type=int, nargs=2, default=[5, 50])
    parser.add_argument("--stores", type=Path, nargs=2, metavar=("CONFIG_1Y", "CONFIG_50Y"),
                        help="afterward.toml of a 1-year and a 50-year project (their stores are copied, not changed)")
    parser.add_argument("--make-stores", type=Path, metavar="DIR",
                        help="build the 1- and 50-year projects in DIR first (bench_daily.make_history; slow)")
    parser.add_argument("--store-only", action="store_true", help="skip the in-memory part")
    args = parser.parse_args()
    if args.make_stores:
        sys.path.insert(0, str(Path(__file__).resolve().parent))
        from bench_daily import make_history

        args.stores = [make_history(args.make_stores / f"h{y}", y)[0] for y in (1, 50)]
    if not args.store_only:
        memory_part(args)
    if args.stores:
        store_part(list(args.stores), max(args.repeat, 5))


def memory_part(args: argparse.Namespace) -> None:
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
