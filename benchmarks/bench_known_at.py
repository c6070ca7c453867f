"""Benchmark: an as-known-at audit against a full rebuild, realisation and audit of the same store.

    .venv/bin/python benchmarks/bench_known_at.py [--repeat 3] [--years 30]

Set-up (not timed): the invented demo market (two curves, 30 years, the demo's forward grid) loaded,
checked, built, realised and audited through the real steps, then a stamp T taken, then one more month
of files loaded after it (so the archive at T is not simply the current one).

Timed, medians of ``--repeat`` runs, alternating (A B A B ...) on the same machine:

* **full**: on a fresh copy of the store, ``run_build(rebuild=True)``, ``run_realize(full=True)`` and
  ``run_audit``: everything derived recomputed;
* **as known at T**: :func:`flows.known_at_step.known_at` with the audit (copy the archive as it stood
  at T into a scratch store, rebuild, realise, audit) on the same store.

Target: as-known-at at most 3x the full pass. Prints one table, seconds and the ratio.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import sys
import tempfile
import time
from datetime import UTC, datetime
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))


def make_store(root: Path, years: int):  # noqa: ANN201
    from flows.audit_step import run_audit
    from flows.build_step import run_build
    from flows.check_step import run_checks
    from flows.load_step import load_files
    from flows.realize_step import run_realize
    from pipeline.config import load_config
    from pipeline.demo import demo_config_toml, write_demo_inbox

    root.mkdir(parents=True, exist_ok=True)
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    manifest = write_demo_inbox(cfg.inbox)
    files = sorted(manifest.files, key=lambda p: p.name)

    def month(p: Path) -> str:  # demo files are named CURVE_YYYY-MM.ext; a few odd ones carry no month
        part = p.stem.split("_", 1)[-1]
        return part[:7] if part[:4].isdigit() else ""

    months = sorted({month(p) for p in files} - {""})
    first = months[max(0, len(months) - 12 * years)]
    files = [p for p in files if month(p) >= first or month(p) == ""]
    tail = [p for p in files if month(p) == months[-1]]
    head = [p for p in files if p not in tail]
    load_files(cfg, head)
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)
    run_audit(cfg)
    time.sleep(0.01)
    stamp = datetime.now(UTC).replace(tzinfo=None)
    time.sleep(0.01)
    load_files(cfg, tail)
    run_checks(cfg)
    return cfg, stamp


def full_pass(cfg, scratch: Path) -> float:  # noqa: ANN001
    import dataclasses

    from flows.audit_step import run_audit
    from flows.build_step import run_build
    from flows.realize_step import run_realize

    scratch.mkdir(parents=True, exist_ok=True)
    shutil.copy2(cfg.store_path, scratch / "copy.duckdb")
    c = dataclasses.replace(cfg, store_path=scratch / "copy.duckdb")
    t = time.perf_counter()
    run_build(c, rebuild=True)
    run_realize(c, full=True)
    run_audit(c)
    return time.perf_counter() - t


def known_at_pass(cfg, stamp) -> float:  # noqa: ANN001
    from flows.known_at_step import known_at

    t = time.perf_counter()
    with known_at(cfg, stamp, audit=True):
        elapsed = time.perf_counter() - t
    return elapsed


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--years", type=int, default=30)
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        t = time.perf_counter()
        cfg, stamp = make_store(root / "store", a.years)
        print(f"set-up: a {a.years}-year demo store in {time.perf_counter() - t:.0f} s", flush=True)
        full, known = [], []
        for r in range(a.repeat):
            full.append(full_pass(cfg, root / f"full-{r}"))
            known.append(known_at_pass(cfg, stamp))
        f, k = statistics.median(full), statistics.median(known)
        print(f"{'years':>6} {'full rebuild+realise+audit (s)':>31} {'as known at (s)':>16} {'ratio':>7} {'target':>7}")
        print(f"{a.years:>6} {f:>31.2f} {k:>16.2f} {k / f:>7.2f} {'<= 3':>7}")


if __name__ == "__main__":
    main()
