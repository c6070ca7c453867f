"""The one curve interface: a set of curves, one per as-of day, answering discount factors.

Every method builds *blocks*: a block holds the curves of a group of days that share the same
pattern of available tenors, as arrays of node times ``(G, n)`` and node zero rates ``(G, n)``
(continuously compounded, on the curve's day count). A block answers ``ln_discount(t)`` (the log of
the discount factor, ``-integral_0^t f(s) ds``) and ``inst_forward(t)`` for times ``(G, K)``.

:class:`CurveSet` stitches the blocks of all days together and derives everything else (discount
factors, zero rates and forward rates in any compounding) from ``ln_discount``: the log is kept
instead of the discount factor itself so that short-end rates do not lose digits to ``1 - D``.
Its methods take year fractions or dates: a date is turned into the year fraction from each day's
as-of date on the curve's day count, so a caller never converts by hand.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

from pipeline.compounding import from_continuous
from pipeline.dates import as_days, year_fraction
from pipeline.errors import ArgumentError

__all__ = ["Block", "CurveSet", "gather", "segment_index"]


class Block:
    """Curves of ``G`` days sharing one node pattern; subclasses implement the interpolation.

    ``times``: ``(G, n)`` year fractions of the nodes from each as-of date, strictly increasing
    along each row. ``zero_cc``: ``(G, n)`` continuously compounded zero rates at those nodes.
    """

    def __init__(self, times: np.ndarray, zero_cc: np.ndarray) -> None:
        self.times = np.array(times, dtype=float)
        self.zero_cc = np.array(zero_cc, dtype=float)

    #: nodes a time depends on, as ``(a, b)``: a time in ``(t_{j-1}, t_j]`` depends on nodes
    #: ``j-a .. j+b`` only (``None``: on every node). The par bootstrap uses it to get its Jacobian
    #: from a few evaluations.
    support: tuple[int, int] | None = None

    def locate(self, t: np.ndarray) -> np.ndarray | None:
        """Precomputed positions of times ``t`` among the nodes, reusable by :meth:`ln_discount` for
        any block with the same node times (``None`` when a method has nothing to precompute)."""
        return None

    def ln_discount(self, t: np.ndarray, loc: np.ndarray | None = None) -> np.ndarray:  # pragma: no cover
        raise NotImplementedError

    def inst_forward(self, t: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def zero_at_zero(self) -> np.ndarray:
        """The limit of the continuous zero rate as ``t -> 0`` (``(G,)``): the short rate."""
        return self.inst_forward(np.zeros((self.times.shape[0], 1)))[:, 0]

    def subset(self, rows: np.ndarray) -> Block:
        """The block of only ``rows`` (indices into its ``G`` curves), each curve unchanged."""
        return type(self)(self.times[rows], self.zero_cc[rows])

    def forwards_nonnegative(self) -> np.ndarray:
        """``(G,)`` bool: True where the method's construction guarantees an instantaneous forward
        ``f(t) >= 0`` for every ``t >= 0`` (so discount factors never rise with maturity). False
        means "not known", not "negative somewhere"; the default knows nothing."""
        return np.zeros(self.times.shape[0], dtype=bool)


def segment_index(knots: np.ndarray, t: np.ndarray) -> np.ndarray:
    """For knots ``(G, n)`` and times ``(G, K)``: the index ``j`` in ``[1, n-1]`` of the segment
    ``[knots[j-1], knots[j]]`` holding each time (right-closed at interior knots belongs to the
    segment on the right; times outside the knots get the end segments)."""
    n = knots.shape[1]
    count = np.zeros(t.shape, dtype=np.int64)
    for j in range(n):  # a handful of nodes: a loop over nodes, not over days
        count += t >= knots[:, j : j + 1]
    return np.clip(count, 1, n - 1)


def gather(values: np.ndarray, index: np.ndarray) -> np.ndarray:
    """``values[g, index[g, k]]`` for ``values`` ``(G, n)`` and ``index`` ``(G, K)``."""
    return np.take_along_axis(values, index, axis=1)


class CurveSet:
    """One curve per as-of day (``D`` days); the one primitive is :meth:`discount`.

    Attributes
    ----------
    as_of : ``(D,)`` ``datetime64[D]``
    method : the interpolation method's name (one of ``pipeline.config.INTERPOLATIONS``)
    ok : ``(D,)`` bool, False where the day could not be built
    reason : per day, why it is not ok (``None`` where ok)
    params : ``(D, n_params)`` method parameters per day (NSS: ``b0, b1, b2, b3, tau1, tau2``, rates
        as decimals, taus in years; NaN on days not built) or ``None`` for the node-based methods
    day_count : the day count of the year fractions every method takes and returns

    Times ``t`` are year fractions from each day's as-of date on the curve's day count, shaped
    ``(D, K)``; a 1-D array of ``K`` times is shared by every day. Results are ``(D, K)``, NaN on
    days that are not ok.
    """

    def __init__(
        self,
        as_of: np.ndarray,
        method: str,
        ok: np.ndarray,
        reason: list[str | None],
        blocks: Sequence[tuple[np.ndarray, Block]],
        params: np.ndarray | None = None,
        day_count: str = "ACT/365F",
    ) -> None:
        self.as_of = np.asarray(as_of, dtype="datetime64[D]")
        self.method = method
        self.ok = np.asarray(ok, dtype=bool)
        self.reason = list(reason)
        self.params = params
        self.day_count = day_count
        self._blocks = list(blocks)

    def __len__(self) -> int:
        return self.as_of.shape[0]

    def __repr__(self) -> str:
        return f"CurveSet(method={self.method!r}, days={len(self)}, ok={int(self.ok.sum())})"

    @property
    def blocks(self) -> list[tuple[np.ndarray, Block]]:
        """``(day_indices, block)`` pairs; each built day is in exactly one block."""
        return list(self._blocks)

    # --- evaluation --------------------------------------------------------------------------------
    @staticmethod
    def _dates(t: object) -> np.ndarray | None:
        """``t`` as ``datetime64[D]`` when it holds dates, else None (it holds year fractions)."""
        arr = np.asarray(t)
        if arr.dtype.kind in "biuf":
            return None
        if arr.dtype == object:
            try:  # numbers held as objects (a mixed list) are year fractions
                arr.astype(float)
                return None
            except (TypeError, ValueError):
                pass
        try:
            return as_days(arr)
        except (TypeError, ValueError):
            raise ArgumentError(f"not a date (YYYY-MM-DD) or a year fraction: {arr.reshape(-1)[:3].tolist()!r}"
                                ) from None

    def _times(self, t: object) -> np.ndarray:
        days = self._dates(t)
        if days is not None:
            shaped = days.reshape(1, 1) if days.ndim == 0 else days.reshape(1, -1) if days.ndim == 1 else days
            if shaped.ndim != 2 or shaped.shape[0] not in (1, len(self)):
                raise ValueError(f"dates must be (D, K) with D = {len(self)} or (K,), got {days.shape}")
            t = year_fraction(self.as_of[:, None], shaped, self.day_count)
        arr = np.asarray(t, dtype=float)
        if arr.ndim == 0:
            arr = arr.reshape(1, 1)
        elif arr.ndim == 1:
            arr = arr.reshape(1, -1)
        if arr.ndim != 2 or arr.shape[0] not in (1, len(self)):
            raise ValueError(f"times must be (D, K) with D = {len(self)} or (K,), got {arr.shape}")
        return np.broadcast_to(arr, (len(self), arr.shape[1]))

    def _apply(self, t: np.ndarray, fn: Callable[[Block, np.ndarray], np.ndarray]) -> np.ndarray:
        out = np.full(t.shape, np.nan)
        for idx, block in self._blocks:  # one block per pattern of tenors, not per day
            out[idx] = fn(block, t[idx])
        return out

    def ln_discount(self, t: object) -> np.ndarray:
        """``ln D(t)`` for times ``t`` ``(D, K)``."""
        return self._apply(self._times(t), lambda b, x: b.ln_discount(x))

    def ln_discount_rows(self, rows: object, t: object) -> np.ndarray:
        """``ln D(t)`` of only the days ``rows`` (``(R,)`` distinct indices into the ``D`` days) for
        times ``t`` ``(R, K)`` (or ``(K,)`` shared): ``ln_discount(full)[rows]`` where ``full`` holds
        ``t`` in those rows, without evaluating the other days. NaN for rows that are not ok."""
        rows = np.asarray(rows, dtype=np.int64).reshape(-1)
        tt = np.asarray(t, dtype=float)
        tt = np.broadcast_to(tt.reshape(1, -1) if tt.ndim == 1 else tt, (rows.size, tt.shape[-1]))
        out = np.full(tt.shape, np.nan)
        where = np.full(len(self), -1, dtype=np.int64)
        where[rows] = np.arange(rows.size)
        for idx, block in self._blocks:  # one block per pattern of tenors, not per day
            pos = where[idx]
            mine = pos >= 0
            if mine.all():
                out[pos] = block.ln_discount(tt[pos])
            elif mine.any():
                out[pos[mine]] = block.subset(np.flatnonzero(mine)).ln_discount(tt[pos[mine]])
        return out

    def forwards_nonnegative(self) -> np.ndarray:
        """``(D,)`` bool: True on ok days whose method guarantees ``f(t) >= 0`` for all ``t >= 0``
        (see :meth:`Block.forwards_nonnegative`); such a curve cannot fail a shape check."""
        out = np.zeros(len(self), dtype=bool)
        for idx, block in self._blocks:
            out[idx] = block.forwards_nonnegative()
        return out

    def discount(self, t: object) -> np.ndarray:
        """Discount factors ``D(t)`` for year fractions ``t`` ``(D, K)`` from each as-of date."""
        return np.exp(self.ln_discount(t))

    def zero_rate(self, t: object, compounding: str = "continuous") -> np.ndarray:
        """Zero rates (decimals) to ``t`` in ``compounding``: ``discount_from_rate(z, comp, t) == D(t)``.

        At ``t == 0`` the limit is returned (the short rate, converted over a zero-length period).
        """
        tt = self._times(t)
        ln_d = self.ln_discount(tt)
        with np.errstate(invalid="ignore", divide="ignore"):
            rcc = -ln_d / np.where(tt == 0.0, np.nan, tt)
        if np.any(tt == 0.0):
            short = self._apply(np.zeros((len(self), 1)), lambda b, x: b.zero_at_zero()[:, None])
            rcc = np.where(tt == 0.0, short, rcc)
        return from_continuous(rcc, compounding, tt)

    def forward_rate(self, t1: object, t2: object, compounding: str = "continuous") -> np.ndarray:
        """Forward rate over ``[t1, t2]`` from ``D(t1) / D(t2)`` with ``tau = t2 - t1``, in
        ``compounding``. When both ends are dates, ``tau = year_fraction(t1, t2, day_count)`` (the
        accrual of the period itself, as the stored forwards have it; on 30/360 it can differ from
        the difference of the two times). Where ``t1 == t2`` the instantaneous forward is returned."""
        a, b = self._times(t1), self._times(t2)
        a, b = np.broadcast_arrays(a, b)
        d1, d2 = self._dates(t1), self._dates(t2)
        if d1 is not None and d2 is not None:
            tau = np.broadcast_to(year_fraction(d1, d2, self.day_count), a.shape)
        else:
            tau = b - a
        with np.errstate(invalid="ignore", divide="ignore"):
            rcc = (self.ln_discount(a) - self.ln_discount(b)) / np.where(tau == 0.0, np.nan, tau)
        if np.any(tau == 0.0):
            rcc = np.where(tau == 0.0, self.instantaneous_forward(a), rcc)
        return from_continuous(rcc, compounding, tau)

    def instantaneous_forward(self, t: object) -> np.ndarray:
        """Instantaneous forward rates ``f(t) = -d ln D / dt`` (continuous compounding), ``(D, K)``."""
        return self._apply(self._times(t), lambda b, x: b.inst_forward(x))
