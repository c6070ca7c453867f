"""The ``late_curve`` check: a feed that did not arrive by its due time is noticed the same evening.

The expected day is recomputed here with pandas' own business-day calendar (``CustomBusinessDay``), an
implementation independent of ``pipeline.dates``; the due rule (a day's curve is due at
``checks.late_after`` local time on that day) is the project's own, stated in the README.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.checks import late_curve
from pipeline.config import CurveConfig
from pipeline.dates import BusinessCalendar
from pipeline.tenors import parse_tenor

HOLIDAYS = ["2031-12-25", "2031-12-26", "2032-01-01"]


def _cfg(**kw) -> CurveConfig:
    cal = BusinessCalendar(holidays=tuple(np.datetime64(h, "D") for h in HOLIDAYS))
    return CurveConfig(name="govt", tenors=(parse_tenor("1Y"),), calendar=cal, **kw)


def _due_by_pandas(now: str, late_after: str = "18:00") -> str:
    """The last business day whose due time has passed, by pandas' calendar (independent reference)."""
    ts = pd.Timestamp(now)
    bday = pd.offsets.CustomBusinessDay(holidays=HOLIDAYS)
    day = ts.normalize()
    if ts < day + pd.Timedelta(late_after + ":00"):
        day -= pd.Timedelta(days=1)
    return str(bday.rollback(day).date())


@pytest.mark.parametrize(("now", "last"), [
    ("2031-12-02T18:30", "2031-12-01"),   # after the due time: today's curve is late
    ("2031-12-02T17:59", "2031-11-28"),   # before it: yesterday's (Monday's) curve; last was the Friday
    ("2031-12-06T10:00", "2031-12-04"),   # Saturday: Friday's curve
    ("2031-12-27T19:00", "2031-12-23"),   # Saturday after the 25th/26th holidays: the 24th
    ("2032-01-02T09:00", "2031-12-30"),   # the day after New Year's holiday, morning: the 31st
], ids=["after-due", "before-due", "weekend", "after-holidays", "new-year"])
def test_late_curve_names_the_last_day_due(now, last):
    found = late_curve(np.datetime64(last), np.datetime64(now), _cfg(), zone="Europe/Paris")
    due = _due_by_pandas(now)
    assert found["as_of"].dt.strftime("%Y-%m-%d").tolist() == [due]
    assert found["check_name"].tolist() == ["late_curve"] and found["severity"].tolist() == ["warn"]
    assert found["detail"].iloc[0] == (f"no curve for {due} by 18:00 Europe/Paris; the last curve received is "
                                       f"for {last}")


@pytest.mark.parametrize(("now", "last"), [
    ("2031-12-02T18:30", "2031-12-02"),   # today's curve is in
    ("2031-12-02T17:00", "2031-12-01"),   # yesterday's is in and today's is not due yet
    ("2031-12-07T12:00", "2031-12-05"),   # Sunday; Friday's is in
], ids=["arrived", "not-due-yet", "weekend-complete"])
def test_no_finding_when_the_due_curve_is_in(now, last):
    assert late_curve(np.datetime64(last), np.datetime64(now), _cfg()).empty


def test_an_empty_curve_is_not_late_and_the_due_time_is_configurable():
    assert late_curve(None, np.datetime64("2031-12-02T23:00"), _cfg()).empty
    early = _cfg(late_after="09:30")
    found = late_curve(np.datetime64("2031-12-01"), np.datetime64("2031-12-02T09:31"), early)
    assert found["as_of"].dt.strftime("%Y-%m-%d").tolist() == [_due_by_pandas("2031-12-02T09:31", "09:30")]
    assert late_curve(np.datetime64("2031-12-01"), np.datetime64("2031-12-02T09:29"), early).empty


def test_monthly_curve_is_due_on_the_last_business_day_of_the_month():
    cfg = _cfg(frequency="monthly")
    # 2031-11-28 is the last business day of November (the 29th and 30th are a weekend)
    found = late_curve(np.datetime64("2031-10-31"), np.datetime64("2031-12-01T08:00"), cfg)
    assert found["as_of"].dt.strftime("%Y-%m-%d").tolist() == ["2031-11-28"]
    assert late_curve(np.datetime64("2031-11-28"), np.datetime64("2031-12-15T20:00"), cfg).empty
