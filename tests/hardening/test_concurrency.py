"""Concurrent use: analysts' read-only ``afterward sql`` processes in a loop while a load of many files
and then a ``build --rebuild`` write the store.

DuckDB lets one process write or many read, never both, so a reader that finds the writer at work
waits and retries (``AFTERWARD_LOCK_WAIT``) and then either answers or stops with the one-line locked
message (exit 1). What must never happen: a traceback, another kind of failure, an answer that shows
a half-loaded file or a half-built day, or a writer that fails because readers held the lock for a
moment (the writer's connect retries too)."""

from __future__ import annotations

import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from flows.load_step import load_files
from pipeline.config import load_config
from tests.hardening.harness import (
    CONFIG,
    TALLY,
    build_problems,
    cli_env,
    load_problems,
    market,
    month_files,
    open_store,
    run_bounded,
    write_govt_csv,
)

# one row: problems a reader can see (must be 0, 0) and the number of quotes (before or after the load)
CONSISTENCY = """
SELECT
  (SELECT count(*) FROM load_log l
    WHERE rows_read <> rows_accepted + rows_rejected
       OR (status = 'loaded' AND (SELECT count(*) FROM quote_version q WHERE q.load_id = l.load_id)
                                  <> rows_accepted - rows_unchanged)) AS bad_loads,
  (SELECT count(*) FROM built_day b
    WHERE (SELECT count(*) FROM forward_built f WHERE f.curve = b.curve AND f.scenario = b.scenario
             AND f.as_of = b.as_of) <> CASE b.curve WHEN 'govt' THEN 12 ELSE 6 END
       OR (SELECT count(*) FROM zero_rate_built z WHERE z.curve = b.curve AND z.scenario = b.scenario
             AND z.as_of = b.as_of) <> 5) AS bad_days,
  (SELECT count(*) FROM quotes) AS quotes
"""
PER_DAY = {"govt": (5, 12), "swap": (5, 6)}


@pytest.fixture(scope="module")
def busy_store(tmp_path_factory):
    root = tmp_path_factory.mktemp("concurrent")
    (root / "afterward.toml").write_text(CONFIG, encoding="utf-8")
    m = market("2021-01-01", "2026-12-31", seed=31)
    days, tenors, rates = m["govt"]
    write_govt_csv(root / "govt_history.csv", days, rates, tenors)
    cfg = load_config(root / "afterward.toml")
    load_files(cfg, [root / "govt_history.csv"])
    subprocess.run([sys.executable, "-m", "flows.cli", "build"], cwd=root, env=cli_env(), check=True,
                   capture_output=True, timeout=120)
    inbox = month_files(root / "inbox", "2027-01-01", "2029-12-31", seed=32)
    with open_store(root / "store.duckdb") as con:
        before = con.execute("SELECT count(*) FROM quotes").fetchone()[0]  # type: ignore[index]
    return root, inbox, int(before)


def _one_sql(root: Path, wait: float) -> tuple[int | None, str, str, float]:
    run = run_bounded("sql", CONSISTENCY, "--format", "csv", cwd=root, timeout=60,
                      env={"AFTERWARD_LOCK_WAIT": str(wait)})
    return run.returncode, run.stdout, run.stderr, run.seconds


def test_readers_during_a_long_write(busy_store):
    root, inbox, before = busy_store
    results: list[tuple[int | None, str, str, float, float]] = []
    writers: dict[str, subprocess.CompletedProcess[str]] = {}
    done = threading.Event()

    def write() -> None:
        time.sleep(1.0)     # the readers are already at it when the writer arrives
        for name, args in (("load", ["load", *map(str, inbox)]), ("build", ["build", "--rebuild"])):
            writers[name] = subprocess.run([sys.executable, "-m", "flows.cli", *args], cwd=root, env=cli_env(),
                                           capture_output=True, text=True, timeout=180)
        done.set()

    finals: list[int | None] = []

    def read(wait: float) -> None:
        while not done.is_set():
            results.append((*_one_sql(root, wait), wait))
        final = _one_sql(root, wait)                         # and once more after the writer is gone
        results.append((*final, wait))
        finals.append(final[0])

    threads = [threading.Thread(target=write)] + [threading.Thread(target=read, args=(w,)) for w in (0.2, 10.0)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=300)
    assert done.is_set(), "the writers did not finish"

    assert writers["load"].returncode == 0, writers["load"].stderr
    assert writers["build"].returncode == 0, writers["build"].stderr
    with open_store(root / "store.duckdb") as con:
        assert load_problems(con) == []
        assert build_problems(con, PER_DAY) == []
        after_load = con.execute("SELECT count(*) FROM quotes").fetchone()[0]  # type: ignore[index]
    assert after_load > before

    answered, locked = 0, 0
    for code, out, err, _seconds, _wait in results:
        TALLY.reader_queries += 1
        assert code is not None, "a reader hung"
        assert "Traceback" not in out + err
        if code == 0:
            header, row = out.splitlines()
            bad_loads, bad_days, quotes = (int(x) for x in row.split(","))
            assert (bad_loads, bad_days) == (0, 0), "a reader saw a half-written file or day"
            assert quotes in (before, after_load), f"a reader saw {quotes} quotes: neither before nor after the load"
            answered += 1
        else:
            assert code == 1, err
            lines = [x for x in err.splitlines() if x.strip()]
            assert len(lines) == 1 and "is locked by process" in lines[0] and "try again" in lines[0], err
            locked += 1
            TALLY.reader_waits += 1
    TALLY.notes.append(f"concurrent readers: {answered} answered, {locked} gave up waiting, while a load of "
                       f"{len(inbox)} files and a rebuild wrote")
    assert answered >= 2 and locked >= 1, (answered, locked)
    assert finals == [0, 0], "after the writer, readers get in"


