"""``cubic_zero``: a natural cubic spline through the continuously compounded zero rates.

The spline runs through the nodes ``(t_i, r_i)`` with zero second derivative at the first and last
node (the same spline as QuantLib's ``CubicNaturalSpline``). Extrapolation: flat zero rate before the
first node; after the last node the instantaneous forward is held flat at its value there,
``f_n = r_n + t_n r'(t_n)``. The spline's second derivatives are solved for all days of a block at
once (one small dense system per day, batched by numpy).
"""

from __future__ import annotations

import numpy as np

from pipeline.curves.base import Block, gather, segment_index

__all__ = ["CubicZeroBlock", "natural_spline_second_derivatives"]


def natural_spline_second_derivatives(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Second derivatives ``(G, n)`` of the natural cubic splines through rows of ``x``, ``y`` ``(G, n)``."""
    g, n = x.shape
    m = np.zeros((g, n))
    if n < 3:
        return m
    h = np.diff(x, axis=1)
    slope = np.diff(y, axis=1) / h
    k = n - 2
    a = np.zeros((g, k, k))
    rows = np.arange(k)
    a[:, rows, rows] = 2.0 * (h[:, :-1] + h[:, 1:])
    a[:, rows[1:], rows[:-1]] = h[:, 1:-1]
    a[:, rows[:-1], rows[1:]] = h[:, 1:-1]
    rhs = 6.0 * (slope[:, 1:] - slope[:, :-1])
    m[:, 1:-1] = np.linalg.solve(a, rhs[..., None])[..., 0]
    return m


class CubicZeroBlock(Block):
    support = None

    def __init__(self, times: np.ndarray, zero_cc: np.ndarray) -> None:
        super().__init__(times, zero_cc)
        x, y = self.times, self.zero_cc
        self._m = natural_spline_second_derivatives(x, y)
        h = x[:, -1] - x[:, -2]
        d_last = (y[:, -1] - y[:, -2]) / h + h / 6.0 * self._m[:, -2] + h / 3.0 * self._m[:, -1]
        self._f_last = y[:, -1] + x[:, -1] * d_last

    def _spline(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x, y, m = self.times, self.zero_cc, self._m
        j = segment_index(x, t)
        x0, x1 = gather(x, j - 1), gather(x, j)
        y0, y1 = gather(y, j - 1), gather(y, j)
        m0, m1 = gather(m, j - 1), gather(m, j)
        h = x1 - x0
        a = (x1 - t) / h
        b = (t - x0) / h
        r = a * y0 + b * y1 + ((a**3 - a) * m0 + (b**3 - b) * m1) * h * h / 6.0
        dr = (y1 - y0) / h - (3.0 * a * a - 1.0) / 6.0 * h * m0 + (3.0 * b * b - 1.0) / 6.0 * h * m1
        first = t < x[:, :1]
        return np.where(first, y[:, :1], r), np.where(first, 0.0, dr)

    def ln_discount(self, t: np.ndarray, loc: np.ndarray | None = None) -> np.ndarray:
        r, _ = self._spline(t)
        x_n, y_n = self.times[:, -1:], self.zero_cc[:, -1:]
        beyond = -(y_n * x_n) - self._f_last[:, None] * (t - x_n)
        return np.where(t > x_n, beyond, -r * t)

    def inst_forward(self, t: np.ndarray) -> np.ndarray:
        r, dr = self._spline(t)
        return np.where(t > self.times[:, -1:], self._f_last[:, None], r + t * dr)
