"""Numbers, dates and labels formatted for people reading the report.

Every function takes a value that may be missing (``None``, ``NaN``, ``NaT``, ``pd.NA``) and returns
a string; a missing value prints as an en dash so that a table never shows ``nan``.
"""

from __future__ import annotations

import html
import math
from datetime import date, datetime
from typing import Any

import numpy as np
import pandas as pd

__all__ = [
    "MISSING",
    "esc",
    "fmt_bp",
    "fmt_count",
    "fmt_date",
    "fmt_num",
    "fmt_pct",
    "fmt_pvalue",
    "fmt_timestamp",
    "is_missing",
    "months_label",
]

MISSING = "\u2013"


def is_missing(value: Any) -> bool:
    """True for ``None``, float NaN, ``NaT`` and ``pd.NA``."""
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    if isinstance(value, float | np.floating):
        return not math.isfinite(float(value))
    if isinstance(value, np.datetime64):
        return bool(np.isnat(value))
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def esc(text: Any) -> str:
    """HTML-escaped text (quotes included, so it is safe inside attributes)."""
    return html.escape("" if text is None else str(text), quote=True)


def fmt_num(value: Any, decimals: int = 2, *, signed: bool = False) -> str:
    """A plain number with ``decimals`` places and thousands separators (``-0.0`` prints as ``0.0``)."""
    if is_missing(value):
        return MISSING
    x = float(value)
    if round(x, decimals) == 0:
        x = 0.0
    return f"{x:+,.{decimals}f}" if signed and x != 0 else f"{x:,.{decimals}f}"


def fmt_bp(value: Any, *, signed: bool = False, unit: bool = False) -> str:
    """Basis points with one decimal (``18.4``; ``+18.4`` when ``signed``; ``18.4 bp`` with ``unit``)."""
    text = fmt_num(value, 1, signed=signed)
    return f"{text} bp" if unit and text != MISSING else text


def fmt_pct(rate: Any, decimals: int = 2) -> str:
    """A decimal rate as percent: ``0.0525`` -> ``5.25 %``."""
    if is_missing(rate):
        return MISSING
    return f"{fmt_num(float(rate) * 100.0, decimals)} %"


def fmt_pvalue(p: Any) -> str:
    """A p-value: three decimals, ``< 0.001`` below that."""
    if is_missing(p):
        return MISSING
    p = float(p)
    return "< 0.001" if p < 0.001 else f"{p:.3f}"


def fmt_count(n: Any) -> str:
    """A whole count with thousands separators."""
    if is_missing(n):
        return MISSING
    return f"{int(n):,}"


def _as_datetime(value: Any) -> datetime | date | None:
    if is_missing(value):
        return None
    if isinstance(value, datetime | date):
        return value
    return pd.Timestamp(value).to_pydatetime()


def fmt_date(value: Any) -> str:
    """An ISO date, ``YYYY-MM-DD``."""
    d = _as_datetime(value)
    if d is None:
        return MISSING
    return (d.date() if isinstance(d, datetime) else d).isoformat()


def fmt_timestamp(value: Any, *, seconds: bool = True) -> str:
    """An ISO date and time, ``YYYY-MM-DD HH:MM:SS`` (with `` UTC`` when the value carries that zone)."""
    d = _as_datetime(value)
    if d is None:
        return MISSING
    if not isinstance(d, datetime):
        return d.isoformat()
    text = d.strftime("%Y-%m-%d %H:%M:%S" if seconds else "%Y-%m-%d %H:%M")
    if d.tzinfo is not None and d.utcoffset() is not None and d.utcoffset().total_seconds() == 0:
        text += " UTC"
    return text


def months_label(months: Any) -> str:
    """A whole number of months as a tenor label: ``0`` -> ``0M``, ``6`` -> ``6M``, ``24`` -> ``2Y``."""
    m = int(months)
    return f"{m // 12}Y" if m > 0 and m % 12 == 0 else f"{m}M"
