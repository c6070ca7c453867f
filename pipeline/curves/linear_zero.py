"""``linear_zero``: continuously compounded zero rates linear in time between the nodes.

Extrapolation: flat zero rate before the first node (``r(t) = r_1`` for ``t < t_1``); after the last
node the instantaneous forward is held flat at its value at the last node,
``f_n = r_n + t_n r'(t_n-)`` (the same rule as QuantLib's interpolated zero curves). Instantaneous
forwards jump at every interior node (``r`` has a kink there): the price of this method's simplicity.
"""

from __future__ import annotations

import numpy as np

from pipeline.curves.base import Block, gather, segment_index

__all__ = ["LinearZeroBlock"]


class LinearZeroBlock(Block):
    support = (1, 0)

    def __init__(self, times: np.ndarray, zero_cc: np.ndarray) -> None:
        super().__init__(times, zero_cc)
        x, y = self.times, self.zero_cc
        self._slope = np.diff(y, axis=1) / np.diff(x, axis=1)  # (G, n-1)
        # forward at the last node from the left: held flat beyond it
        self._f_last = y[:, -1] + x[:, -1] * self._slope[:, -1]

    def _zero(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x, y = self.times, self.zero_cc
        j = segment_index(x, t)
        x0, y0 = gather(x, j - 1), gather(y, j - 1)
        s = gather(self._slope, j - 1)
        r = y0 + s * (t - x0)
        first = t < x[:, :1]
        r = np.where(first, y[:, :1], r)
        s = np.where(first, 0.0, s)
        return r, s

    def ln_discount(self, t: np.ndarray, loc: np.ndarray | None = None) -> np.ndarray:
        r, _ = self._zero(t)
        x_n, y_n = self.times[:, -1:], self.zero_cc[:, -1:]
        beyond = -(y_n * x_n) - self._f_last[:, None] * (t - x_n)
        return np.where(t > x_n, beyond, -r * t)

    def inst_forward(self, t: np.ndarray) -> np.ndarray:
        r, s = self._zero(t)
        return np.where(t > self.times[:, -1:], self._f_last[:, None], r + t * s)

    def forwards_nonnegative(self) -> np.ndarray:
        # f = d(r t)/dt = r + t r' is linear in t on each segment (r is), r_1 before the first node and
        # f_n after the last: its minimum is one of the segment ends, seen from inside the segment
        x, y, s = self.times, self.zero_cc, self._slope
        left = y[:, :-1] + s * x[:, :-1]
        right = y[:, 1:] + s * x[:, 1:]
        return (y[:, 0] >= 0.0) & np.all(left >= 0.0, axis=1) & np.all(right >= 0.0, axis=1)
