"""The daily flow refreshes the term-structure estimate when a month closes, and not before.

A daily curve (continuous zero rates at 1M .. 10Y, weekdays, from the seeded generator the pure tests
use) arrives in three deliveries: whole months to 2012-12, then 2013-01-02 .. 2013-01-15 (the month
still open), then the rest of January (closing it: its last business day is 2013-01-31). The month
ends the model should stand on are the last weekday of each month (the curve's calendar has no
holidays), counted here with numpy's business-day calendar, not the project's.
"""

from __future__ import annotations

import numpy as np
import pytest

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
model.factors = 3
"""


def estimate(cfg):  # noqa: ANN001, ANN201
    with reader(cfg.store_path) as con:
        rows = con.execute("SELECT computed_at, panel_through, months FROM model_estimate WHERE curve = 'day'"
                           ).fetchall()
        through = con.execute("SELECT max(estimated_through) FROM model_term_premium").fetchall()[0][0]
    return (rows[0] if rows else None), through


def test_the_daily_run_refreshes_the_model_when_a_month_closes_and_not_before(tmp_path) -> None:  # noqa: ANN001
    from pipeline.config import load_config

    (tmp_path / "afterward.toml").write_text(TOML, encoding="utf-8")
    cfg = load_config(tmp_path / "afterward.toml")
    cfg.inbox.mkdir(parents=True)
    span = np.arange(np.datetime64("2010-01-01"), np.datetime64("2013-02-01"))
    days = span[np.is_busday(span)]
    rates = synthetic_yields(11, days.size)[:, MONTHS - 1]
    parts = [days < np.datetime64("2013-01-01"),
             (days >= np.datetime64("2013-01-01")) & (days <= np.datetime64("2013-01-15")),
             days > np.datetime64("2013-01-15")]

    write_wide_csv(cfg.inbox / "day_a.csv", days[parts[0]], TENORS, rates[parts[0]], "%.12f")
    first = daily(config_path=str(cfg.path), settle_seconds=0.01)
    assert first.modelled == ["day"]
    est, through = estimate(cfg)
    # 36 month ends, 2010-01 .. 2012-12, the last on the last weekday of December 2012 (numpy busday)
    assert est[1] == np.busday_offset(np.datetime64("2013-01-01"), -1, roll="backward").astype(object)
    assert est[2] == 36 and str(through) == "2012-12-31"

    write_wide_csv(cfg.inbox / "day_b.csv", days[parts[1]], TENORS, rates[parts[1]], "%.12f")
    second = daily(config_path=str(cfg.path), settle_seconds=0.01)
    assert second.files_loaded == 1 and second.modelled == []  # January is still open
    assert estimate(cfg)[0] == est

    write_wide_csv(cfg.inbox / "day_c.csv", days[parts[2]], TENORS, rates[parts[2]], "%.12f")
    third = daily(config_path=str(cfg.path), settle_seconds=0.01)
    assert third.modelled == ["day"]
    est3, through3 = estimate(cfg)
    assert est3[0] > est[0] and est3[2] == 37 and str(est3[1]) == "2013-01-31" and str(through3) == "2013-01-31"
