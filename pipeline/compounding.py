"""Conversions between compounding conventions, vectorised over arrays.

A rate ``r`` over a year fraction ``tau`` has the growth factor

* ``continuous``: ``exp(r tau)``
* ``simple``: ``1 + r tau``
* ``annual`` / ``semiannual`` / ``quarterly`` / ``monthly`` (``m`` = 1, 2, 4, 12 a year):
  ``(1 + r/m)^(m tau)``, also when ``tau`` is shorter than one period ``1/m``.

Rates are decimals (0.0525 = 5.25 %); ``tau`` is a year fraction in whatever day count the caller
uses (the conversion itself does not care which). Every function broadcasts ``rate`` against ``tau``
and returns a new float array; none mutates its inputs.

At ``tau == 0`` the simple-compounding conversions use their limit (the rate itself), so a zero-length
interval never divides by zero.
"""

from __future__ import annotations

import numpy as np

__all__ = ["COMPOUNDINGS", "compounding_frequency", "discount_from_rate", "from_continuous", "rate_from_discount",
           "to_continuous"]

COMPOUNDINGS = ("continuous", "annual", "semiannual", "quarterly", "monthly", "simple")
_FREQ = {"continuous": None, "simple": 0, "annual": 1, "semiannual": 2, "quarterly": 4, "monthly": 12}


def compounding_frequency(compounding: str) -> int | None:
    """Payments a year for ``compounding``: ``None`` continuous, ``0`` simple, else 1, 2, 4 or 12."""
    return _FREQ[compounding]


def _frequency(compounding: str) -> int | None:
    if compounding not in COMPOUNDINGS:
        raise ValueError(f"unknown compounding {compounding!r}; allowed: {', '.join(COMPOUNDINGS)}")
    return compounding_frequency(compounding)


def _arrays(a: object, tau: object) -> tuple[np.ndarray, np.ndarray]:
    x, t = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(tau, dtype=float))
    return x, t


def to_continuous(rate: object, compounding: str, tau: object) -> np.ndarray:
    """The continuously compounded rate equivalent to ``rate`` in ``compounding`` over ``tau`` years.

    ``rate`` and ``tau`` broadcast together; the result has their broadcast shape. A simple rate with
    ``1 + r tau <= 0`` (or an m-times-a-year rate with ``1 + r/m <= 0``) has no equivalent: NaN.
    """
    m = _frequency(compounding)
    r, t = _arrays(rate, tau)
    if m is None:
        return r.copy()
    with np.errstate(invalid="ignore", divide="ignore"):
        if m == 0:
            growth = r * t
            safe = np.where(t == 0.0, 1.0, t)
            out = np.where(t == 0.0, r, np.log1p(growth) / safe)
            return np.where(1.0 + growth > 0.0, out, np.nan)
        out = m * np.log1p(r / m)
        return np.where(1.0 + r / m > 0.0, out, np.nan)


def from_continuous(rate_cc: object, compounding: str, tau: object) -> np.ndarray:
    """The rate in ``compounding`` over ``tau`` years equivalent to the continuous rate ``rate_cc``."""
    m = _frequency(compounding)
    r, t = _arrays(rate_cc, tau)
    if m is None:
        return r.copy()
    if m == 0:
        safe = np.where(t == 0.0, 1.0, t)
        return np.where(t == 0.0, r, np.expm1(r * t) / safe)
    return m * np.expm1(r / m)


def discount_from_rate(rate: object, compounding: str, tau: object) -> np.ndarray:
    """Discount factor over ``tau`` years at ``rate`` in ``compounding``: ``exp(-to_continuous * tau)``."""
    r, t = _arrays(rate, tau)
    return np.exp(-to_continuous(r, compounding, t) * t)


def rate_from_discount(df: object, compounding: str, tau: object) -> np.ndarray:
    """The rate in ``compounding`` over ``tau`` years implied by the discount factor ``df``.

    NaN where ``tau == 0`` (no rate is implied by a zero-length interval) or ``df <= 0``.
    """
    d, t = _arrays(df, tau)
    with np.errstate(invalid="ignore", divide="ignore"):
        safe = np.where(t == 0.0, np.nan, t)
        rcc = -np.log(np.where(d > 0.0, d, np.nan)) / safe
    return from_continuous(rcc, compounding, t)
