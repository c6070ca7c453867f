"""Date conventions, vectorised over numpy ``datetime64[D]`` arrays.

Business-day calendars (a weekend set plus holidays), month arithmetic that clips to the month's
end, modified-following rolling, tenor maturities, and the day counts ACT/365F, ACT/360, 30/360
(bond basis), 30E/360 and ACT/ACT (ISDA). Every function accepts scalars or arrays of any shape and
returns an array of the broadcast shape; none keeps a notion of "today".
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

from pipeline.tenors import Tenor, parse_tenor

__all__ = [
    "DAY_COUNTS",
    "WEEKDAYS",
    "BusinessCalendar",
    "add_months",
    "as_days",
    "day_count_days",
    "maturity_dates",
    "spot_dates",
    "unadjusted_maturities",
    "year_fraction",
]

DAY = np.dtype("datetime64[D]")
WEEKDAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
DAY_COUNTS = ("ACT/365F", "ACT/360", "30/360", "30E/360", "ACT/ACT")  # ACT/ACT is the ISDA variant


def as_days(values: object) -> np.ndarray:
    """Coerce dates (strings, ``datetime.date``, pandas timestamps, datetime64) to ``datetime64[D]``."""
    arr = np.asarray(values)
    if arr.dtype == DAY:
        return arr
    if arr.dtype.kind == "M":
        return arr.astype(DAY)
    if arr.dtype == object and arr.size and hasattr(arr.flat[0], "to_datetime64"):
        return np.array([v.to_datetime64() for v in arr.flat], dtype="datetime64[ns]").reshape(
            arr.shape
        ).astype(DAY)
    return arr.astype(DAY)


@dataclass(frozen=True)
class BusinessCalendar:
    """Weekend days plus holidays. ``weekend`` holds names from :data:`WEEKDAYS`; it may be empty.

    ``spot_days`` is the curve's spot lag in business days (0 = tenors run from the as-of date): it
    travels with the calendar because every maturity computed on it needs both (see
    :func:`maturity_dates`). It plays no part in rolling or counting business days.
    """

    weekend: tuple[str, ...] = ("Sat", "Sun")
    holidays: tuple[np.datetime64, ...] = ()
    spot_days: int = 0
    _cal: np.busdaycalendar = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        unknown = [d for d in self.weekend if d not in WEEKDAYS]
        if unknown:
            raise ValueError(f"unknown weekday {unknown[0]!r}; allowed: {', '.join(WEEKDAYS)}")
        if isinstance(self.spot_days, bool) or not isinstance(self.spot_days, int | np.integer) or self.spot_days < 0:
            raise ValueError(f"spot_days = {self.spot_days!r} must be an integer >= 0")
        mask = [0 if d in self.weekend else 1 for d in WEEKDAYS]
        hol = np.unique(as_days(list(self.holidays))) if self.holidays else np.array([], dtype=DAY)
        object.__setattr__(self, "holidays", tuple(hol))
        object.__setattr__(self, "_cal", np.busdaycalendar(weekmask=mask, holidays=hol))

    def __reduce__(self) -> tuple:
        # np.busdaycalendar cannot be pickled: rebuild it from the fields (worker processes need this)
        return (type(self), (self.weekend, self.holidays, self.spot_days))

    @classmethod
    def of(cls, weekend: Iterable[str] = ("Sat", "Sun"), holidays: Iterable[object] = (),
           spot_days: int = 0) -> BusinessCalendar:
        return cls(tuple(weekend), tuple(as_days(list(holidays))) if holidays else (), int(spot_days))

    def is_business_day(self, dates: object) -> np.ndarray:
        return np.is_busday(as_days(dates), busdaycal=self._cal)

    def roll(self, dates: object, convention: str = "modified_following") -> np.ndarray:
        """Roll to a business day: ``following``, ``modified_following``, ``preceding`` or ``none``."""
        roll = {
            "following": "following",
            "modified_following": "modifiedfollowing",
            "preceding": "preceding",
            "modified_preceding": "modifiedpreceding",
        }
        d = as_days(dates)
        if convention == "none":
            return d
        return np.busday_offset(d, 0, roll=roll[convention], busdaycal=self._cal)

    def add_business_days(self, dates: object, n: int | np.ndarray) -> np.ndarray:
        """``n`` business days after ``dates`` (rolled forward first if not a business day)."""
        return np.busday_offset(as_days(dates), n, roll="following", busdaycal=self._cal)

    def business_days(self, first: object, last: object) -> np.ndarray:
        """All business days in the closed range ``[first, last]``."""
        lo, hi = as_days(first), as_days(last)
        if hi < lo:
            return np.array([], dtype=DAY)
        span = np.arange(lo, hi + np.timedelta64(1, "D"), dtype=DAY)
        return span[self.is_business_day(span)]

    def month_ends(self, first: object, last: object) -> np.ndarray:
        """The last business day of each month whose last business day falls in ``[first, last]``."""
        lo, hi = as_days(first), as_days(last)
        months = np.arange(lo.astype("datetime64[M]"), hi.astype("datetime64[M]") + 1)
        next_first = (months + 1).astype(DAY)
        ends = np.busday_offset(next_first, -1, roll="forward", busdaycal=self._cal)
        return ends[(ends >= lo) & (ends <= hi)]

    def count_business_days(self, start: object, end: object) -> np.ndarray:
        """Business days in ``[start, end)``."""
        return np.busday_count(as_days(start), as_days(end), busdaycal=self._cal)


def add_months(dates: object, months: int | np.ndarray) -> np.ndarray:
    """Calendar month arithmetic that clips to the month's end (31 Jan + 1M = 28/29 Feb)."""
    d = as_days(dates)
    m = d.astype("datetime64[M]")
    day = (d - m.astype(DAY)).astype(np.int64)  # zero-based day of month
    target = m + np.asarray(months).astype("timedelta64[M]")
    last_day = ((target + 1).astype(DAY) - target.astype(DAY)).astype(np.int64) - 1
    return target.astype(DAY) + np.minimum(day, last_day).astype("timedelta64[D]")


