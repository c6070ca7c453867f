"""``monotone_convex``: the Hagan & West (2006) monotone convex method, with the positivity collar.

Hagan, P. S. and West, G., "Interpolation Methods for Curve Construction", *Applied Mathematical
Finance* 13(2), 2006. From node times ``t_1 < ... < t_n`` and zero rates (``t_0 = 0`` with
``t_0 r_0 = 0`` is the method's own first node):

* discrete forwards ``fd_i = (t_i r_i - t_{i-1} r_{i-1}) / (t_i - t_{i-1})``;
* knot forwards ``f_i = [(t_i - t_{i-1}) fd_{i+1} + (t_{i+1} - t_i) fd_i] / (t_{i+1} - t_{i-1})``,
  ``f_0 = fd_1 - (f_1 - fd_1) / 2``, ``f_n = fd_n - (f_{n-1} - fd_n) / 2``;
* the collar ``f_0 in [0, 2 fd_1]``, ``f_i in [0, 2 min(fd_i, fd_{i+1})]``, ``f_n in [0, 2 fd_n]``,
  applied where those bounds are positive (with positive discrete forwards it keeps every
  instantaneous forward positive; where a discrete forward is negative positivity cannot hold and the
  knot forward is left as it is);
* on each interval, with ``x = (t - t_{i-1}) / (t_i - t_{i-1})``, ``g0 = f_{i-1} - fd_i``,
  ``g1 = f_i - fd_i``: ``f(t) = fd_i + g(x)`` where ``g`` is the paper's four-sector construction
  (a quadratic, or piecewise flat-then-quadratic), with ``integral_0^1 g = 0`` so every node's
  discrete forward, hence every input zero rate, is reproduced exactly, and ``f`` is continuous.

Extrapolation: the method covers ``[0, t_1]`` by itself (no flat-zero region: the paper treats
``t_0 = 0`` as a node); after the last node the forward is held flat at ``f_n``, which keeps the
forward curve continuous.
"""

from __future__ import annotations

import numpy as np

from pipeline.curves.base import Block, gather, segment_index

__all__ = ["MonotoneConvexBlock", "knot_forwards", "sector_g"]


def knot_forwards(times: np.ndarray, zero_cc: np.ndarray, collar: bool = True) -> tuple[np.ndarray, ...]:
    """``(x, lnd, fd, f)``: knots with ``t_0 = 0`` prepended ``(G, n+1)``, log discounts ``(G, n+1)``,
    discrete forwards ``(G, n)`` (``fd[:, i-1]`` is ``fd_i``) and knot forwards ``(G, n+1)``."""
    g, n = times.shape
    x = np.hstack([np.zeros((g, 1)), times])
    lnd = np.hstack([np.zeros((g, 1)), -zero_cc * times])
    h = np.diff(x, axis=1)
    fd = -np.diff(lnd, axis=1) / h
    f = np.empty((g, n + 1))
    if n == 1:
        f[:] = fd
        return x, lnd, fd, f
    f[:, 1:-1] = (h[:, :-1] * fd[:, 1:] + h[:, 1:] * fd[:, :-1]) / (h[:, :-1] + h[:, 1:])
    f[:, 0] = fd[:, 0] - 0.5 * (f[:, 1] - fd[:, 0])
    f[:, -1] = fd[:, -1] - 0.5 * (f[:, -2] - fd[:, -1])
    if collar:
        upper = np.empty_like(f)
        upper[:, 0] = 2.0 * fd[:, 0]
        upper[:, -1] = 2.0 * fd[:, -1]
        upper[:, 1:-1] = 2.0 * np.minimum(fd[:, :-1], fd[:, 1:])
        f = np.where(upper > 0.0, np.clip(f, 0.0, np.maximum(upper, 0.0)), f)
    return x, lnd, fd, f


def _safe(d: np.ndarray) -> np.ndarray:
    return np.where(d == 0.0, 1.0, d)


