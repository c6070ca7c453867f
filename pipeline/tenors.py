"""Tenor labels: parsing the spellings found in rate files into one canonical form.

A tenor is a count and a unit: ``ON`` (one business day), ``nD``, ``nW``, ``nM`` or ``nY``.
Months that are whole years are stored as years (``12M`` and ``1Y`` are the same tenor), and the
canonical label is what the store keeps.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["Tenor", "TenorError", "parse_tenor", "canonical_label"]


class TenorError(ValueError):
    """A label that is not a tenor. The message names the label."""


_UNIT_WORDS = {
    "d": "D", "day": "D", "days": "D", "dy": "D",
    "w": "W", "wk": "W", "wks": "W", "week": "W", "weeks": "W",
    "m": "M", "mo": "M", "mos": "M", "mth": "M", "mths": "M", "mon": "M", "month": "M", "months": "M",
    "y": "Y", "yr": "Y", "yrs": "Y", "year": "Y", "years": "Y", "a": "Y",
}
_OVERNIGHT = {"on", "o/n", "overnight", "1bd"}
_PATTERN = re.compile(r"^\s*(\d{1,4})\s*[-_ ]?\s*([a-z]+)\.?\s*$")


@dataclass(frozen=True, order=False)
class Tenor:
    """A tenor in canonical form.

    ``unit`` is one of ``"ON"``, ``"D"``, ``"W"``, ``"M"``, ``"Y"``; ``count`` is a positive integer
    (``0`` is allowed for ``M``/``Y`` so that a forward start of ``0M`` can be written).
    """

    count: int
    unit: str

    @property
    def label(self) -> str:
        return "ON" if self.unit == "ON" else f"{self.count}{self.unit}"

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
        """Calendar days for ``D``/``W`` tenors; ``None`` otherwise (``ON`` is a business day)."""
        if self.unit == "D":
            return self.count
        if self.unit == "W":
            return 7 * self.count
        return None

    @property
    def approx_days(self) -> float:
        """Approximate length in days, for ordering tenors only (never for pricing)."""
        if self.unit == "ON":
            return 1.0
        if self.unit in ("D", "W"):
            return float(self.calendar_days)  # type: ignore[arg-type]
        return self.months * 365.25 / 12.0  # type: ignore[operator]

    def __str__(self) -> str:
        return self.label

    def __lt__(self, other: Tenor) -> bool:
        return (self.approx_days, self.label) < (other.approx_days, other.label)


def _normalise(count: int, unit: str) -> Tenor:
    if unit == "M" and count % 12 == 0 and count > 0:
        return Tenor(count // 12, "Y")
    if unit == "D" and count % 7 == 0 and count > 0:
        # 7D and 1W are the same calendar period; keep the week form
        return Tenor(count // 7, "W")
    return Tenor(count, unit)


def parse_tenor(label: object, *, allow_zero: bool = False) -> Tenor:
    """Parse a tenor label such as ``3M``, ``3 Mo``, ``10 Yr``, ``10 years`` or ``ON``.

    Matching ignores case and surrounding spaces. Raises :class:`TenorError` for anything else.
    """
    if isinstance(label, Tenor):
        return label
    text = str(label).strip().lower()
    if text in _OVERNIGHT:
        return Tenor(1, "ON")
    match = _PATTERN.match(text)
    if not match:
        raise TenorError(f"not a tenor label: {label!r} (expected e.g. ON, 1W, 3M, 10Y)")
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