def test_writer_waits_for_a_reader_then_runs(busy_store):
    """A read-only connection held by another process: the writer retries and runs once it is gone,
    or, if told to wait less than the reader stays, stops with the one-line locked message."""
    root, _inbox, _before = busy_store
    hold = ("import duckdb, sys, time; c = duckdb.connect('store.duckdb', read_only=True); "
            "print('ok', flush=True); time.sleep(float(sys.argv[1])); c.close()")
    for seconds, wait, expect in ((2.0, 15.0, 0), (6.0, 0.5, 1)):
        reader = subprocess.Popen([sys.executable, "-c", hold, str(seconds)], cwd=root, stdout=subprocess.PIPE,
                                  text=True)
        try:
            assert reader.stdout is not None and reader.stdout.readline().strip() == "ok"
            t0 = time.monotonic()
            run = run_bounded("build", cwd=root, timeout=120, env={"AFTERWARD_LOCK_WAIT": str(wait)})
            assert run.returncode == expect, run.stderr
            assert not run.traceback
            if expect == 0:
                assert time.monotonic() - t0 >= seconds * 0.5, "the writer cannot have run while the reader held it"
            else:
                lines = [x for x in run.stderr.splitlines() if x.strip()]
                assert len(lines) == 1 and f"locked by process {reader.pid}" in lines[0]
        finally:
            reader.wait(timeout=30)
            if reader.stdout is not None:
                reader.stdout.close()


_HOLD_RUN_LOCK = """
import sys, time
from warehouse.run_lock import run_lock
with run_lock(sys.argv[1], "run"):
    print("held", flush=True)
    time.sleep(60)
"""


def test_a_second_run_stops_at_once_naming_the_first(tmp_path):
    # issue 15: two `afterward run` at once: the second reported files it could not find and "completed", exit 0
    (tmp_path / "afterward.toml").write_text(CONFIG, encoding="utf-8")
    cfg = load_config(tmp_path / "afterward.toml")
    inbox = cfg.inbox
    inbox.mkdir(parents=True, exist_ok=True)
    m = market("2031-01-01", "2031-01-31", seed=3)
    days, tenors, rates = m["govt"]
    write_govt_csv(inbox / "govt_2031-01.csv", days, rates, tenors)
    first = subprocess.Popen([sys.executable, "-c", _HOLD_RUN_LOCK, str(cfg.store_path)], stdout=subprocess.PIPE,
                             text=True, env=cli_env())
    try:
        assert first.stdout.readline().strip() == "held"
        for command in ("run", "backfill --from 2031-01-01 --to 2031-01-31"):
            t = time.perf_counter()
            proc = subprocess.run([sys.executable, "-m", "flows.cli", *command.split()], cwd=tmp_path,
                                  env=cli_env(), capture_output=True, text=True, timeout=120)
            seconds = time.perf_counter() - t
            assert proc.returncode == 1, proc.stdout + proc.stderr
            lines = [x for x in proc.stderr.splitlines() if x.strip()]
            assert len(lines) == 1 and "Traceback" not in proc.stdout + proc.stderr, proc.stderr
            assert f"afterward run (process {first.pid} on" in lines[0] and "is already running" in lines[0]
            assert proc.stdout == ""
            # stopped before Prefect's server start-up (several seconds): at once
            assert seconds < 6, seconds
        # the inbox is untouched and nothing was loaded
        assert (inbox / "govt_2031-01.csv").exists()
        if cfg.store_path.exists():
            with open_store(cfg.store_path) as con:
                assert con.execute("SELECT count(*) FROM load_log").fetchone() == (0,)
    finally:
        first.kill()
        first.wait()
        first.stdout.close()
    # the kernel releases the lock of a killed holder: a new holder takes it at once
    from warehouse.run_lock import run_lock

    with run_lock(cfg.store_path, "run"):
        pass
