"""Tenor labels: parsing the spellings found in rate files into one canonical form.

A tenor is a count and a unit: ``ON`` (overnight), ``TN`` (tomorrow-next), ``SN`` (spot-next),
``nD`` (n business days), ``nW``, ``nM`` or ``nY``. Months that are whole years are stored as years
(``12M`` and ``1Y`` are the same tenor), and ``1D`` is ``ON`` (both are one business day); the
canonical label is what the store keeps. How each unit becomes a maturity date (business or calendar
days, from the as-of or the spot date) is :func:`pipeline.dates.maturity_dates`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from pipeline.errors import TenorError

__all__ = ["Tenor", "TenorError", "parse_tenor", "canonical_label"]


_UNIT_WORDS = {
    "d": "D", "day": "D", "days": "D", "dy": "D",
    "w": "W", "wk": "W", "wks": "W", "week": "W", "weeks": "W",
    "m": "M", "mo": "M", "mos": "M", "mth": "M", "mths": "M", "mon": "M", "month": "M", "months": "M",
    "y": "Y", "yr": "Y", "yrs": "Y", "year": "Y", "years": "Y", "a": "Y",
}
_OVERNIGHT = {"on", "o/n", "overnight", "1bd"}
_TOM_NEXT = {"tn", "t/n", "tom-next", "tom next", "tomnext", "tomorrow-next", "tomorrow next"}
_SPOT_NEXT = {"sn", "s/n", "spot-next", "spot next", "spotnext"}
# business days from the as-of date for the sort key; SN counts the usual two-day spot lag
_SHORT_DAYS = {"ON": 1, "TN": 2, "SN": 3}
_DAYS_PER_MONTH = 365.25 / 12.0
_PATTERN = re.compile(r"^\s*(\d{1,4})\s*[-_ ]?\s*([a-z]+)\.?\s*$")


@dataclass(frozen=True, order=False)
class Tenor:
    """A tenor in canonical form.

    ``unit`` is one of ``"ON"``, ``"TN"``, ``"SN"`` (count 1), ``"D"`` (business days), ``"W"``,
    ``"M"``, ``"Y"``; ``count`` is a positive integer (``0`` is allowed for ``M``/``Y`` so that a
    forward start of ``0M`` can be written).
    """

    count: int
    unit: str

    @property
    def label(self) -> str:
        return self.unit if self.unit in _SHORT_DAYS else f"{self.count}{self.unit}"

    @property
    def months(self) -> int | None:
        """Whole months for ``M``/``Y`` tenors; ``None`` for day-based tenors."""
        if self.unit == "M":
            return self.count
        if self.unit == "Y":
            return 12 * self.count
        return None

    @property
    def calendar_days(self) -> int | None:
        """Calendar days for ``W`` tenors (``7n``); ``None`` otherwise (day tenors count business days)."""
        if self.unit == "W":
            return 7 * self.count
        return None

    @property
    def business_days(self) -> int | None:
        """Business days from the as-of date for ``ON`` (1), ``TN`` (2) and ``nD`` (n); ``None``
        otherwise (``SN`` depends on the curve's spot lag: spot + 1)."""
        if self.unit in ("ON", "TN"):
            return _SHORT_DAYS[self.unit]
        if self.unit == "D":
            return self.count
        return None

    @property
    def approx_days(self) -> float:
        """Nominal length in days, for ordering tenors only (never for pricing): ``ON`` 1, ``TN`` 2,
        ``SN`` 3, ``nD`` n, ``nW`` 7n, months at 365.25 / 12 days."""
        if self.unit in _SHORT_DAYS:
            return float(_SHORT_DAYS[self.unit])
        if self.unit == "D":
            return float(self.count)
        if self.unit == "W":
            return 7.0 * self.count
        return self.months * _DAYS_PER_MONTH  # type: ignore[operator]

    @property
    def sort_months(self) -> float:
        """The sort key the views show as ``tenor_months``: whole months for ``nM``/``nY``, else the
        nominal days of :attr:`approx_days` in months of 365.25 / 12 days (``1W`` = 0.2300)."""
        if self.months is not None:
            return float(self.months)
        return self.approx_days / _DAYS_PER_MONTH

    def __str__(self) -> str:
        return self.label

    def __lt__(self, other: Tenor) -> bool:
        return (self.approx_days, self.label) < (other.approx_days, other.label)


def _normalise(count: int, unit: str) -> Tenor:
    if unit == "M" and count % 12 == 0 and count > 0:
        return Tenor(count // 12, "Y")
    if unit == "D" and count == 1:
        # one business day from the as-of date: the overnight tenor (7D is not 1W: business days)
        return Tenor(1, "ON")
    return Tenor(count, unit)


def parse_tenor(label: object, *, allow_zero: bool = False) -> Tenor:
    """Parse a tenor label such as ``3M``, ``3 Mo``, ``10 Yr``, ``10 years``, ``1W``, ``ON``, ``TN`` or ``SN``.

    Matching ignores case and surrounding spaces. Raises :class:`TenorError` for anything else.
    """
    if isinstance(label, Tenor):
        return label
    text = str(label).strip().lower()
    if text in _OVERNIGHT:
        return Tenor(1, "ON")
    if text in _TOM_NEXT:
        return Tenor(1, "TN")
    if text in _SPOT_NEXT:
        return Tenor(1, "SN")
    match = _PATTERN.match(text)
    if not match:
        raise TenorError(f"not a tenor label: {label!r} (expected e.g. ON, TN, 1W, 3M, 10Y)")
    count = int(match.group(1))
    unit = _UNIT_WORDS.get(match.group(2))
    if unit is None:
        raise TenorError(f"not a tenor label: {label!r} (unknown unit {match.group(2)!r})")
    if count == 0 and not (allow_zero and unit in ("M", "Y")):
        raise TenorError(f"not a tenor label: {label!r} (a tenor must be longer than zero)")
    return _normalise(count, unit)


def canonical_label(label: object) -> str:
    """The canonical label of ``label`` (``'12 months'`` -> ``'1Y'``)."""
    return parse_tenor(label).label
