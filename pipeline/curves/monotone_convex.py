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

from pipeline.curves.base import Block, segment_index

__all__ = ["MonotoneConvexBlock", "knot_forwards", "sector_coefficients", "sector_g"]


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


_N_COEF = 8  # eta, e_left, a_left, b_left, c_left, a_right, c_right, G(eta)


def sector_coefficients(g0: np.ndarray, g1: np.ndarray) -> np.ndarray:
    """Hagan-West's ``g`` on one interval as two quadratic pieces, for arrays of ``(g0, g1)``.

    Returns ``(..., 8)``: ``eta`` (where the pieces meet), the left piece
    ``a_l + b_l (x - e_l) + c_l (x - e_l)^2`` on ``[0, eta]``, the right piece
    ``a_r + c_r (x - eta)^2`` on ``(eta, 1]`` and ``G(eta) = integral_0^eta g``. The pieces are
    written about their own vertex so that nearly degenerate sectors (``eta`` close to 0 or 1) keep
    their digits. Sectors as in the paper: (i) a single quadratic; (ii) flat at ``g0`` then up/down
    to ``g1``; (iii) from ``g0`` to ``g1`` then flat; (iv) two quadratics meeting at their extremum.
    """
    g0, g1 = np.broadcast_arrays(np.asarray(g0, dtype=float), np.asarray(g1, dtype=float))
    neg, pos = g0 < 0.0, g0 > 0.0
    z1 = (neg & (-0.5 * g0 <= g1) & (g1 <= -2.0 * g0)) | (pos & (-0.5 * g0 >= g1) & (g1 >= -2.0 * g0))
    z2 = ~z1 & ((neg & (g1 > -2.0 * g0)) | (pos & (g1 < -2.0 * g0)))
    z3 = ~z1 & ~z2 & ((pos & (g1 < 0.0) & (g1 > -0.5 * g0)) | (neg & (g1 > 0.0) & (g1 < -0.5 * g0)))
    z0 = (g0 == 0.0) & (g1 == 0.0)
    z4 = ~(z1 | z2 | z3 | z0)
    with np.errstate(invalid="ignore", divide="ignore"):
        e2 = np.clip((g1 + 2.0 * g0) / _safe(g1 - g0), 0.0, 1.0)
        e3 = np.clip(3.0 * g1 / _safe(g1 - g0), 0.0, 1.0)
        e4 = np.clip(g1 / _safe(g1 + g0), 0.0, 1.0)
        a4 = -g0 * g1 / _safe(g0 + g1)
        eta = np.select([z2, z3, z4], [e2, e3, e4], 1.0)
        # a piece narrower than 1e-12 of the interval is dropped: at a sector's boundary the pieces
        # meet continuously, so this changes g on at most that sliver, and 1 / eta^2 cannot overflow
        eta = np.where(eta < 1e-12, 0.0, np.where(eta > 1.0 - 1e-12, 1.0, eta))
        left_sq = np.where(eta > 0.0, 1.0 / _safe(eta * eta), 0.0)
        right_sq = np.where(eta < 1.0, 1.0 / _safe((1.0 - eta) ** 2), 0.0)
        e_l = np.where(z1 | z0, 0.0, eta)
        a_l = np.select([z1, z2, z3, z4], [g0, g0, g1, a4], 0.0)
        b_l = np.where(z1, -4.0 * g0 - 2.0 * g1, 0.0)
        c_l = np.select([z1, z3, z4], [3.0 * (g0 + g1), (g0 - g1) * left_sq, (g0 - a4) * left_sq], 0.0)
        a_r = np.select([z2, z3, z4], [g0, g1, a4], 0.0)
        c_r = np.select([z2, z4], [(g1 - g0) * right_sq, (g1 - a4) * right_sq], 0.0)
    u = eta - e_l
    g_eta = a_l * eta + b_l * (u * u - e_l * e_l) / 2.0 + c_l * (u**3 + e_l**3) / 3.0
    out = np.stack([eta, e_l, a_l, b_l, c_l, a_r, c_r, g_eta], axis=-1)
    out[z0] = 0.0
    out[..., 0] = np.where(z0, 1.0, out[..., 0])
    return out


def _evaluate(coef: np.ndarray, x: np.ndarray, g0: np.ndarray, g1: np.ndarray, want_g: bool = True):
    """``g(x)`` (None unless ``want_g``) and ``G(x)`` from gathered coefficients (8 arrays, see
    :func:`sector_coefficients`) at ``x`` in ``[0, 1]``."""
    eta, e_l, a_l, b_l, c_l, a_r, c_r, g_eta = coef
    x = np.clip(x, 0.0, 1.0)
    left = x <= eta
    v = x - e_l
    w = np.where(left, 0.0, x - eta)
    G = np.where(
        left,
        a_l * x + b_l * (v * v - e_l * e_l) / 2.0 + c_l * (v**3 + e_l**3) / 3.0,
        g_eta + a_r * w + c_r * w**3 / 3.0,
    )
    # the ends exactly: keeps node values and forward continuity free of rounding in the sectors
    G[(x <= 0.0) | (x >= 1.0)] = 0.0
    if not want_g:
        return None, G
    g = np.where(left, a_l + b_l * v + c_l * v * v, a_r + c_r * w * w)
    g = np.where(x <= 0.0, g0, np.where(x >= 1.0, g1, g))
    return g, G