def spot_dates(as_of: object, calendar: BusinessCalendar) -> np.ndarray:
    """The spot date of each as-of date: ``calendar.spot_days`` business days later (an as-of date
    that is not a business day is rolled forward first); the as-of date itself when the lag is 0."""
    d = as_days(as_of)
    if not calendar.spot_days:
        return d
    return calendar.add_business_days(d, calendar.spot_days)


def unadjusted_maturities(as_of: object, tenor: Tenor | str, calendar: BusinessCalendar) -> np.ndarray:
    """The spot date plus a month, year or week tenor by calendar arithmetic, before rolling (month
    tenors clip to the month's end). A par bond's coupon dates step back from this date."""
    t = parse_tenor(tenor, allow_zero=True)
    spot = spot_dates(as_of, calendar)
    if t.months is not None:
        return add_months(spot, t.months)
    if t.unit == "W":
        return spot + np.timedelta64(t.calendar_days, "D")
    raise ValueError(f"tenor {t.label} counts business days; it has no unadjusted maturity")


def maturity_dates(
    as_of: object, tenor: Tenor | str, calendar: BusinessCalendar, convention: str = "modified_following"
) -> np.ndarray:
    """Maturity of ``tenor`` from each as-of date ``(...)`` datetime64[D], same shape.

    * ``ON``, ``TN`` and ``nD``: 1, 2 and n business days after the as-of date (an as-of date that is
      not a business day is rolled forward first), whatever the spot lag: as QuantLib's
      ``Calendar.advance(d, n, Days)``, which counts business days.
    * ``SN``: one business day after the spot date.
    * ``nW``, ``nM``, ``nY``: from the spot date (as-of + ``calendar.spot_days`` business days; the
      as-of date when that is 0), ``7n`` calendar days or calendar months (clipped to the month's
      end), then rolled by ``convention`` (modified following) on ``calendar``.
    """
    t = parse_tenor(tenor, allow_zero=True)
    d = as_days(as_of)
    if t.business_days is not None:
        return calendar.add_business_days(d, t.business_days)
    if t.unit == "SN":
        return calendar.add_business_days(d, calendar.spot_days + 1)
    return calendar.roll(unadjusted_maturities(d, t, calendar), convention)


