"""The daily flow keeps a contender comparison current: recomputed once a month has closed in a curve's
outcomes, not on every day, and never started on a curve nobody compared.

A daily curve (the seeded generator of the term-structure tests, weekdays, 1M .. 10Y) arrives in three
deliveries: 2010-01-04 .. 2011-01-14, then the rest of January 2011 (same month: not due), then
2011-02-01 .. 2011-02-10 (outcomes now observed in February: January has closed, due).
"""

from __future__ import annotations

import numpy as np
import pytest

from flows.compare_step import run_compare
from flows.daily import daily
from tests.e2e.stores import write_wide_csv
from tests.pipeline.term_structure.panels import synthetic_yields
from warehouse.connect import reader

pytestmark = [
    pytest.mark.timeout(300),
    pytest.mark.filterwarnings("ignore:unclosed <socket.socket:ResourceWarning"),
    pytest.mark.filterwarnings("ignore:Exception ignored in. <socket.socket:pytest.PytestUnraisableExceptionWarning"),
]

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y"]
MONTHS = np.array([1, 3, 6, 12, 24, 36, 60, 84, 120])
TOML = f"""
[store]
path = "store.duckdb"

[inbox]
path = "inbox"

[curves.day]
files = "day_*.csv"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "decimal"
interpolation = "linear_zero"
tenors = [{", ".join(f'"{t}"' for t in TENORS)}]
calendar.holidays = []
checks.jump_bp = 500
forward.starts = ["0M", "1M", "3M"]
forward.tenors = ["3M", "1Y"]
"""


def last_compared(cfg):  # noqa: ANN001, ANN201
    with reader(cfg.store_path) as con:
        rows = con.execute("SELECT computed_at, observed_through FROM compare_run WHERE curve = 'day'").fetchall()
    return rows[0] if rows else None


def test_the_daily_run_recomputes_a_compared_curve_when_a_month_closes(tmp_path) -> None:  # noqa: ANN001
    from pipeline.config import load_config

    (tmp_path / "afterward.toml").write_text(TOML, encoding="utf-8")
    cfg = load_config(tmp_path / "afterward.toml")
    cfg.inbox.mkdir(parents=True)
    span = np.arange(np.datetime64("2010-01-01"), np.datetime64("2011-02-11"))
    days = span[np.is_busday(span)]
    rates = synthetic_yields(5, days.size)[:, MONTHS - 1]
    cuts = [days <= np.datetime64("2011-01-14"),
            (days > np.datetime64("2011-01-14")) & (days < np.datetime64("2011-02-01")),
            days >= np.datetime64("2011-02-01")]

    write_wide_csv(cfg.inbox / "day_a.csv", days[cuts[0]], TENORS, rates[cuts[0]], "%.12f")
    first = daily(config_path=str(cfg.path), settle_seconds=0.01)
    assert first.compared == [] and last_compared(cfg) is None  # nobody compared it: the job does not start it
    run_compare(cfg)
    start = last_compared(cfg)
    assert str(start[1]) == "2011-01-14"

    write_wide_csv(cfg.inbox / "day_b.csv", days[cuts[1]], TENORS, rates[cuts[1]], "%.12f")
    second = daily(config_path=str(cfg.path), settle_seconds=0.01)
    assert second.files_loaded == 1 and second.compared == []  # January is still the latest month
    assert last_compared(cfg) == start

    write_wide_csv(cfg.inbox / "day_c.csv", days[cuts[2]], TENORS, rates[cuts[2]], "%.12f")
    third = daily(config_path=str(cfg.path), settle_seconds=0.01)
    assert third.compared == ["day"]
    now = last_compared(cfg)
    assert now[0] > start[0] and str(now[1]) == "2011-02-10"
    with reader(cfg.store_path) as con:
        latest = con.execute("SELECT max(observed_on) FROM contender_outcomes").fetchall()[0][0]
    assert str(latest) == "2011-02-10"