def sector_g(g0: np.ndarray, g1: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Hagan-West ``g(x)`` and its integral ``G(x) = integral_0^x g`` on ``x in [0, 1]``.

    ``g(0) = g0``, ``g(1) = g1`` and ``G(1) = 0``; the sector is chosen from ``(g0, g1)`` as in the paper.
    """
    x = np.clip(x, 0.0, 1.0)
    neg, pos = g0 < 0.0, g0 > 0.0
    z1 = (neg & (-0.5 * g0 <= g1) & (g1 <= -2.0 * g0)) | (pos & (-0.5 * g0 >= g1) & (g1 >= -2.0 * g0))
    z2 = ~z1 & ((neg & (g1 > -2.0 * g0)) | (pos & (g1 < -2.0 * g0)))
    z3 = ~z1 & ~z2 & ((pos & (g1 < 0.0) & (g1 > -0.5 * g0)) | (neg & (g1 > 0.0) & (g1 < -0.5 * g0)))
    z0 = (g0 == 0.0) & (g1 == 0.0)

    with np.errstate(invalid="ignore", divide="ignore"):
        # sector (i): a quadratic
        g_1 = g0 * (1.0 - 4.0 * x + 3.0 * x * x) + g1 * (-2.0 * x + 3.0 * x * x)
        G_1 = g0 * (x - 2.0 * x * x + x**3) + g1 * (-x * x + x**3)
        # sector (ii): flat at g0, then a quadratic up to g1
        eta2 = np.clip((g1 + 2.0 * g0) / _safe(g1 - g0), 0.0, 1.0)
        w2 = np.clip((x - eta2) / _safe(1.0 - eta2), 0.0, None)
        g_2 = g0 + (g1 - g0) * w2 * w2
        G_2 = g0 * x + (g1 - g0) * (1.0 - eta2) * w2**3 / 3.0
        # sector (iii): a quadratic from g0 down to g1, then flat at g1
        eta3 = np.clip(3.0 * g1 / _safe(g1 - g0), 0.0, 1.0)
        w3 = np.clip((eta3 - x) / _safe(eta3), 0.0, None)
        g_3 = g1 + (g0 - g1) * w3 * w3
        G_3 = g1 * x + (g0 - g1) * eta3 / 3.0 * (1.0 - w3**3)
        # sector (iv): two quadratics meeting at their common extremum A
        eta4 = np.clip(g1 / _safe(g1 + g0), 0.0, 1.0)
        a4 = -g0 * g1 / _safe(g0 + g1)
        left = x <= eta4
        wl = np.where(left, (eta4 - x) / _safe(eta4), 0.0)
        wr = np.where(left, 0.0, (x - eta4) / _safe(1.0 - eta4))
        g_4 = np.where(left, a4 + (g0 - a4) * wl * wl, a4 + (g1 - a4) * wr * wr)
        G_4 = a4 * x + (g0 - a4) * eta4 / 3.0 * (1.0 - wl**3) + (g1 - a4) * (1.0 - eta4) * wr**3 / 3.0

    g = np.where(z1, g_1, np.where(z2, g_2, np.where(z3, g_3, g_4)))
    G = np.where(z1, G_1, np.where(z2, G_2, np.where(z3, G_3, G_4)))
    g = np.where(z0, 0.0, g)
    G = np.where(z0, 0.0, G)
    # the ends exactly: keeps node values and forward continuity free of rounding in the sectors
    g = np.where(x <= 0.0, g0, np.where(x >= 1.0, g1, g))
    G = np.where((x <= 0.0) | (x >= 1.0), 0.0, G)
    return g, G


class MonotoneConvexBlock(Block):
    def __init__(self, times: np.ndarray, zero_cc: np.ndarray, collar: bool = True) -> None:
        super().__init__(times, zero_cc)
        self._x, self._lnd, self._fd, self._f = knot_forwards(self.times, self.zero_cc, collar)

    @property
    def knot_forwards(self) -> np.ndarray:
        """``(G, n+1)`` instantaneous forwards at ``t = 0`` and at each node (after the collar)."""
        return self._f.copy()

    @property
    def discrete_forwards(self) -> np.ndarray:
        """``(G, n)`` discrete forwards ``fd_i`` between consecutive nodes (from ``t = 0``)."""
        return self._fd.copy()

    def _local(self, t: np.ndarray):
        j = segment_index(self._x, t)
        x0, x1 = gather(self._x, j - 1), gather(self._x, j)
        fd = gather(self._fd, j - 1)
        g0 = gather(self._f, j - 1) - fd
        g1 = gather(self._f, j) - fd
        h = x1 - x0
        g, G = sector_g(g0, g1, (t - x0) / h)
        return j, x0, h, fd, g, G

    def ln_discount(self, t: np.ndarray) -> np.ndarray:
        j, x0, h, fd, _, G = self._local(t)
        inside = gather(self._lnd, j - 1) - fd * (t - x0) - h * G
        x_n, l_n, f_n = self._x[:, -1:], self._lnd[:, -1:], self._f[:, -1:]
        out = np.where(t > x_n, l_n - f_n * (t - x_n), inside)
        return np.where(t < 0.0, -self._f[:, :1] * t, out)

    def inst_forward(self, t: np.ndarray) -> np.ndarray:
        _, _, _, fd, g, _ = self._local(t)
        out = np.where(t > self._x[:, -1:], self._f[:, -1:], fd + g)
        return np.where(t < 0.0, self._f[:, :1], out)
