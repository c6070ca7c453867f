"""Crash safety: ``afterward load`` and ``afterward build`` killed with SIGKILL at seeded random moments.

After every kill the store must hold each file wholly or not at all (its log row, its quote versions,
its rejected rows and findings together), no day may be half built (a built day has all its zero and
forward rows, and no such row exists without its day), and a rerun must finish the work with exactly
the contents an uninterrupted run gives (checksums of the views, timestamps and load ids left out).

Trials run two at a time (one per core), each on its own copy of the store; the reruns and checks run
afterwards in this process through the same steps the commands call.
"""

from __future__ import annotations

import random
import shutil
import signal
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from flows.build_step import run_build
from flows.load_step import load_files
from pipeline.config import load_config
from tests.hardening.harness import (
    BUILD_VIEWS,
    CONFIG,
    LOAD_VIEWS,
    TALLY,
    build_problems,
    day_digests,
    digests,
    load_problems,
    load_reference,
    market,
    month_files,
    open_store,
    spawn,
    write_govt_csv,
    write_swap_parquet,
)

LOAD_TRIALS = 22
BUILD_TRIALS = 24
SEED = 20310815


@dataclass
class Trial:
    index: int
    folder: Path
    mode: str
    delay: float = 0.0
    returncode: int | None = None
    printed: tuple[str, ...] = ()
    started: float = 0.0


def _project(folder: Path, store: Path | None) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "afterward.toml").write_text(CONFIG, encoding="utf-8")
    if store is not None:
        shutil.copyfile(store, folder / "store.duckdb")
    return folder


def _wait_for_wal(proc, store: Path) -> None:  # noqa: ANN001
    """Until the store's write-ahead log appears (the first commit is being written) or the process ends."""
    wal = store.with_name(store.name + ".wal")
    while proc.poll() is None and not wal.exists():
        time.sleep(0.002)


def _kill_at(trial: Trial, args: list[str], trigger: str) -> Trial:
    """Start ``afterward ARGS``; SIGKILL it ``trial.delay`` s after ``trigger``: its start (``start``),
    its first line of output (``first_line``) or the first write to the store's log (``wal``)."""
    trial.started = time.time()
    proc = spawn(*args, cwd=trial.folder)
    assert proc.stdout is not None and proc.stderr is not None
    lines: list[str] = []
    if trigger == "first_line":
        first = proc.stdout.readline()
        if first:
            lines.append(first.rstrip("\n"))
    elif trigger == "wal":
        _wait_for_wal(proc, trial.folder / "store.duckdb")
    time.sleep(trial.delay)
    if proc.poll() is None:
        proc.send_signal(signal.SIGKILL)
    proc.wait()
    lines += proc.stdout.read().splitlines()
    proc.stdout.close()
    proc.stderr.close()
    trial.returncode = proc.returncode
    trial.printed = tuple(lines)
    return trial


def _run_pairs(trials: list[Trial], start, width: int = 2) -> list[Trial]:  # noqa: ANN001
    with ThreadPoolExecutor(max_workers=width) as pool:
        return list(pool.map(start, trials))


# --- load -------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def load_setup(tmp_path_factory):
    """An inbox of 39 files (months of govt CSV, quarters of swap Parquet, a restatement, a file with
    bad rows, an unreadable one) and a store that already holds the first two files."""
    root = tmp_path_factory.mktemp("crash-load")
    inbox = root / "inbox"
    files = month_files(inbox, "2027-10-01", "2029-12-31", seed=11)
    m = market("2028-03-01", "2028-03-10", seed=12)
    days, tenors, rates = m["govt"]
    files.append(write_govt_csv(inbox / "govt_restated.csv", days, rates + 0.01, tenors))
    (inbox / "govt_bad_rows.csv").write_text(
        "date,3M,1Y,2Y,5Y,10Y\n2029-12-31,4.1,4.2,,4.5,4.8\n2029-12-3x,4,4,4,4,4\n2030-01-02,4.1,abc,4.3,1e999,4.8\n",
        encoding="utf-8")
    files.append(inbox / "govt_bad_rows.csv")
    (inbox / "govt_binary.csv").write_bytes(bytes(range(256)) * 8)
    files.append(inbox / "govt_binary.csv")
    base = _project(root / "base", None)
    load_files(load_config(base / "afterward.toml"), files[:2])
    return root, files, base / "store.duckdb"


