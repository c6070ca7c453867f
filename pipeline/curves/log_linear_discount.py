"""``log_linear_discount``: log discount factors linear in time between nodes (piecewise-flat forwards).

The node ``(0, ln D = 0)`` is implied, so the first segment's forward equals the first node's zero
rate: flat zero before the first node. After the last node the last segment's forward is held flat
(flat forward), which is the same straight line in ``ln D`` continued.
"""

from __future__ import annotations

import numpy as np

from pipeline.curves.base import Block, gather, segment_index

__all__ = ["LogLinearDiscountBlock"]


class LogLinearDiscountBlock(Block):
    support = (1, 0)

    def __init__(self, times: np.ndarray, zero_cc: np.ndarray) -> None:
        super().__init__(times, zero_cc)
        g = self.times.shape[0]
        self._x = np.hstack([np.zeros((g, 1)), self.times])
        self._lnd = np.hstack([np.zeros((g, 1)), -self.zero_cc * self.times])
        self._fwd = -np.diff(self._lnd, axis=1) / np.diff(self._x, axis=1)  # (G, n) segment forwards

    def ln_discount(self, t: np.ndarray, loc: np.ndarray | None = None) -> np.ndarray:
        j = segment_index(self._x, t)
        return gather(self._lnd, j - 1) - gather(self._fwd, j - 1) * (t - gather(self._x, j - 1))

    def inst_forward(self, t: np.ndarray) -> np.ndarray:
        return gather(self._fwd, segment_index(self._x, t) - 1)

    def zero_at_zero(self) -> np.ndarray:
        return self._fwd[:, 0].copy()

    def forwards_nonnegative(self) -> np.ndarray:
        return np.all(self._fwd >= 0.0, axis=1)  # the forward is flat on each segment and beyond
