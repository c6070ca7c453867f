"""Run every benchmark script (benchmarks/bench_*.py) in turn and print their tables.

    .venv/bin/python benchmarks/run_all.py [--only NAME ...] [--repeat N]

Each script runs in its own Python process with its default arguments (``--repeat N`` is passed
on when given), so one benchmark's imports, caches and store never colour another's figures.
``make bench`` calls this (a script whose option is ``--runs`` gets that instead).
The exit status is 1 if any script failed; a script that misses its
target still exits 0 - its table says "MISSED".
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def scripts(only: list[str] | None) -> list[Path]:
    found = sorted(HERE.glob("bench_*.py"))
    if only:
        wanted = {n.removeprefix("bench_").removesuffix(".py") for n in only}
        found = [p for p in found if p.stem.removeprefix("bench_") in wanted]
    return found


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--only", nargs="+", help="benchmark names, e.g. load build (default: all)")
    ap.add_argument("--repeat", type=int, help="passed to every script as --repeat N")
    args = ap.parse_args()
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(HERE.parent), os.environ.get("PYTHONPATH", "")])}
    failed = []
    todo = scripts(args.only)
    if not todo:
        print("no benchmark scripts matched", file=sys.stderr)
        return 2
    for path in todo:
        cmd = [sys.executable, str(path)]
        if args.repeat is not None:
            text = path.read_text(encoding="utf-8")
            flag = next((f for f in ("--repeat", "--runs") if f'"{f}"' in text), None)
            if flag:  # scripts name their repeat count in one of two ways
                cmd += [flag, str(args.repeat)]
        # other work on the machine skews wall-clock figures: say how busy it was
        load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
        print(f"=== {path.name} (load average {load:.1f} on {os.cpu_count()} cores) "
              + "=" * max(0, 50 - len(path.name)), flush=True)
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, cwd=HERE.parent, env=env, check=False)
        print(f"--- {path.name}: {'ok' if proc.returncode == 0 else f'FAILED (exit {proc.returncode})'} "
              f"in {time.perf_counter() - t0:.0f} s\n", flush=True)
        if proc.returncode != 0:
            failed.append(path.name)
    if failed:
        print(f"failed: {', '.join(failed)}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
