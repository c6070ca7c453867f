"""Plain words for rejection reasons and finding details, with a bounded size.

A reason speaks the file's language: a number is shown as the file wrote it, in the file's units
(``334 (percent)``), never as the decimal it was turned into. A reason or detail that lists the
members of a group (the lines of a duplicated quote, the rows behind a finding) shows at most
:data:`SHOWN` of them and then says how many more there are: a group of a million lines gets a
reason of the same length as a group of two, so the cost of a load stays linear in the file's size.

Everything here works on whole arrays (one call per group of rows, not per row).
"""

from __future__ import annotations

import numpy as np

__all__ = ["SHOWN", "band_text", "first_items", "more_text", "number_text", "units_name"]

SHOWN = 3          # members of a group named in a reason or detail; the rest are counted

# the file's units as a reader of the file would say them
_UNIT_NAMES = {"percent": "percent", "decimal": "decimal", "bp": "bp"}
_UNIT_SUFFIX = {"percent": " %", "decimal": "", "bp": " bp"}
_UNIT_SCALE = {"percent": 100.0, "decimal": 1.0, "bp": 10_000.0}


def units_name(units: str) -> str:
    """The name shown beside a number in the file's ``units`` (``percent``, ``decimal``, ``bp``)."""
    return _UNIT_NAMES[units]


def number_text(values: np.ndarray) -> np.ndarray:
    """Each number as a file would write it: the shortest text that reads back as the same float,
    without a trailing ``.0`` (``334.0`` -> ``334``, ``4.1`` -> ``4.1``, ``1e30`` -> ``1e+30``).

    Returns an object array of ``str`` of the same shape (1-d)."""
    out = []
    for v in np.asarray(values, dtype=float).tolist():
        s = repr(v)
        out.append(s[:-2] if s.endswith(".0") else s)
    return np.array(out, dtype=object)


def _edge(value: float, units: str) -> str:
    v = value * _UNIT_SCALE[units]
    # the band's edges are round numbers in every unit; 1e-9 hides the float noise of the scaling
    v = round(v, 9)
    s = f"{v:,.9f}".rstrip("0").rstrip(".")
    return (s if s != "-0" else "0") + _UNIT_SUFFIX[units]


def band_text(lo: float, hi: float, strict_min: bool, units: str) -> str:
    """The plausible band ``lo..hi`` (decimals) in the file's ``units``, in words.

    ``band_text(-0.05, 0.4, False, "percent")`` is ``"-5 % to 40 %"``; with ``strict_min`` the lower
    edge itself is outside: ``"above 0 and at most 1.5"``."""
    if strict_min:
        return f"above {_edge(lo, units)} and at most {_edge(hi, units)}"
    return f"{_edge(lo, units)} to {_edge(hi, units)}"


def first_items(group: np.ndarray, items: np.ndarray, n_groups: int, sep: str = ", ",
                shown: int = SHOWN) -> tuple[np.ndarray, np.ndarray]:
    """Per group, its first ``shown`` items joined by ``sep``, and the number of items it has.

    ``group`` (``(N,)`` ints in ``0..n_groups-1``) must be sorted, with each group's items in the
    order they are to be shown; ``items`` ``(N,)`` holds their texts. Returns ``(text, size)``, both
    ``(n_groups,)``: a group without items has ``""`` and 0. The cost is linear in ``N``.
    """
    group = np.asarray(group, dtype=np.int64)
    items = np.asarray(items, dtype=object)
    size = np.bincount(group, minlength=n_groups)
    starts = np.concatenate([[0], np.cumsum(size)[:-1]])
    rank = np.arange(len(group)) - starts[group]
    text = np.full(n_groups, "", dtype=object)
    for r in range(shown):
        sel = rank == r
        g = group[sel]
        text[g] = (text[g] + sep + items[sel]) if r else items[sel]
    return text, size


def more_text(size: np.ndarray, shown: np.ndarray, noun: str) -> np.ndarray:
    """``" and N more NOUN"`` where ``size`` exceeds ``shown``, else ``""`` (object array)."""
    size = np.asarray(size, dtype=np.int64)
    rest = size - np.asarray(shown, dtype=np.int64)
    out = np.full(len(size), "", dtype=object)
    has = rest > 0
    if has.any():
        out[has] = [f" and {n:,} more {noun}" for n in rest[has].tolist()]
    return out