def _integral_table(table: np.ndarray) -> np.ndarray:
    """From the interval table (rows: the 8 sector coefficients, x0, h, fd, lnd0, g0, g1) the rows
    ``ln_discount`` needs: ``eta``, the left piece's ``G`` as ``x (p1 + x (p2 + x p3))``, ``G(eta)``,
    ``a_r``, ``c_r / 3``, ``x0``, ``h``, ``fd``, ``lnd0``.

    The left piece is expanded about 0: every term is of the order ``|g| x`` on ``[0, eta]`` (its
    large coefficients meet powers of ``x <= eta``), so nothing cancels; the right piece stays about
    ``eta``, where an expansion would cancel ``1 / (1 - eta)^2`` terms.
    """
    eta, e_l, a_l, b_l, c_l, a_r, c_r, g_eta, x0, h, fd, lnd0 = table[:12]
    p1 = a_l - b_l * e_l + c_l * e_l * e_l
    p2 = 0.5 * b_l - c_l * e_l
    p3 = c_l / 3.0
    return np.stack([eta, p1, p2, p3, g_eta, a_r, c_r / 3.0, x0, h, fd, lnd0])


def sector_g(g0: np.ndarray, g1: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Hagan-West ``g(x)`` and its integral ``G(x) = integral_0^x g`` on ``x in [0, 1]``.

    ``g(0) = g0``, ``g(1) = g1`` and ``G(1) = 0``; the sector is chosen from ``(g0, g1)`` as in the paper.
    """
    g0, g1, x = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (g0, g1, x)))
    return _evaluate(np.moveaxis(sector_coefficients(g0, g1), -1, 0), x, g0, g1)


class MonotoneConvexBlock(Block):
    support = (2, 1)

    def __init__(self, times: np.ndarray, zero_cc: np.ndarray, collar: bool = True) -> None:
        super().__init__(times, zero_cc)
        self._collar = collar
        self._x, self._lnd, self._fd, self._f = knot_forwards(self.times, self.zero_cc, collar)
        g0 = self._f[:, :-1] - self._fd
        g1 = self._f[:, 1:] - self._fd
        h = np.diff(self._x, axis=1)
        # one row of everything a point needs per interval, gathered in one fancy-index
        self._table = np.concatenate(
            [sector_coefficients(g0, g1), np.stack([self._x[:, :-1], h, self._fd, self._lnd[:, :-1], g0, g1],
                                                   axis=-1)], axis=-1
        ).reshape(-1, _N_COEF + 6).T.copy()  # (coefficients, G * intervals): contiguous gathers
        self._nseg = h.shape[1]
        self._lntable = _integral_table(self._table)

    @property
    def knot_forwards(self) -> np.ndarray:
        """``(G, n+1)`` instantaneous forwards at ``t = 0`` and at each node (after the collar)."""
        return self._f.copy()

    @property
    def discrete_forwards(self) -> np.ndarray:
        """``(G, n)`` discrete forwards ``fd_i`` between consecutive nodes (from ``t = 0``)."""
        return self._fd.copy()

    def subset(self, rows: np.ndarray) -> MonotoneConvexBlock:
        return MonotoneConvexBlock(self.times[rows], self.zero_cc[rows], self._collar)

    def forwards_nonnegative(self) -> np.ndarray:
        # Hagan & West's positivity result: with every discrete forward positive, the collar keeps each
        # knot forward in [0, 2 min(fd_i, fd_i+1)] and then every sector's f stays >= 0; flat f_n beyond
        if not self._collar:
            return np.zeros(self.times.shape[0], dtype=bool)
        return np.all(self._fd > 0.0, axis=1)

    def locate(self, t: np.ndarray) -> np.ndarray:
        rows = np.arange(t.shape[0])[:, None] * self._nseg
        return rows + segment_index(self._x, t) - 1

    def _local(self, t: np.ndarray, loc: np.ndarray | None, want_g: bool = True):
        row = self._table[:, self.locate(t) if loc is None else loc]
        x0, h, fd, lnd0, g0, g1 = row[_N_COEF:]
        g, G = _evaluate(row[:_N_COEF], (t - x0) / h, g0, g1, want_g)
        return x0, h, fd, lnd0, g, G

    def ln_discount(self, t: np.ndarray, loc: np.ndarray | None = None) -> np.ndarray:
        eta, p1, p2, p3, g_eta, a_r, c_r3, x0, h, fd, lnd0 = self._lntable[:, self.locate(t) if loc is None else loc]
        dt = t - x0
        x = np.clip(dt / h, 0.0, 1.0)
        w = x - eta
        G = np.where(x <= eta, x * (p1 + x * (p2 + x * p3)), g_eta + w * (a_r + c_r3 * (w * w)))
        # the ends exactly: keeps node values and forward continuity free of rounding in the sectors
        G[(x <= 0.0) | (x >= 1.0)] = 0.0
        inside = lnd0 - fd * dt - h * G
        x_n, l_n, f_n = self._x[:, -1:], self._lnd[:, -1:], self._f[:, -1:]
        out = np.where(t > x_n, l_n - f_n * (t - x_n), inside)
        return np.where(t < 0.0, -self._f[:, :1] * t, out)

    def inst_forward(self, t: np.ndarray) -> np.ndarray:
        _, _, fd, _, g, _ = self._local(t, None)
        out = np.where(t > self._x[:, -1:], self._f[:, -1:], fd + g)
        return np.where(t < 0.0, self._f[:, :1], out)