def test_sigkill_during_load(load_setup):
    root, files, base_store = load_setup
    args = ["load", *[str(f) for f in files]]
    # two uninterrupted runs side by side: the reference, the timings under the trials' own load, and
    # a check that two clean runs agree with each other (else the checksums could not be compared)
    refs = [Trial(-1 - k, _project(root / f"ref{k}", base_store), "uninterrupted", delay=600) for k in range(2)]
    timing: dict[str, float] = {}

    def clean(t: Trial) -> Trial:
        t0 = time.monotonic()
        proc = spawn(*args, cwd=t.folder)
        assert proc.stdout is not None
        lines = []
        for line in proc.stdout:
            lines.append(line.rstrip("\n"))
            timing.setdefault("first", time.monotonic() - t0)
            if len(lines) == len(files):
                timing.setdefault("last", time.monotonic() - t0)
        proc.wait()
        timing.setdefault("total", time.monotonic() - t0)
        t.returncode, t.printed = proc.returncode, tuple(lines)
        proc.stdout.close()
        assert proc.stderr is not None
        proc.stderr.close()
        return t

    _run_pairs(refs, clean)
    assert all(t.returncode == 1 for t in refs), "the bad files make a clean load exit 1"
    ref_digest = digests(refs[0].folder / "store.duckdb", LOAD_VIEWS)
    assert digests(refs[1].folder / "store.duckdb", LOAD_VIEWS) == ref_digest
    with open_store(refs[0].folder / "store.duckdb") as con:
        reference = load_reference(con)
        assert load_problems(con) == []
        n_loaded = con.execute("SELECT count(*) FROM load_log").fetchone()[0]  # type: ignore[index]
    assert n_loaded == len(files), "every file, good or bad, has its log row"
    first, recording = timing["first"], timing["last"] - timing["first"]
    closing = timing["total"] - timing["last"]

    rng = random.Random(SEED)
    trials = []
    for i in range(LOAD_TRIALS):
        # most kills land while files are being recorded (timed from the first file's line); some while
        # the program starts, reads and validates; some after the last file, while the store is closed
        mode = {0: "starting", 1: "closing"}.get(i % 5, "recording")
        delay = {"starting": lambda: rng.uniform(0.2, first),
                 "recording": lambda: rng.uniform(0.0, recording * 1.1),
                 "closing": lambda: recording + rng.uniform(0.0, closing * 0.9)}[mode]()
        trials.append(Trial(i, _project(root / f"trial{i:02d}", base_store), mode, delay))
    t_kill = time.monotonic()
    _run_pairs(trials, lambda t: _kill_at(t, args, "start" if t.mode == "starting" else "first_line"))
    t_check = time.monotonic()

    progress = []
    for t in trials:
        store = t.folder / "store.duckdb"
        with open_store(store) as con:
            problems = load_problems(con, reference)
            names = [r[0] for r in con.execute("SELECT file_name FROM load_log ORDER BY load_id").fetchall()]
        # files are recorded in order: what is in the store is a prefix of the list, nothing skipped
        expected = [f.name for f in files[:len(names)]]
        if names != expected:
            problems.append(f"the files in the store are not the first {len(names)} of the list: {names[-3:]}")
        # a file the command reported as loaded was committed before the report
        for line in t.printed:
            name = line.split(":", 1)[0]
            if ("accepted" in line or "refused" in line) and name not in names:
                problems.append(f"{name} was reported loaded but is not in the store")
        cfg = load_config(t.folder / "afterward.toml")
        load_files(cfg, files)                       # the rerun
        with open_store(store) as con:
            problems += load_problems(con, reference)
        after = digests(store, LOAD_VIEWS)
        problems += [f"after the rerun {v} differs: {after[v]} vs {ref_digest[v]}" for v in LOAD_VIEWS
                     if after[v] != ref_digest[v]]
        TALLY.rows_checked += after["quote_history"][0] + after["rejected_rows"][0]
        TALLY.rows_lost += sum(abs(ref_digest[v][0] - after[v][0]) for v in ("quote_history", "rejected_rows"))
        TALLY.crash_trials += 1
        killed = t.returncode == -signal.SIGKILL
        if killed and not problems:
            TALLY.faults_survived += 1
        progress.append((t.mode, round(t.delay, 2), t.returncode, len(names)))
        assert problems == [], f"load trial {t.index} ({t.mode}, kill after {t.delay:.2f} s): {problems}"

    killed = [p for p in progress if p[2] == -signal.SIGKILL]
    mid_way = [p for p in killed if 2 < p[3] < len(files)]
    TALLY.notes.append(f"load kills: {len(killed)} of {len(progress)} trials killed, {len(mid_way)} part-way "
                       f"through the files ({t_check - t_kill:.0f} s of kills, {time.monotonic() - t_check:.0f} s "
                       "of checks and reruns)")
    assert len(killed) >= 20, progress
    assert len(mid_way) >= 5, f"too few kills landed while files were being recorded: {progress}"


# --- build ------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def build_setup(tmp_path_factory):
    """A store with ten and a half years of govt quotes (two build chunks of days) and one of swap, unbuilt."""
    root = tmp_path_factory.mktemp("crash-build")
    m = market("2015-01-01", "2025-06-30", seed=21)
    days, tenors, rates = m["govt"]
    write_govt_csv(root / "govt_all.csv", days, rates, tenors)
    days, tenors, rates = m["swap"]
    sel = days >= np.datetime64("2024-07-01")
    write_swap_parquet(root / "swap_all.parquet", days[sel], rates[sel], tenors)
    unbuilt = _project(root / "unbuilt", None)
    load_files(load_config(unbuilt / "afterward.toml"), [root / "govt_all.csv", root / "swap_all.parquet"])
    return root, unbuilt / "store.duckdb"


