"""Curve-level checks through the store on small hand-made files.

Reference: the files are written with a known list of absent business days (chosen by hand around
configured holidays and weekends); the store must report exactly those, with their gap lengths.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from flows.check_step import CONTEXT_DAYS, run_checks
from flows.load_step import load_files
from tests.e2e.stores import make_project, write_wide_csv

HOLIDAYS = ["2031-12-25", "2031-12-26", "2032-01-01"]  # Thursday, Friday, Thursday
# absent on purpose, with the length of the gap each belongs to in business days: the Wednesday
# before Christmas (the holidays and the weekend after it are not missing: a gap of 1); the days
# either side of New Year's Day (one gap of 2: the holiday between them does not count); a Wednesday
MISSING = {"2031-12-24": 1, "2031-12-31": 2, "2032-01-02": 2, "2032-01-07": 1}
TOML = f"""
[store]
path = "store.duckdb"

[curves.mm]
files = "mm_*.csv"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "percent"
interpolation = "linear_zero"
tenors = ["1M", "3M", "1Y"]
calendar.weekend = ["Sat", "Sun"]
calendar.holidays = [{", ".join(f'"{h}"' for h in HOLIDAYS)}]
forward.starts = ["0M"]
forward.tenors = ["1M"]
"""


def _observed() -> np.ndarray:
    """Weekdays 15 Dec 2031 - 16 Jan 2032 without the holidays and without MISSING (by hand)."""
    span = np.arange(np.datetime64("2031-12-15"), np.datetime64("2032-01-17"))
    weekday = span.astype("datetime64[D]").view("int64") % 7  # 1970-01-01 was a Thursday: 2, 3 = Sat, Sun
    keep = (weekday != 2) & (weekday != 3)
    keep &= ~np.isin(span, np.array(HOLIDAYS, dtype="datetime64[D]"))
    keep &= ~np.isin(span, np.array(list(MISSING), dtype="datetime64[D]"))
    return span[keep]


@pytest.mark.parametrize("split", [False, True], ids=["one-file", "two-files-checked-between"])
def test_missing_business_days_around_holidays_are_exactly_those_absent(tmp_path, split):
    p = make_project(tmp_path / "mm", TOML)
    days = _observed()
    k = np.arange(days.size)[:, None]
    rates = 3.0 + 0.01 * k + np.array([[0.0, 0.1, 0.3]])  # moves a little every day: not stale
    if split:
        dec = days < np.datetime64("2032-01-01")
        write_wide_csv(p.root / "mm_2031-12.csv", days[dec], ["1M", "3M", "1Y"], rates[dec], "%.4f")
        write_wide_csv(p.root / "mm_2032-01.csv", days[~dec], ["1M", "3M", "1Y"], rates[~dec], "%.4f")
        load_files(p.cfg, [p.root / "mm_2031-12.csv"])
        run_checks(p.cfg)
        load_files(p.cfg, [p.root / "mm_2032-01.csv"])
        run_checks(p.cfg)  # incremental: only the new days, with the earlier ones as context
    else:
        write_wide_csv(p.root / "mm_all.csv", days, ["1M", "3M", "1Y"], rates, "%.4f")
        load_files(p.cfg, [p.root / "mm_all.csv"])
        run_checks(p.cfg)
    f = p.sql("SELECT as_of, detail, severity FROM findings WHERE check_name = 'missing_day' ORDER BY as_of")
    assert [str(d) for d in f["as_of"]] == list(MISSING)
    for day, detail in zip(f["as_of"], f["detail"], strict=True):
        n = MISSING[str(day)]
        assert f"gap of {n} business day" in detail, detail
    assert set(f["severity"]) == {"warn"}
    # nothing else fires on these clean, gently moving quotes
    assert set(p.sql("SELECT check_name FROM findings")["check_name"]) == {"missing_day"}


def test_check_is_incremental_and_all_days_rechecks(tmp_path):
    p = make_project(tmp_path / "mm", TOML)
    days = _observed()
    rates = 3.0 + 0.01 * np.arange(days.size)[:, None] + np.array([[0.0, 0.1, 0.3]])
    write_wide_csv(p.root / "mm_all.csv", days, ["1M", "3M", "1Y"], rates, "%.4f")
    load_files(p.cfg, [p.root / "mm_all.csv"])
    first = run_checks(p.cfg)
    assert first.curves["mm"]["days_checked"] == days.size
    assert run_checks(p.cfg).curves["mm"]["days_checked"] == 0  # nothing new
    again = run_checks(p.cfg, all_days=True)
    assert again.curves["mm"]["days_checked"] == days.size
    # re-checking closes the old findings and raises them afresh: still exactly one open per day
    f = p.sql("SELECT as_of, count(*) AS n FROM findings WHERE check_name = 'missing_day' GROUP BY as_of")
    assert len(f) == len(MISSING) and (f["n"] == 1).all()
    closed = p.value("SELECT count(*) FROM finding WHERE resolution = 're-checked'")
    assert closed == len(MISSING)
    assert p.value("SELECT min(as_of) FROM findings") == dt.date(2031, 12, 24)


INVERSION_TOML = TOML.replace('tenors = ["1M", "3M", "1Y"]', 'tenors = ["1M", "3M", "1Y"]\n'
                              'checks.inversion_pairs = [["3M", "1Y"], ["1M", "1Y"]]')


def _record(p):
    findings = p.sql("SELECT as_of, check_name, severity, tenor, detail FROM findings ORDER BY ALL")
    episodes = p.sql("SELECT short_tenor, long_tenor, first_day, last_day, days, deepest_bp FROM inversion_episodes "
                     "ORDER BY ALL")
    return findings, episodes


def test_incremental_checks_equal_a_full_recheck_day_by_day(tmp_path):
    """Two years of weekdays arriving a month at a time, then single days: inversion episodes that run across
    the incremental check's context boundary (long ones, with missing 1Y quotes that do not break a run), jumps
    and gaps. After every arrival the incrementally checked store must hold the same open findings and the same
    episodes as a copy re-checked in full (``all_days``): the full pass reads every day, so it is the reference."""
    import pandas as pd

    days = np.arange(np.datetime64("2030-01-01"), np.datetime64("2032-01-01"))
    days = days[np.is_busday(days)]
    rng = np.random.default_rng(7)
    n = days.size
    level = 3.0 + np.cumsum(rng.normal(0, 0.01, n))
    slope = np.where((np.arange(n) % 520) < 150, 0.3, -0.2)       # inverted stretches longer than the context
    rates = np.column_stack([level, level + 0.05, level + slope])
    rates[rng.random(n) < 0.05, 2] = np.nan                          # a missing 1Y does not break a run
    rates[[40, 300, 455], 0] += 1.2                                  # jumps
    keep = rng.random(n) > 0.02                                      # missing days
    days, rates = days[keep], rates[keep]
    inc = make_project(tmp_path / "inc", INVERSION_TOML)
    ref = make_project(tmp_path / "ref", INVERSION_TOML)
    months = days.astype("datetime64[M]")
    tail = np.flatnonzero(months == months[-1])[-8:]
    batches = [(months == m) & (np.arange(days.size) < tail[0]) for m in np.unique(months)]
    batches += [np.arange(days.size) == i for i in tail]
    for k, sel in enumerate(batches):
        for proj in (inc, ref):
            f = write_wide_csv(proj.root / f"mm_{k:03d}.csv", days[sel], ["1M", "3M", "1Y"], rates[sel], "%.4f")
            load_files(proj.cfg, [f])
        run_checks(inc.cfg)
        run_checks(ref.cfg, all_days=True)
        (fi, ei), (fr, er) = _record(inc), _record(ref)
        pd.testing.assert_frame_equal(fi, fr, obj=f"findings after batch {k}")
        pd.testing.assert_frame_equal(ei, er, obj=f"episodes after batch {k}")
    # the episodes did run across the context of an incremental check (300 observed days)
    assert len(er) >= 2 and (er["days"] > CONTEXT_DAYS).any()
