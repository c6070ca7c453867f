"""``build_curves``: from each day's quotes to a :class:`CurveSet`, all days at once.

Days are grouped by their pattern of usable tenors (a handful of patterns in practice: the full set
and a few with a missing quote); each group is built as one block of arrays, so the work is
vectorised over days and the only Python loops run over patterns, tenors and nodes. The one
exception is the NSS fit, which visits days in date order (see :mod:`pipeline.curves.nss`).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from pipeline.bootstrap import bootstrap_par
from pipeline.compounding import to_continuous
from pipeline.curves.base import Block, CurveSet
from pipeline.curves.methods import BLOCKS, METHOD_NAMES, NSS_BOOTSTRAP_METHOD
from pipeline.curves.nss import NSSBlock, fit_nss
from pipeline.dates import as_days, maturity_dates, year_fraction
from pipeline.tenors import Tenor, parse_tenor

if TYPE_CHECKING:  # the config imports the registered methods
    from pipeline.config import CurveConfig

__all__ = ["BLOCKS", "build_curves", "curves_from_nodes", "curves_from_stored", "node_zero_rates", "nss_curves"]

MIN_QUOTES = 2
QUOTE_KINDS = ("zero", "par", "discount", "simple")   # what a curve's numbers are (the config's ``quote``)


def node_zero_rates(quotes: np.ndarray, times: np.ndarray, cfg: CurveConfig) -> np.ndarray:
    """Continuous zero rates ``(D, T)`` implied by non-par quotes of kind ``cfg.quote``.

    ``zero``: in ``cfg.compounding``; ``discount``: ``D`` as given; ``simple``: ``D = 1 / (1 + r tau)``.
    NaN where the quote is missing or admits no positive discount factor.
    """
    q = np.asarray(quotes, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        if cfg.quote == "zero":
            return to_continuous(q, cfg.compounding, times)
        if cfg.quote == "discount":
            return -np.log(np.where(q > 0.0, q, np.nan)) / times
        if cfg.quote == "simple":
            return to_continuous(q, "simple", times)
    raise ValueError(f"quote kind {cfg.quote!r} has no direct zero rate; allowed: zero, discount, simple")


def _block_for(method: str) -> type[Block]:
    return BLOCKS[NSS_BOOTSTRAP_METHOD if method == "nss" else method]


def build_curves(
    as_of: object,
    tenors: Sequence[Tenor | str],
    quotes: np.ndarray,
    cfg: CurveConfig,
    method: str | None = None,
    warm_start: np.ndarray | None = None,
) -> CurveSet:
    """Build one curve per as-of day.

    Parameters
    ----------
    as_of : ``(D,)`` dates (``datetime64[D]`` or anything :func:`pipeline.dates.as_days` takes).
    tenors : ``T`` tenors (:class:`~pipeline.tenors.Tenor` or labels), in any order.
    quotes : ``(D, T)`` decimals, NaN = missing, of kind ``cfg.quote``: ``zero`` rates in
        ``cfg.compounding``; ``par`` yields with ``cfg.coupons_per_year`` coupons a year (see
        :mod:`pipeline.bootstrap`); ``discount`` factors; ``simple`` money-market rates.
    cfg : the curve's conventions: ``day_count``, ``calendar``, ``compounding``, ``quote``, and
        ``interpolation`` unless ``method`` is given.
    method : one of ``pipeline.curves.methods.METHOD_NAMES``; overrides ``cfg.interpolation``.
    warm_start : NSS only: a ``(6,)`` parameter vector (the previous built day's) to start from.

    Maturities are ``maturity_dates(as_of, tenor, cfg.calendar)``; node times are
    ``year_fraction(as_of, maturity, cfg.day_count)``. A day is not ok (``CurveSet.ok`` False, with a
    reason) when fewer than two quotes are usable, when two tenors mature on the same date, when a par
    bootstrap does not converge or when an NSS fit fails. Inputs are never modified.
    """
    method = method or cfg.interpolation
    if method not in METHOD_NAMES:
        raise ValueError(f"unknown interpolation {method!r}; allowed: {', '.join(METHOD_NAMES)}")
    if cfg.quote not in QUOTE_KINDS:
        raise ValueError(f"unknown quote kind {cfg.quote!r}; allowed: {', '.join(QUOTE_KINDS)}")
    days = as_days(as_of).reshape(-1)
    parsed = [parse_tenor(t) for t in tenors]
    q_in = np.asarray(quotes, dtype=float)
    if q_in.shape != (days.shape[0], len(parsed)):
        raise ValueError(f"quotes must be (D, T) = ({days.shape[0]}, {len(parsed)}), got {q_in.shape}")
    order = sorted(range(len(parsed)), key=lambda j: parsed[j])
    parsed = [parsed[j] for j in order]
    q = q_in[:, order]
    n_days = days.shape[0]

    times = np.column_stack(
        [year_fraction(days, maturity_dates(days, t, cfg.calendar), cfg.day_count) for t in parsed]
    ) if parsed else np.empty((n_days, 0))

    with np.errstate(invalid="ignore"):
        if cfg.quote == "par":
            m = cfg.coupons_per_year
            if not m:
                raise ValueError(
                    f"curve {cfg.name!r}: par quotes need a coupon frequency; compounding = "
                    f"{cfg.compounding!r} has none (set coupon_frequency: annual, semiannual, quarterly or monthly)"
                )
            direct = None
            usable = np.isfinite(q) & (times > 0.0) & (1.0 + q / m > 0.0)
        else:
            direct = node_zero_rates(q, times, cfg)
            usable = np.isfinite(direct) & (times > 0.0)

    ok = np.zeros(n_days, dtype=bool)
    reason: list[str | None] = ["not built"] * n_days
    blocks: list[tuple[np.ndarray, Block]] = []
    nss_times = np.full(q.shape, np.nan)
    nss_zero = np.full(q.shape, np.nan)
    make = _block_for(method)

    if n_days:
        patterns, inverse = np.unique(usable, axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
    else:
        patterns, inverse = np.zeros((0, len(parsed)), dtype=bool), np.zeros(0, dtype=np.int64)
    for p, pattern in enumerate(patterns):  # a loop over patterns of tenors, not over days
        rows = np.flatnonzero(inverse == p)
        cols = np.flatnonzero(pattern)
        if cols.size < MIN_QUOTES:
            for r in rows:
                reason[r] = f"{cols.size} usable quote(s); at least {MIN_QUOTES} are needed"
            continue
        t = times[np.ix_(rows, cols)]
        increasing = np.all(np.diff(t, axis=1) > 0.0, axis=1)
        for r in rows[~increasing]:
            reason[r] = "two tenors mature on the same date"
        rows, t = rows[increasing], t[increasing]
        if rows.size == 0:
            continue
        if direct is None:
            chosen = [parsed[j] for j in cols]
            t, z, conv = bootstrap_par(days[rows], chosen, q[np.ix_(rows, cols)], cfg, make)
            for r in rows[~conv]:
                reason[r] = "par bootstrap did not converge"
            rows, t, z = rows[conv], t[conv], z[conv]
            if rows.size == 0:
                continue
        else:
            z = direct[np.ix_(rows, cols)]
        if method == "nss":
            nss_times[np.ix_(rows, cols)] = t
            nss_zero[np.ix_(rows, cols)] = z
            continue
        blocks.append((rows, make(t, z)))
        ok[rows] = True
        for r in rows:
            reason[r] = None

    params = None
    if method == "nss":
        params = np.full((n_days, 6), np.nan)
        ready = np.flatnonzero(np.isfinite(nss_times).any(axis=1))
        chrono = ready[np.argsort(days[ready], kind="stable")]
        fitted, good = fit_nss(nss_times[chrono], nss_zero[chrono], warm_start)
        params[chrono] = fitted
        for r in chrono[~good]:
            reason[r] = "NSS fit failed"
        done = np.sort(chrono[good])
        if done.size:
            blocks.append((done, NSSBlock(params[done], nss_times[done], nss_zero[done])))
        ok[done] = True
        for r in done:
            reason[r] = None

    return CurveSet(days, method, ok, reason, blocks, params=params, day_count=cfg.day_count)


def nss_curves(as_of: object, params: np.ndarray, day_count: str = "ACT/365F") -> CurveSet:
    """A :class:`CurveSet` from stored NSS parameters ``(D, 6)`` (decimals, taus in years); days with
    any NaN parameter are not ok."""
    days = as_days(as_of).reshape(-1)
    p = np.asarray(params, dtype=float).reshape(days.shape[0], 6)
    good = np.all(np.isfinite(p), axis=1)
    idx = np.flatnonzero(good)
    blocks = [(idx, NSSBlock(p[idx]))] if idx.size else []
    reason = [None if g else "no NSS parameters" for g in good]
    return CurveSet(days, "nss", good, reason, blocks, params=p.copy(), day_count=day_count)


def curves_from_nodes(
    as_of: object, times: np.ndarray, zero_cc: np.ndarray, method: str, day_count: str = "ACT/365F"
) -> CurveSet:
    """A :class:`CurveSet` straight from node times ``(D, n)`` (year fractions, increasing along each
    row) and continuous zero rates ``(D, n)``, all days sharing the node count; ``method`` is a
    node-based method (not ``nss``: use :func:`nss_curves`)."""
    days = as_days(as_of).reshape(-1)
    t = np.asarray(times, dtype=float).reshape(days.shape[0], -1)
    z = np.asarray(zero_cc, dtype=float).reshape(t.shape)
    block = BLOCKS[method](t, z)
    ok = np.ones(days.shape[0], dtype=bool)
    return CurveSet(days, method, ok, [None] * days.shape[0], [(np.arange(days.shape[0]), block)],
                    day_count=day_count)


def curves_from_stored(
    as_of: object, methods: Sequence[str], times: np.ndarray, zero_cc: np.ndarray,
    nss_params: np.ndarray | None = None, day_count: str = "ACT/365F",
) -> CurveSet:
    """One :class:`CurveSet` again from what the build stored: each day's method, its node times
    ``(D, n)`` (year fractions on ``day_count``, increasing along each row) and continuous zero rates
    ``(D, n)`` at the quoted tenors, and for ``nss`` days their parameters ``(D, 6)``.

    Days are grouped by method (one block per method, no loop over days). A node-based day is its
    interpolation through the stored nodes, the same curve the build made when every quote was
    there (the build's nodes are the quoted tenors; a day that lacked a quote was built without that
    node, and its stored value there lies on its curve, so the rebuilt curve differs from the
    original only between nodes, and not at all for ``linear_zero``). Days with non-finite nodes or
    (``nss``) parameters are not ok.
    """
    days = as_days(as_of).reshape(-1)
    meth = np.asarray(list(methods), dtype=object).reshape(-1)
    t = np.asarray(times, dtype=float).reshape(days.shape[0], -1)
    z = np.asarray(zero_cc, dtype=float).reshape(t.shape)
    p = None if nss_params is None else np.asarray(nss_params, dtype=float).reshape(days.shape[0], 6)
    ok = np.zeros(days.shape[0], dtype=bool)
    blocks: list[tuple[np.ndarray, Block]] = []
    for m in sorted(set(meth.tolist())):  # one block per stored method (one in practice)
        rows = np.flatnonzero(meth == m)
        if m == "nss":
            good = p is not None
            if good:
                rows = rows[np.all(np.isfinite(p[rows]), axis=1)]
            if good and rows.size:
                blocks.append((rows, NSSBlock(p[rows])))
                ok[rows] = True
            continue
        if m not in BLOCKS:
            raise ValueError(f"unknown stored method {m!r}; allowed: {', '.join(METHOD_NAMES)}")
        rows = rows[np.all(np.isfinite(t[rows]) & np.isfinite(z[rows]), axis=1)
                    & np.all(np.diff(t[rows], axis=1) > 0.0, axis=1)]
        if rows.size:
            blocks.append((rows, BLOCKS[m](t[rows], z[rows])))
            ok[rows] = True
    reason = [None if g else "no usable stored nodes" for g in ok]
    label = str(meth[0]) if len(set(meth.tolist())) == 1 else "mixed"
    return CurveSet(days, label, ok, reason, blocks, params=p, day_count=day_count)