def _ymd(d: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    y = d.astype("datetime64[Y]")
    m = d.astype("datetime64[M]")
    year = y.astype(np.int64) + 1970
    month = (m - y.astype("datetime64[M]")).astype(np.int64) + 1
    day = (d - m.astype(DAY)).astype(np.int64) + 1
    return year, month, day


def day_count_days(start: object, end: object, convention: str) -> np.ndarray:
    """The day-count numerator: actual days, or 30/360-style days for the 30-day conventions."""
    s, e = np.broadcast_arrays(as_days(start), as_days(end))
    if convention in ("ACT/365F", "ACT/360", "ACT/ACT"):
        return (e - s).astype(np.int64)
    y1, m1, d1 = _ymd(s)
    y2, m2, d2 = _ymd(e)
    if convention == "30/360":
        # ISDA 2006 4.16(f), bond basis: D1 = 31 -> 30; D2 = 31 -> 30 only if D1 is then 30
        d1 = np.where(d1 == 31, 30, d1)
        d2 = np.where((d2 == 31) & (d1 == 30), 30, d2)
    elif convention == "30E/360":
        d1 = np.minimum(d1, 30)
        d2 = np.minimum(d2, 30)
    else:
        raise ValueError(f"unknown day count {convention!r}; allowed: {', '.join(DAY_COUNTS)}")
    return 360 * (y2 - y1) + 30 * (m2 - m1) + (d2 - d1)


def _days_in_year(year: np.ndarray) -> np.ndarray:
    leap = ((year % 4 == 0) & (year % 100 != 0)) | (year % 400 == 0)
    return np.where(leap, 366.0, 365.0)


def year_fraction(start: object, end: object, convention: str) -> np.ndarray:
    """Year fraction from ``start`` to ``end`` under ``convention`` (one of :data:`DAY_COUNTS`).

    Negative when ``end`` precedes ``start``. ACT/ACT is the ISDA variant: the days falling in each
    calendar year are divided by that year's length.
    """
    s, e = np.broadcast_arrays(as_days(start), as_days(end))
    if convention == "ACT/365F":
        return (e - s).astype(np.int64) / 365.0
    if convention == "ACT/360":
        return (e - s).astype(np.int64) / 360.0
    if convention in ("30/360", "30E/360"):
        return day_count_days(s, e, convention) / 360.0
    if convention != "ACT/ACT":
        raise ValueError(f"unknown day count {convention!r}; allowed: {', '.join(DAY_COUNTS)}")
    sign = np.where(e < s, -1.0, 1.0)
    lo, hi = np.minimum(s, e), np.maximum(s, e)
    y_lo = lo.astype("datetime64[Y]")
    y_hi = hi.astype("datetime64[Y]")
    year_lo = y_lo.astype(np.int64) + 1970
    year_hi = y_hi.astype(np.int64) + 1970
    same = year_lo == year_hi
    next_jan = (y_lo + 1).astype(DAY)
    first_part = (np.where(same, hi, next_jan) - lo).astype(np.int64) / _days_in_year(year_lo)
    last_part = np.where(same, 0.0, (hi - y_hi.astype(DAY)).astype(np.int64) / _days_in_year(year_hi))
    whole = np.where(same, 0.0, (year_hi - year_lo - 1).astype(float))
    return sign * (first_part + whole + last_part)


def tenor_months(labels: Sequence[str]) -> np.ndarray:
    """Months of each month/year tenor label (``'1Y'`` -> 12). Raises for day-based tenors."""
    out = []
    for label in labels:
        t = parse_tenor(label, allow_zero=True)
        if t.months is None:
            raise ValueError(f"tenor {label!r} is not a whole number of months")
        out.append(t.months)
    return np.asarray(out, dtype=np.int64)
