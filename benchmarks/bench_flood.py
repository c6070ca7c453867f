"""Benchmark: the cost of a one-day flood, which must stay linear in the file's size.

    .venv/bin/python benchmarks/bench_flood.py [--repeat 3]

Set-up (not timed): wide CSV files of govt par yields in percent whose every line carries the same
day (3M differs on every line, 5Y takes two values, 1Y, 2Y and 10Y never change: five tenors, so
five quotes a line, all but three rejected as duplicates) at 50,000, 100,000 and 200,000 lines; and a
long-layout CSV of 1,000,000 lines of one (day, 3M) with values that differ.

Timed, median of ``--repeat`` runs, each a fresh Python process on a fresh store, loading the one file
through ``flows.load_step.load_files`` (read, intake, duplicates, the Great Expectations row suite, one
transaction):

* ``load s``: ``load_files`` itself, imports done - what the issue's bound is about;
* ``process s``: the whole process, interpreter start and imports included (what ``afterward load``
  costs a user);
* ``peak RSS MiB``: the process's peak resident set, from its ``wait4`` rusage.

Target (issue 15): the 200,000-line one-day file loads in at most 10 s with a peak under 1 GiB; the
seconds per line stay flat as the file grows (linear, where the old reasons made it quadratic: 5,000
lines took 15 s and 4 GB).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]

CONFIG = """
[store]
path = "store.duckdb"

[curves.govt]
files = "govt_*"
quote = "par"
compounding = "semiannual"
day_count = "ACT/365F"
units = "percent"
tenors = ["3M", "1Y", "2Y", "5Y", "10Y"]
"""

CHILD = r"""
import json, sys, time
from pathlib import Path
import great_expectations  # noqa: F401  (paid once per process; not part of the load)
import flows.load_step as steps
from pipeline.config import load_config
cfg = load_config(sys.argv[1])
t0 = time.perf_counter()
[out] = steps.load_files(cfg, [Path(sys.argv[2])])
print(json.dumps({"load": time.perf_counter() - t0, "status": out.status, "read": out.rows_read,
                  "accepted": out.rows_accepted, "rejected": out.rows_rejected}))
"""

PEAK_TARGET = 1 << 30
SECONDS_TARGET = 10.0
TARGET_LINES = 200_000


def write_wide(path: Path, lines: int) -> Path:
    with path.open("w", encoding="utf-8") as f:
        f.write("date,3M,1Y,2Y,5Y,10Y\n")
        f.writelines(f"2031-01-02,4.{k % 9973:04d},4.2,4.3,{'4.5' if k % 2 else '4.51'},4.8\n" for k in range(lines))
    return path


def write_long(path: Path, lines: int) -> Path:
    with path.open("w", encoding="utf-8") as f:
        f.write("date,tenor,rate\n")
        f.writelines(f"2031-01-02,3M,4.{k % 9973:04d}\n" for k in range(lines))
    return path


def one_run(file: Path) -> dict:
    with tempfile.TemporaryDirectory(prefix="afterward-bench-flood-run-") as tmp:
        cfg = Path(tmp) / "afterward.toml"
        cfg.write_text(CONFIG, encoding="utf-8")
        env = {**os.environ, "PYTHONPATH": str(REPO)}
        t0 = time.perf_counter()
        # one pipe for both streams (read to its end, then reaped with wait4 for the child's own rusage)
        proc = subprocess.Popen([sys.executable, "-c", CHILD, str(cfg), str(file)], stdout=subprocess.PIPE,
                                stderr=subprocess.STDOUT, text=True, env=env)
        out = proc.stdout.read()    # type: ignore[union-attr]
        _pid, status, usage = os.wait4(proc.pid, 0)
        proc.returncode = os.waitstatus_to_exitcode(status)
        wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise SystemExit(f"load of {file.name} failed:\n{out[-2000:]}")
    res = json.loads(out.strip().splitlines()[-1])
    res["process"] = wall
    res["peak"] = usage.ru_maxrss * 1024        # kilobytes on Linux
    return res


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    med = statistics.median
    table = []
    with tempfile.TemporaryDirectory(prefix="afterward-bench-flood-") as tmp:
        files = [("wide, one day", write_wide(Path(tmp) / f"govt_wide_{n}.csv", n), n)
                 for n in (50_000, 100_000, TARGET_LINES)]
        files.append(("long, one (day, tenor)", write_long(Path(tmp) / "govt_long_1000000.csv", 1_000_000),
                      1_000_000))
        for label, path, lines in files:
            runs = [one_run(path) for _ in range(args.repeat)]
            table.append((label, lines, runs))
    print(f"one-day floods, each loaded into a fresh store by a fresh process; medians of {args.repeat} runs\n")
    header = (f"{'file':<24}{'lines':>11}{'rows':>11}{'load s':>9}{'us/line':>9}{'process s':>11}"
              f"{'peak RSS MiB':>14}  target")
    print(header)
    print("-" * len(header))
    verdicts = []
    for label, lines, runs in table:
        load, process, peak = med(r["load"] for r in runs), med(r["process"] for r in runs), \
            max(r["peak"] for r in runs)
        if lines == TARGET_LINES and label.startswith("wide"):
            met = load <= SECONDS_TARGET and peak < PEAK_TARGET
            verdicts.append((met, load, peak))
            target = f"<= {SECONDS_TARGET:.0f} s, < 1024 MiB: {'met' if met else 'MISSED'}"
        else:
            target = "< 1024 MiB: " + ("met" if peak < PEAK_TARGET else "MISSED")
        print(f"{label:<24}{lines:>11,}{runs[0]['read']:>11,}{load:>9.2f}{load / lines * 1e6:>9.1f}"
              f"{process:>11.2f}{peak / 2**20:>14.0f}  {target}")
    print("\npeak RSS is the largest of the runs; rows are quotes read (all but a few rejected as duplicates)")
    for met, load, peak in verdicts:
        print(f"target (200,000-line one-day file <= 10 s, < 1 GiB): {'met' if met else 'MISSED'} "
              f"({load:.2f} s, {peak / 2**20:.0f} MiB)")


if __name__ == "__main__":
    main()