def _whole_day(cfg) -> dict[str, tuple[int, int]]:  # noqa: ANN001
    """Zero and forward rows a built day has by the config alone: the union of quoted and forward tenors,
    and one forward per (start, tenor) pair."""
    return {name: (len({t.label for t in c.tenors} | {t.label for t in c.forward_tenors}),
                   len(c.forward_starts) * len(c.forward_tenors)) for name, c in cfg.curves.items()}


def test_sigkill_during_build(build_setup):
    root, unbuilt = build_setup
    timing: dict[str, float] = {}

    def clean(t: Trial) -> Trial:
        t0 = time.monotonic()
        proc = spawn(*(["build", "--rebuild"] if t.mode == "rebuild" else ["build"]), cwd=t.folder)
        _wait_for_wal(proc, t.folder / "store.duckdb")
        t_wal = time.monotonic()
        out, _err = proc.communicate()
        timing.setdefault(t.mode, time.monotonic() - t0)
        timing.setdefault(f"{t.mode}-writing", time.monotonic() - t_wal)
        t.returncode, t.printed = proc.returncode, tuple(out.splitlines())
        return t

    refs = _run_pairs([Trial(-1, _project(root / "ref0", unbuilt), "fresh"),
                       Trial(-2, _project(root / "ref1", unbuilt), "fresh")], clean)
    assert [t.returncode for t in refs] == [0, 0], [t.printed for t in refs]
    built = refs[0].folder / "store.duckdb"
    ref_digest = digests(built, BUILD_VIEWS)
    assert digests(refs[1].folder / "store.duckdb", BUILD_VIEWS) == ref_digest
    cfg0 = load_config(refs[0].folder / "afterward.toml")
    per_day = _whole_day(cfg0)
    with open_store(built) as con:
        ref_days = day_digests(con)
        assert build_problems(con, per_day) == []
        n_days = con.execute("SELECT count(*) FROM built_day").fetchone()[0]  # type: ignore[index]
        quoted_days = con.execute("SELECT count(DISTINCT (curve, as_of)) FROM quotes").fetchone()[0]  # type: ignore[index]
    assert n_days == quoted_days, "every quoted day of this clean market is built"
    _run_pairs([Trial(-3, _project(root / "ref2", built), "rebuild")], clean)

    rng = random.Random(SEED + 1)
    trials = []
    triggers = {}
    for i in range(BUILD_TRIALS):
        mode = "rebuild" if i % 2 else "fresh"
        # the chunks of days are computed fast and written within a fraction of a second, so most kills
        # are timed from the first write to the store's log; a third anywhere in the run
        # (the window after the first write also holds the checkpoint and the exit, hence 0.6 of it)
        if i % 3:
            triggers[i], delay = "wal", rng.uniform(0.0, timing[f"{mode}-writing"] * 0.6)
        else:
            triggers[i], delay = "start", rng.uniform(0.3, timing[mode] * 0.8)
        trials.append(Trial(i, _project(root / f"trial{i:02d}", built if mode == "rebuild" else unbuilt), mode, delay))

    def start(t: Trial) -> Trial:
        return _kill_at(t, ["build", "--rebuild"] if t.mode == "rebuild" else ["build"], triggers[t.index])

    t_kill = time.monotonic()
    _run_pairs(trials, start)
    t_check = time.monotonic()
    progress = []
    for t in trials:
        store = t.folder / "store.duckdb"
        with open_store(store) as con:
            problems = build_problems(con, per_day, ref_days)
            done = con.execute("SELECT count(*) FROM built_day WHERE epoch(built_at) >= ?",
                               [t.started - 1.0]).fetchone()[0]  # type: ignore[index]
        run_build(load_config(t.folder / "afterward.toml"))            # the rerun: build what is not built
        with open_store(store) as con:
            problems += build_problems(con, per_day)
        after = digests(store, BUILD_VIEWS)
        problems += [f"after the rerun {v} differs: {after[v]} vs {ref_digest[v]}" for v in BUILD_VIEWS
                     if after[v] != ref_digest[v]]
        TALLY.rows_checked += after["zero_rates"][0] + after["forwards"][0]
        TALLY.rows_lost += sum(abs(ref_digest[v][0] - after[v][0]) for v in ("zero_rates", "forwards"))
        TALLY.crash_trials += 1
        if t.returncode == -signal.SIGKILL and not problems:
            TALLY.faults_survived += 1
        progress.append((t.mode, round(t.delay, 2), t.returncode, int(done)))
        assert problems == [], f"build trial {t.index} ({t.mode}, kill after {t.delay:.2f} s): {problems}"

    killed = [p for p in progress if p[2] == -signal.SIGKILL]
    mid_way = [p for p in killed if 0 < p[3] < n_days]
    TALLY.notes.append(f"build kills: {len(killed)} of {len(progress)} trials killed, {len(mid_way)} with some "
                       f"but not all chunks of days committed ({t_check - t_kill:.0f} s of kills, "
                       f"{time.monotonic() - t_check:.0f} s of checks and reruns)")
    assert len(killed) >= 20, progress
    assert mid_way, f"no kill landed between two committed chunks: {progress}"
