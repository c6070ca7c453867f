"""Shared machinery of the hardening suite: an invented market, the real command line in a
subprocess under memory and time bounds, the store's invariants, and checksums of the views.

Nothing here mocks the program: files are written to disk, the real ``afterward`` runs in a fresh
interpreter, and the store is a real DuckDB file read back with plain SQL.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import textwrap
import time
from dataclasses import dataclass, field
from pathlib import Path

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from tests.conftest import REPO

MEMORY_LIMIT = 3 << 30          # bytes of address space for every afterward process the suite starts

CONFIG = textwrap.dedent(
    """
    [store]
    path = "store.duckdb"

    [curves.govt]
    files = "govt_*.csv"
    quote = "par"
    compounding = "semiannual"
    day_count = "ACT/365F"
    units = "percent"
    tenors = ["3M", "1Y", "2Y", "5Y", "10Y"]
    forward.starts = ["0M", "3M", "1Y", "2Y"]
    forward.tenors = ["3M", "1Y", "2Y"]

    [curves.swap]
    files = "swap_*.parquet"
    quote = "zero"
    compounding = "annual"
    day_count = "ACT/360"
    units = "decimal"
    tenors = ["1M", "3M", "1Y", "5Y", "10Y"]
    forward.starts = ["0M", "6M", "1Y"]
    forward.tenors = ["3M", "1Y"]
    """
)

GOVT_TENORS = ["3M", "1Y", "2Y", "5Y", "10Y"]
SWAP_TENORS = ["1M", "3M", "1Y", "5Y", "10Y"]
_YEARS = {"1M": 1 / 12, "3M": 0.25, "1Y": 1.0, "2Y": 2.0, "5Y": 5.0, "10Y": 10.0}


# --- counters for the suite's closing summary --------------------------------------------------

@dataclass
class Tally:
    """What the hardening suite tried and what it saw; printed at the end of the run."""

    crash_trials: int = 0
    faults_survived: int = 0
    bad_inputs: int = 0
    rows_checked: int = 0
    rows_lost: int = 0
    tracebacks: int = 0
    hangs: int = 0
    reader_queries: int = 0
    reader_waits: int = 0
    property_examples: int = 0
    notes: list[str] = field(default_factory=list)


TALLY = Tally()


# --- an invented market ------------------------------------------------------------------------

def business_days(first: str, last: str) -> np.ndarray:
    days = np.arange(np.datetime64(first, "D"), np.datetime64(last, "D") + 1)
    return days[np.is_busday(days)]


def market(first: str, last: str, seed: int) -> dict[str, tuple[np.ndarray, list[str], np.ndarray]]:
    """Seeded, smooth, upward-sloping curves of an invented market, in each curve's file units.

    ``govt``: par yields in percent; ``swap``: zero rates in decimals. Day-on-day moves are a few bp,
    so no row breaks a plausibility band and no day is held back by a check.
    """
    rng = np.random.default_rng(seed)
    days = business_days(first, last)
    n = len(days)
    level = 3.0 + np.cumsum(rng.normal(0.0, 0.02, n))
    level = 3.0 + (level - 3.0) * 0.4          # keep the walk inside a plausible band
    slope = 1.2 + np.cumsum(rng.normal(0.0, 0.005, n)) * 0.3

    def curve(tenors: list[str]) -> np.ndarray:
        t = np.array([_YEARS[x] for x in tenors])
        shape = 1.0 - np.exp(-t / 3.0)
        return np.round(np.clip(level[:, None] + slope[:, None] * shape[None, :], 0.25, 9.0), 4)

    return {"govt": (days, GOVT_TENORS, curve(GOVT_TENORS)),
            "swap": (days, SWAP_TENORS, np.round(curve(SWAP_TENORS) / 100.0 + 0.001, 6))}


def write_govt_csv(path: Path, days: np.ndarray, rates: np.ndarray, tenors: list[str] = GOVT_TENORS) -> Path:
    lines = ["date," + ",".join(tenors)]
    lines += [f"{d}," + ",".join(f"{v:.4f}" for v in row) for d, row in zip(days.astype(str), rates, strict=True)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def write_swap_parquet(path: Path, days: np.ndarray, rates: np.ndarray, tenors: list[str] = SWAP_TENORS) -> Path:
    d = np.repeat(days, len(tenors))
    pq.write_table(pa.table({
        "date": pa.array(d.astype("datetime64[D]"), type=pa.date32()),
        "tenor": pa.array(np.tile(np.array(tenors, dtype=object), len(days)).tolist(), type=pa.string()),
        "rate": pa.array(rates.reshape(-1)),
    }), path)
    return path


def month_files(folder: Path, first: str, last: str, seed: int) -> list[Path]:
    """govt as one CSV a month and swap as one Parquet file a quarter, in load order."""
    folder.mkdir(parents=True, exist_ok=True)
    m = market(first, last, seed)
    out: list[Path] = []
    for name in ("govt", "swap"):
        days, tenors, rates = m[name]
        step = "M" if name == "govt" else "Q"
        if step == "M":
            keys = days.astype("datetime64[M]").astype(str)
        else:
            months = days.astype("datetime64[M]").astype(int)
            keys = np.array([f"{1970 + mm // 12}-Q{(mm % 12) // 3 + 1}" for mm in months])
        for key in dict.fromkeys(keys):
            sel = keys == key
            if name == "govt":
                out.append(write_govt_csv(folder / f"govt_{key}.csv", days[sel], rates[sel], tenors))
            else:
                out.append(write_swap_parquet(folder / f"swap_{key}.parquet", days[sel], rates[sel], tenors))
    return out


# --- running the real command line -------------------------------------------------------------

def _limit_memory() -> None:  # runs in the child between fork and exec
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))


def cli_env(extra: dict[str, str] | None = None) -> dict[str, str]:
    env = {**os.environ, "PYTHONPATH": str(REPO), "PYTHONUNBUFFERED": "1", "AFTERWARD_LOCK_WAIT": "10",
           **(extra or {})}
    env.pop("AFTERWARD_CONFIG", None)
    env.pop("AFTERWARD_DEBUG", None)
    return env


def cli_command(*args: str) -> list[str]:
    return [sys.executable, "-m", "flows.cli", *args]


@dataclass
class CliRun:
    returncode: int | None      # None: it hung and was killed at the timeout
    stdout: str
    stderr: str
    seconds: float

    @property
    def hung(self) -> bool:
        return self.returncode is None

    @property
    def traceback(self) -> bool:
        return "Traceback (most recent call last)" in self.stdout + self.stderr


def run_bounded(*args: str, cwd: Path, timeout: float, env: dict[str, str] | None = None) -> CliRun:
    """``afterward ARGS`` in a fresh interpreter with at most 3 GiB of address space and ``timeout`` s."""
    t0 = time.monotonic()
    proc = subprocess.Popen(cli_command(*args), cwd=cwd, env=cli_env(env), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, encoding="utf-8", errors="replace",
                            preexec_fn=_limit_memory)
    try:
        out, err = proc.communicate(timeout=timeout)
        code: int | None = proc.returncode
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
        code = None
    return CliRun(code, out, err, time.monotonic() - t0)


@dataclass
class MeasuredRun(CliRun):
    peak_rss: int = 0           # bytes: the child's own peak resident set (its wait4 rusage), 0 if unknown


def run_measured(*args: str, cwd: Path, timeout: float, env: dict[str, str] | None = None) -> MeasuredRun:
    """:func:`run_bounded`, and the peak resident memory of that one process.

    The child is reaped with ``os.wait4``, whose rusage is the child's own (``RUSAGE_CHILDREN`` would be
    the largest of every child this test process ever had). Output goes to files, so nothing blocks
    on a full pipe while the child is polled.
    """
    import tempfile

    t0 = time.monotonic()
    with tempfile.TemporaryFile("w+", encoding="utf-8", errors="replace") as out, \
            tempfile.TemporaryFile("w+", encoding="utf-8", errors="replace") as err:
        proc = subprocess.Popen(cli_command(*args), cwd=cwd, env=cli_env(env), stdout=out, stderr=err,
                                preexec_fn=_limit_memory)
        code: int | None = None
        peak = 0
        while True:
            pid, status, usage = os.wait4(proc.pid, os.WNOHANG)
            if pid:
                code = os.waitstatus_to_exitcode(status)
                peak = usage.ru_maxrss * 1024        # kilobytes on Linux
                break
            if time.monotonic() - t0 > timeout:
                proc.kill()
                _pid, _status, usage = os.wait4(proc.pid, 0)
                peak = usage.ru_maxrss * 1024
                break
            time.sleep(0.02)
        proc.returncode = code if code is not None else -9     # reaped here: Popen must not wait again
        out.seek(0)
        err.seek(0)
        return MeasuredRun(code, out.read(), err.read(), time.monotonic() - t0, peak)


def spawn(*args: str, cwd: Path, env: dict[str, str] | None = None) -> subprocess.Popen[str]:
    """``afterward ARGS`` started in the background (stdout line-buffered for the kill harness)."""
    return subprocess.Popen(cli_command(*args), cwd=cwd, env=cli_env(env), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, encoding="utf-8", errors="replace",
                            preexec_fn=_limit_memory)


# --- reading the store back --------------------------------------------------------------------

def open_store(path: Path) -> duckdb.DuckDBPyConnection:
    return duckdb.connect(str(path), read_only=True)


# per view: the columns that must agree between an interrupted-and-resumed run and an uninterrupted
# one (timestamps and load ids legitimately differ and are left out)
DIGEST_COLUMNS = {
    "quotes": "curve, as_of, tenor, maturity_date, rate, source_file",
    "quote_history": "curve, as_of, tenor, maturity_date, rate, source_file, superseded_at IS NULL",
    "loads": "source_file, sha256, rows_read, rows_accepted, rows_revised, rows_rejected, status",
    "rejected_rows": "source_file, line, raw, reason",
    "findings": "curve, as_of, check_name, severity, tenor, detail",
    "zero_rates": "curve, as_of, tenor, maturity_date, year_fraction, zero_rate, zero_rate_cc, discount_factor",
    "forwards": "curve, as_of, start_months, tenor_months, start_date, end_date, forward_rate, forward_rate_cc",
    "built_day": "curve, scenario, as_of, method, code_version, quotes_as_of",
}
LOAD_VIEWS = ("quotes", "quote_history", "loads", "rejected_rows", "findings")
BUILD_VIEWS = ("zero_rates", "forwards", "built_day", "findings")


# a refused file is logged once per attempt (by design: every attempt is evidence), so a rerun after a
# kill may log the same refusal twice; these views are compared as sets of distinct rows
DISTINCT_VIEWS = ("loads", "rejected_rows")


def view_digest(con: duckdb.DuckDBPyConnection, view: str) -> tuple[int, str]:
    """(row count, md5 of every row's text in sorted order) over the view's stable columns."""
    cols = DIGEST_COLUMNS[view]
    text = ", ".join(f"coalesce(CAST({c} AS VARCHAR), chr(0))" for c in cols.split(", "))
    distinct = "DISTINCT " if view in DISTINCT_VIEWS else ""
    row = con.execute(
        f"SELECT count(*), md5(coalesce(string_agg(t, chr(10) ORDER BY t), '')) "
        f"FROM (SELECT {distinct}concat_ws('|', {text}) AS t FROM {view})"
    ).fetchone()
    assert row is not None
    return int(row[0]), str(row[1])


def digests(path: Path, views: tuple[str, ...]) -> dict[str, tuple[int, str]]:
    with open_store(path) as con:
        return {v: view_digest(con, v) for v in views}


def load_problems(con: duckdb.DuckDBPyConnection, reference: dict[str, tuple] | None = None) -> list[str]:
    """Every way the store's loads could be inconsistent; an empty list when all is well.

    ``reference``: per sha256, (rows_read, rows_accepted, rows_revised, rows_rejected, status, versions)
    from an uninterrupted run, so a file in the store must be there exactly as a clean load put it.
    """
    problems: list[str] = []
    bad = con.execute("""
        SELECT l.load_id, l.file_name, l.status, l.rows_read, l.rows_accepted, l.rows_unchanged, l.rows_rejected,
               (SELECT count(*) FROM quote_version q WHERE q.load_id = l.load_id) AS versions,
               (SELECT count(*) FROM rejected_row r WHERE r.load_id = l.load_id) AS rejects,
               (SELECT count(*) FROM rejected_row r WHERE r.load_id = l.load_id AND r.line = 0) AS whole
        FROM load_log l
        WHERE rows_read <> rows_accepted + rows_rejected
           OR (status = 'loaded' AND ((SELECT count(*) FROM quote_version q WHERE q.load_id = l.load_id)
                                       <> rows_accepted - rows_unchanged
                                      OR (SELECT count(*) FROM rejected_row r WHERE r.load_id = l.load_id)
                                       <> rows_rejected))
           OR (status = 'refused' AND ((SELECT count(*) FROM quote_version q WHERE q.load_id = l.load_id) <> 0
                                       OR (SELECT count(*) FROM rejected_row r WHERE r.load_id = l.load_id
                                           AND r.line = 0) <> 1))
           OR status NOT IN ('loaded', 'refused')
    """).fetchall()
    problems += [f"load {r[0]} ({r[1]}): counts disagree with its rows {r[2:]}" for r in bad]
    for table in ("quote_version", "rejected_row", "finding"):
        (n,) = con.execute(f"SELECT count(*) FROM {table} t WHERE t.load_id IS NOT NULL AND NOT EXISTS "
                           "(SELECT 1 FROM load_log l WHERE l.load_id = t.load_id)").fetchone()  # type: ignore[misc]
        if n:
            problems.append(f"{n} {table} rows belong to no load in load_log (a half-recorded file)")
    (n,) = con.execute("SELECT count(*) FROM (SELECT curve, as_of, tenor FROM quote_version "
                       "WHERE superseded_at IS NULL GROUP BY ALL HAVING count(*) > 1)").fetchone()  # type: ignore[misc]
    if n:
        problems.append(f"{n} quotes have more than one current version")
    (n,) = con.execute("SELECT count(*) FROM (SELECT sha256 FROM load_log WHERE status = 'loaded' "
                       "GROUP BY sha256 HAVING count(*) > 1)").fetchone()  # type: ignore[misc]
    if n:
        problems.append(f"{n} files were loaded twice")
    if reference is not None:
        rows = con.execute("""
            SELECT l.sha256, l.file_name, l.rows_read, l.rows_accepted, l.rows_revised, l.rows_rejected, l.status,
                   (SELECT count(*) FROM quote_version q WHERE q.load_id = l.load_id)
            FROM load_log l""").fetchall()
        for sha, name, *counts in rows:
            want = reference.get(sha)
            if want is None:
                problems.append(f"{name}: in the store but not in the uninterrupted run")
            elif tuple(counts) != tuple(want):
                problems.append(f"{name}: recorded as {tuple(counts)}, an uninterrupted load gives {tuple(want)}")
    return problems


def load_reference(con: duckdb.DuckDBPyConnection) -> dict[str, tuple]:
    rows = con.execute("""
        SELECT l.sha256, l.rows_read, l.rows_accepted, l.rows_revised, l.rows_rejected, l.status,
               (SELECT count(*) FROM quote_version q WHERE q.load_id = l.load_id)
        FROM load_log l""").fetchall()
    return {r[0]: tuple(r[1:]) for r in rows}


def day_digests(con: duckdb.DuckDBPyConnection) -> dict[tuple[str, str, str], str]:
    """Per built (curve, scenario, as_of): md5 of its zero and forward rows (the day's whole build)."""
    rows = con.execute("""
        WITH z AS (SELECT curve, scenario, as_of, string_agg(concat_ws('|', tenor, zero_rate, discount_factor,
                          maturity_date), ';' ORDER BY tenor) AS zt FROM zero_rate_built GROUP BY ALL),
             f AS (SELECT curve, scenario, as_of, string_agg(concat_ws('|', start_months, tenor_months, forward_rate,
                          end_date), ';' ORDER BY start_months, tenor_months) AS ft FROM forward_built GROUP BY ALL)
        SELECT b.curve, b.scenario, CAST(b.as_of AS VARCHAR), md5(coalesce(z.zt, '') || '#' || coalesce(f.ft, ''))
        FROM built_day b LEFT JOIN z USING (curve, scenario, as_of) LEFT JOIN f USING (curve, scenario, as_of)
    """).fetchall()
    return {(c, s, d): h for c, s, d, h in rows}


def build_problems(con: duckdb.DuckDBPyConnection, per_day: dict[str, tuple[int, int]],
                   reference: dict[tuple[str, str, str], str] | None = None) -> list[str]:
    """Every way a day could be half built; ``per_day[curve]`` = (zero rows, forward rows) of a whole day."""
    problems: list[str] = []
    counts = con.execute("""
        SELECT b.curve, b.scenario, b.as_of,
               (SELECT count(*) FROM zero_rate_built z WHERE z.curve = b.curve AND z.scenario = b.scenario
                  AND z.as_of = b.as_of),
               (SELECT count(*) FROM forward_built f WHERE f.curve = b.curve AND f.scenario = b.scenario
                  AND f.as_of = b.as_of)
        FROM built_day b""").fetchall()
    wrong = [(c, s, str(d), nz, nf) for c, s, d, nz, nf in counts if (nz, nf) != per_day[c]]
    if wrong:
        problems.append(f"{len(wrong)} built days do not have all their rows, e.g. {wrong[:3]}")
    for table in ("zero_rate_built", "forward_built"):
        (n,) = con.execute(f"SELECT count(*) FROM {table} t WHERE NOT EXISTS (SELECT 1 FROM built_day b "
                           "WHERE b.curve = t.curve AND b.scenario = t.scenario AND b.as_of = t.as_of)"
                           ).fetchone()  # type: ignore[misc]
        if n:
            problems.append(f"{n} {table} rows belong to no built day (a half-built day)")
    (n,) = con.execute("SELECT count(*) FROM (SELECT curve, scenario, as_of FROM built_day GROUP BY ALL "
                       "HAVING count(*) > 1)").fetchone()  # type: ignore[misc]
    if n:
        problems.append(f"{n} days are built twice")
    if reference is not None:
        mine = day_digests(con)
        differ = [k for k, h in mine.items() if reference.get(k) != h]
        if differ:
            problems.append(f"{len(differ)} built days differ from an uninterrupted build, e.g. {differ[:3]}")
    return problems
