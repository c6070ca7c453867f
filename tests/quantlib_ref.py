"""QuantLib as the independent reference: date and calendar conversions shared by the tests.

QuantLib is imported only under tests/; nothing in the package depends on it."""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

import numpy as np
import pandas as pd
import QuantLib as ql

__all__ = ["ql_calendar", "ql_date", "np_date"]

_QL_DAYS = {"Mon": ql.Monday, "Tue": ql.Tuesday, "Wed": ql.Wednesday, "Thu": ql.Thursday, "Fri": ql.Friday,
            "Sat": ql.Saturday, "Sun": ql.Sunday}


def ql_date(d: object) -> ql.Date:
    """A QuantLib date from anything numpy or pandas reads as a day."""
    x: dt.date = pd.Timestamp(np.datetime64(d, "D")).date()
    return ql.Date(x.day, x.month, x.year)


def np_date(d: ql.Date) -> np.datetime64:
    return np.datetime64(d.ISO(), "D")


def ql_calendar(name: str, weekend: Iterable[str] = ("Sat", "Sun"), holidays: Iterable[object] = ()) -> ql.Calendar:
    """A QuantLib calendar with the given weekend days and holidays (a bespoke one, named ``name``)."""
    cal = ql.BespokeCalendar(name)
    for d in weekend:
        cal.addWeekend(_QL_DAYS[d])
    for h in holidays:
        cal.addHoliday(ql_date(h))
    return cal
