"""Orvane, the invented market: its names, the sample's dates, its calendar, curves and tenors.

Everything here is fiction (see :mod:`pipeline.demo`).
"""

from __future__ import annotations

import numpy as np

from pipeline.dates import BusinessCalendar

COUNTRY = "Republic of Orvane"
CURRENCY = "Orvane orv (ORV)"
ISSUER = "Orvane National Treasury"
RATE_PANEL = "Orvane Harbour Rate panel"

# Any seed gives the same model; this one was picked among the first few dozen because its path tells
# the demo's story cleanly: the 2001 tightening inverts the curve for about a year, other inversions
# are short, rates stay within 1 %-9.5 %, and the sample's mean errors sit well inside their HAC bands.
DEFAULT_SEED = 21
FIRST_DAY = "1996-01-01"
LAST_DAY = "2025-12-31"
#: fixed-date holidays (month-day, name); a holiday on a weekend is simply not moved
HOLIDAYS = (
    ("01-01", "New Year's Day"),
    ("03-21", "Landing Day"),
    ("06-18", "Charter Day"),
    ("11-05", "Lantern Night"),
)
#: holidays are listed far enough ahead to roll 30-year maturities from the last as-of date
HOLIDAY_YEARS = (1996, 2057)

GOVT_TENORS = ("1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y")
SWAP_TENORS = ("1W", "1M", "3M", "6M", "1Y", "2Y", "3Y", "4Y", "5Y", "7Y", "10Y", "15Y", "20Y", "30Y")
CURVES = ("govt", "swap")


def demo_holidays(first_year: int = HOLIDAY_YEARS[0], last_year: int = HOLIDAY_YEARS[1]) -> np.ndarray:
    """Orvane's fixed holidays for every year in ``[first_year, last_year]`` (``datetime64[D]``, sorted)."""
    years = np.arange(first_year, last_year + 1)
    days = [np.array([f"{y:04d}-{md}" for y in years], dtype="datetime64[D]") for md, _ in HOLIDAYS]
    return np.sort(np.concatenate(days))


def demo_calendar() -> BusinessCalendar:
    """The Orvane business-day calendar: Saturday and Sunday off, plus :func:`demo_holidays`."""
    return BusinessCalendar.of(("Sat", "Sun"), list(demo_holidays()))
