"""Benchmark: loading the demo market's 30 years of two curves into a fresh store.

    .venv/bin/python benchmarks/bench_load.py [--repeat 3]

Set-up (not timed): the demo inbox (``pipeline.demo.write_demo_inbox``: 360 monthly CSV files
of government par yields in percent, 360 monthly Parquet files of swap zero rates, one restatement
file; about 15,500 curve-days and 190,000 quotes, with the demo's planted defects).

Timed, median of ``--repeat`` runs, each in a fresh Python process on a fresh store, loading every
file in name order through ``flows.load_step.load_files`` (read, route, unit conversion, duplicate and
tenor checks, the Great Expectations row-level suite, one transaction per file):

* ``process``: the whole process, interpreter start and imports included - what ``afterward load``
  costs a user;
* ``GX import``: importing great_expectations on its own (paid once per process);
* ``load_files``: the load itself, GX already imported, as ``afterward load`` runs it: a forked
  second process reads and validates the next chunks of files while the first records;
* ``load_files in one process``: the same load with ``read_ahead=False`` (alternating runs, same
  inbox), whose phases are shown: ``read`` (bytes to rows), ``intake`` (routing, units,
  duplicates, maturities), ``GX rows`` (the row-level expectation validation) and ``record`` (the
  DuckDB transactions).

Rows per second is quotes read over ``load_files`` seconds. The CPU time of the recording process
is shown too: on a machine shared with other work, wall time includes waiting for the disk (one
fsync per file's commit) and for the CPU. Target (issue 2): under 5 s on 2 cores.
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

CHILD = r"""
import json, sys, time
t_begin = time.perf_counter()
from pathlib import Path
t0 = time.perf_counter()
import great_expectations  # noqa: F401
gx_import = time.perf_counter() - t0
import flows.load_step as steps
import pipeline.expectations as expectations
import warehouse.loads as loads
from pipeline.config import load_config

phases = {"read": 0.0, "intake": 0.0, "gx_rows": 0.0, "validate": 0.0, "record": 0.0}

def timed(key, fn):
    def wrapper(*a, **k):
        t = time.perf_counter()
        try:
            return fn(*a, **k)
        finally:
            phases[key] += time.perf_counter() - t
    return wrapper

steps._read = timed("read", steps._read)
steps.prepare_many = timed("intake", steps.prepare_many)
steps.validate_intakes = timed("validate", steps.validate_intakes)
expectations.validate_rows = timed("gx_rows", expectations.validate_rows)
loads.Loader.record = timed("record", loads.Loader.record)

cfg = load_config(sys.argv[1])
files = sorted((p for p in cfg.inbox.iterdir() if p.is_file()), key=lambda p: p.name)
t0, c0 = time.perf_counter(), time.process_time()
out = steps.load_files(cfg, files, read_ahead=sys.argv[2] == "ahead")
load, cpu = time.perf_counter() - t0, time.process_time() - c0
print(json.dumps({"gx_import": gx_import, "load": load, "cpu": cpu, "phases": phases, "files": len(out),
                  "loaded": sum(o.status == "loaded" for o in out), "rows": sum(o.rows_read for o in out),
                  "rejected": sum(o.rows_rejected for o in out), "in_process": time.perf_counter() - t_begin}))
"""


def make_inbox(root: Path) -> Path:
    from pipeline.config import load_config
    from pipeline.demo import demo_config_toml, write_demo_inbox

    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    write_demo_inbox(cfg.inbox)
    return root / "afterward.toml"


def one_run(config: Path, mode: str) -> dict:
    cfg_text = config.read_text(encoding="utf-8")
    with tempfile.TemporaryDirectory(prefix="afterward-bench-load-run-") as tmp:
        # a fresh store beside a copy of the config that points at the shared inbox
        run_cfg = Path(tmp) / "afterward.toml"
        inbox = (config.parent / "inbox").resolve()
        run_cfg.write_text(cfg_text.replace('path = "inbox"', f'path = "{inbox}"', 1), encoding="utf-8")
        env = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1])}
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-c", CHILD, str(run_cfg), mode], capture_output=True, text=True,
                              env=env, check=False)
        wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise SystemExit(f"load run failed:\n{proc.stderr[-2000:]}")
    res = json.loads(proc.stdout.strip().splitlines()[-1])
    res["process"] = wall
    return res


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="afterward-bench-load-") as tmp:
        config = make_inbox(Path(tmp))
        # the two ways alternate, so a busy spell of the machine falls on both
        both = [(one_run(config, "ahead"), one_run(config, "single")) for _ in range(args.repeat)]
    runs = [a for a, _ in both]
    single = [b for _, b in both]
    med = statistics.median

    def m(key: str, of: list[dict] = runs) -> float:
        return med(r[key] for r in of)

    def ph(key: str) -> float:
        return med(r["phases"][key] for r in single)

    r0 = runs[0]
    print(f"load the demo inbox into a fresh store: {r0['files']} files ({r0['loaded']} loaded), {r0['rows']:,} quotes "
          f"read, {r0['rejected']} rejected; medians of {args.repeat} runs, each a fresh process\n")
    rows = [
        ("process (start, imports, load)", m("process")),
        ("  GX import", m("gx_import")),
        ("  load_files (a second process reads ahead)", m("load")),
        ("  load_files, CPU time of the recording process", m("cpu")),
        ("  load_files in one process (for the phases below)", m("load", single)),
        ("    read (bytes to rows)", ph("read")),
        ("    intake (route, units, duplicates, maturities)", ph("intake")),
        ("    GX row-level validation", ph("gx_rows")),
        ("    record (DuckDB transactions)", ph("record")),
    ]
    width = max(len(r[0]) for r in rows) + 2
    header = f"{'phase':<{width}}{'seconds':>9}  {'runs':<36}"
    print(header)
    print("-" * len(header))
    keys = ["process", "gx_import", "load", "cpu", "single", "read", "intake", "gx_rows", "record"]
    for (label, value), key in zip(rows, keys, strict=True):
        if key == "single":
            vals = [r["load"] for r in single]
        elif key in ("read", "intake", "gx_rows", "record"):
            vals = [r["phases"][key] for r in single]
        else:
            vals = [r[key] for r in runs]
        print(f"{label:<{width}}{value:9.2f}  {', '.join(f'{v:.2f}' for v in vals):<36}")
    load = m("load")
    print(f"\nrows per second (load_files): {r0['rows'] / load:,.0f}; reading ahead / one process: "
          f"{load / m('load', single):.2f}x")
    verdict = "met" if load < 5 else "MISSED"
    print(f"target load_files < 5 s: {verdict} ({load:.2f} s); whole process {m('process'):.2f} s")


if __name__ == "__main__":
    main()
