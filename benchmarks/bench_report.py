"""Benchmark: writing the HTML audit report from the demo store (30 years, two curves).

    .venv/bin/python benchmarks/bench_report.py [--dir DEMO_FOLDER] [--repeat N]

Without ``--dir`` it first makes the demo market in a temporary folder and runs load, check,
build, realize and audit on it (about half a minute, not timed). Then, as the median of
``--repeat`` runs, it times ``write_report`` as the command calls it, split into reading the store
(``gather_report``) and drawing the page (``render_report``), for the whole store and for one
curve over a ten-year window (where the audit figures are recomputed for the window).
Targets (issue 7): under 15 s to write and under 5 MB on disk for 30 years of two curves.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

from flows.report_step import gather_report, write_report
from pipeline.config import load_config
from pipeline.report import render_report

LIMIT_S, LIMIT_MB = 15.0, 5.0


def make_demo(folder: Path) -> Path:
    from flows.audit_step import run_audit
    from flows.build_step import run_build
    from flows.check_step import run_checks
    from flows.demo import make_demo_folder
    from flows.load_step import load_files
    from flows.realize_step import run_realize

    config = make_demo_folder(folder)
    cfg = load_config(config)
    load_files(cfg, sorted(p for p in cfg.inbox.iterdir() if p.is_file()))
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)
    run_audit(cfg)
    return config


def measure(config: Path, out: Path, repeat: int, curve: str | None, first: str | None,
            last: str | None) -> dict[str, float]:
    cfg = load_config(config)
    gather, render, total, size = [], [], [], 0.0
    for _ in range(repeat):
        t0 = time.perf_counter()
        data = gather_report(cfg, curve, first, last)
        t1 = time.perf_counter()
        render_report(data)
        t2 = time.perf_counter()
        path = write_report(cfg, out, curve, first, last)
        t3 = time.perf_counter()
        gather.append(t1 - t0)
        render.append(t2 - t1)
        total.append(t3 - t2)
        size = path.stat().st_size / 1e6
    return {"read": statistics.median(gather), "draw": statistics.median(render),
            "write": statistics.median(total), "mb": size}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--dir", type=Path, help="an existing demo folder (with its afterward.toml and store)")
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        if args.dir:
            config = args.dir / "afterward.toml"
        else:
            t = time.perf_counter()
            config = make_demo(Path(tmp) / "demo")
            print(f"demo store made in {time.perf_counter() - t:.1f} s (not timed below)")
        out = Path(tmp) / "reports"
        cases = [("all curves, all dates", None, None, None),
                 ("govt, 2010-2019 (audit recomputed)", "govt", "2010-01-01", "2019-12-31")]
        rows = [(name, measure(config, out, args.repeat, c, f, la)) for name, c, f, la in cases]
    print(f"\nmedian of {args.repeat} runs; limits {LIMIT_S:g} s and {LIMIT_MB:g} MB")
    print(f"{'case':<38} {'read s':>7} {'draw s':>7} {'write s':>8} {'MB':>6} {'s/limit':>8} {'MB/limit':>9}")
    for name, m in rows:
        print(f"{name:<38} {m['read']:>7.2f} {m['draw']:>7.2f} {m['write']:>8.2f} {m['mb']:>6.2f} "
              f"{m['write'] / LIMIT_S:>8.2f} {m['mb'] / LIMIT_MB:>9.2f}")


if __name__ == "__main__":
    main()
