"""Text cells to values: dates and rate numbers (each parser with a per-file cache), tenor labels.

Rate files are small and many (a month of one curve is a few hundred cells), so parsing is one
plain pass over the cells with a per-file cache of date strings: per-column pandas string
operations cost more in call overhead than the whole file takes this way.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pandas as pd

from pipeline.readers.options import NUMBER
from pipeline.tenors import TenorError, parse_tenor

_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")

_FORMATS = {
    "iso": ("%Y-%m-%d", "%Y/%m/%d", "%Y%m%d"),
    "day_first": ("%d/%m/%Y", "%d.%m.%Y", "%d-%m-%Y"),
    "month_first": ("%m/%d/%Y", "%m-%d-%Y"),
}


class DateParser:
    """Date text to ``datetime64[D]`` (or ``None``); ISO forms always, day-/month-first if configured."""

    def __init__(self, date_format: str) -> None:
        self.formats = _FORMATS["iso"] + (_FORMATS[date_format] if date_format != "iso" else ())
        self.cache: dict[str, np.datetime64 | None] = {}

    def __call__(self, text: str) -> np.datetime64 | None:
        try:
            return self.cache[text]
        except KeyError:
            pass
        from datetime import datetime

        value = None
        t = text.strip()
        if "T" in t[10:11] or " " in t[10:11]:
            t = t[:10]           # a timestamp at midnight from a spreadsheet or Parquet file
        for fmt in self.formats:
            try:
                value = np.datetime64(datetime.strptime(t, fmt).date(), "D")
                break
            except ValueError:
                continue
        if len(self.cache) < 100_000:
            self.cache[text] = value
        return value


def parse_dates(text: pd.Series, date_format: str) -> pd.Series:
    """Parse a Series of date text; ``NaT`` where a cell is not a real date (2031-02-30 is not)."""
    parse = DateParser(date_format)
    values = [parse(str(t)) for t in text]
    return pd.Series(np.array([v if v is not None else np.datetime64("NaT") for v in values],
                              dtype="datetime64[D]"), index=text.index).astype("datetime64[s]")


class NumberParser:
    """:func:`_parse_number` with a per-file cache of cell texts: a rate file repeats its numbers (a
    flood of one line repeats every one), and the cache spares the pattern match for each repeat."""

    def __init__(self, decimal_comma: bool) -> None:
        self.decimal_comma = decimal_comma
        self.cache: dict[str, float | str] = {}

    def __call__(self, cell: str) -> float | str:
        try:
            return self.cache[cell]
        except KeyError:
            pass
        v = _parse_number(cell, self.decimal_comma)
        if len(self.cache) < 100_000:
            self.cache[cell] = v
        return v


def _parse_number(cell: str, decimal_comma: bool) -> float | str:
    """A finite number from a text cell, or the reason it is not one (a string)."""
    t = cell.strip().rstrip("%").strip()
    if decimal_comma and _DECIMAL_COMMA.match(t):
        t = t.replace(",", ".")
    if not NUMBER.match(t):
        return f"unparseable: rate {cell[:40]!r} is not a finite number"
    v = float(t)
    if not math.isfinite(v):
        return f"unparseable: rate {cell[:40]!r} is not a finite number"
    return v


def tenor_labels(names: list[str]) -> tuple[list[str | None], list[str]]:
    """Each name's canonical tenor label (``None`` where it is not one), and the names that are not."""
    labels: list[str | None] = []
    bad: list[str] = []
    for n in names:
        try:
            labels.append(parse_tenor(n).label)
        except TenorError:
            labels.append(None)
            bad.append(n)
    return labels, bad

