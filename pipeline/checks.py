"""Curve-level data checks: pure functions over a days x tenors panel of quotes.

Every check returns a *findings* frame with the columns of the ``findings`` view (less ``curve``,
which the caller adds):

``as_of``      the day the finding is about (a pandas datetime64 column of whole days)
``check_name`` one of :data:`CHECKS`
``severity``   ``reject`` | ``warn`` | ``info``, from ``cfg.severity[check_name]``
``tenor``      canonical label, ``"SHORT/LONG"`` for an inversion pair, or ``None`` for a whole day
``detail``     one human-readable line

Inputs follow one convention: ``as_of`` is a sorted ``(D,)`` array of observed days
(``datetime64[D]``), ``tenors`` a sequence of ``T`` canonical labels, ``rates`` a ``(D, T)`` float
array of decimals (0.0525 = 5.25 %) with ``NaN`` for a missing quote, holding the latest version of
each quote, as quoted (par, zero, simple rate, or discount factor). Moves and spreads are reported in
basis points. For a ``quote = "discount"`` curve the move, outlier and inversion checks compare the
continuously compounded zero rates implied by the discount factors over the tenor's approximate
length (``Tenor.approx_days / 365.25``): a screening measure, not a pricing one.

The checks are vectorised over days; loops run over tenors or inversion pairs only. No input array
is modified.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from pipeline.dates import as_days
from pipeline.tenors import parse_tenor

if TYPE_CHECKING:  # the config imports this module's registry
    from pipeline.config import CurveConfig

__all__ = [
    "CHECKS",
    "Check",
    "FINDING_COLUMNS",
    "EPISODE_COLUMNS",
    "curve_checks",
    "curve_shape_checks",
    "duplicate_findings",
    "empty_findings",
    "inversion_episodes",
    "inversions",
    "pair_spreads",
    "pairs_inverted_first",
    "jumps",
    "missing_days",
    "missing_tenors",
    "stale_curves",
]



@dataclass(frozen=True)
class Check:
    """A check's declaration: its ``findings.check_name``, the severity it has unless
    ``checks.severity.<name>`` says otherwise, what raises it, and whether ``afterward check`` closes
    its open findings on the days it re-checks (``rechecked``) so they are raised afresh."""

    name: str
    severity: str
    raised_by: str          # load | check | build | daily
    rechecked: bool = False


# Every check, once. The config derives its keys and defaults from this; the check step derives which
# findings a re-check closes. A new check is one line here and its function below (or in intake).
CHECKS = (
    Check("unparseable", "reject", "load"),            # pipeline.readers / pipeline.expectations
    Check("out_of_range", "reject", "load"),           # pipeline.expectations
    Check("duplicate", "warn", "load"),                # pipeline.intake
    Check("missing_day", "warn", "check", rechecked=True),
    Check("missing_tenor", "warn", "check", rechecked=True),
    Check("stale_curve", "warn", "check", rechecked=True),
    Check("jump", "reject", "check", rechecked=True),
    Check("inversion", "info", "check", rechecked=True),
    Check("negative_forward", "warn", "build"),        # curve_shape_checks, after a build
    Check("non_monotone_discount", "warn", "build"),
    Check("late_curve", "warn", "daily"),              # late_curve, by the daily job
)
DEFAULT_SEVERITY = {c.name: c.severity for c in CHECKS}
FINDING_COLUMNS = ("as_of", "check_name", "severity", "tenor", "detail")
EPISODE_COLUMNS = ("short_tenor", "long_tenor", "first_day", "last_day", "days", "deepest_bp")

DAY = np.dtype("datetime64[D]")
BP = 1e4
# Fewer day-on-day moves than this and a tenor's MAD says nothing: the outlier test is skipped
# (the jump_bp test still runs). Common trade practice for robust scale estimates.
MIN_MOVES_FOR_MAD = 20
# Floor on the MAD (decimal, 1 bp): a quiet history quoted on a coarse grid can have a MAD of zero,
# which would make every tick an outlier.
MAD_FLOOR = 1e-4
# A flagged move counts as the return from the previous day's outlier when it goes back at least
# this share of the way to the level before the outlier.
RETURN_SHARE = 0.5
# Tolerances for the shape checks: rounding noise in discount factors near 1 is ~1e-16.
DF_TOL = 1e-12
FWD_TOL = 1e-10

Previous = tuple[Any, Any] | None


# --- small helpers --------------------------------------------------------------------------------

def empty_findings() -> pd.DataFrame:
    """A findings frame with no rows and the right columns and dtypes."""
    return _findings(np.array([], dtype=DAY), "", "", np.array([], dtype=object), np.array([], dtype=object))


def _findings(days: np.ndarray, check: str, severity: Any, tenor: Any, detail: Any) -> pd.DataFrame:
    days = np.asarray(days, dtype=DAY)
    n = len(days)
    sev = np.broadcast_to(np.asarray(severity, dtype=object), (n,))
    ten = np.broadcast_to(np.asarray(tenor, dtype=object), (n,))
    det = np.broadcast_to(np.asarray(detail, dtype=object), (n,))
    return pd.DataFrame({
        "as_of": pd.Series(days.astype("datetime64[s]")),
        "check_name": pd.Series(np.full(n, check, dtype=object), dtype=object),
        "severity": pd.Series(np.array(sev, dtype=object), dtype=object),
        "tenor": pd.Series(np.array(ten, dtype=object), dtype=object),
        "detail": pd.Series(np.array(det, dtype=object), dtype=object),
    })


def _concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
    frames = [f for f in frames if len(f)]
    if not frames:
        return empty_findings()
    out = pd.concat(frames, ignore_index=True)
    return out.sort_values(["as_of", "check_name", "tenor"], kind="stable", na_position="first",
                           ignore_index=True)


def _severity(cfg: CurveConfig, check: str) -> str:
    return cfg.severity.get(check, DEFAULT_SEVERITY[check])


def _iso(days: np.ndarray) -> np.ndarray:
    return np.datetime_as_string(np.asarray(days, dtype=DAY), unit="D").astype(object)


def _num(values: np.ndarray, fmt: str) -> np.ndarray:
    return np.array([format(v, fmt) for v in np.asarray(values, dtype=float)], dtype=object)


def _sorted_panel(as_of: Any, tenors: Sequence[str], rates: Any) -> tuple[np.ndarray, list[str], np.ndarray]:
    """Days ascending and tenors by maturity, as new arrays (the caller's are not touched)."""
    days = as_days(as_of).reshape(-1)
    labels = [parse_tenor(t).label for t in tenors]
    r = np.asarray(rates, dtype=float).reshape(len(days), len(labels))
    order_t = sorted(range(len(labels)), key=lambda j: parse_tenor(labels[j]))
    order_d = np.argsort(days, kind="stable")
    order_d = order_d[~np.isnat(days[order_d])]  # a row without a date cannot be judged
    return days[order_d], [labels[j] for j in order_t], r[np.ix_(order_d, order_t)]


def _with_previous(
    as_of: Any, tenors: Sequence[str], rates: Any, previous: Previous
) -> tuple[np.ndarray, list[str], np.ndarray, int]:
    """The panel with ``previous = (as_of, rates)`` (same tenors) prepended; returns rows of previous."""
    days, labels, r = _sorted_panel(as_of, tenors, rates)
    if previous is None:
        return days, labels, r, 0
    p_days, _, p_r = _sorted_panel(previous[0], tenors, previous[1])
    keep = p_days < (days[0] if len(days) else np.datetime64("9999-12-31"))
    return (np.concatenate([p_days[keep], days]), labels, np.vstack([p_r[keep], r]), int(keep.sum()))


def _comparable(labels: Sequence[str], r: np.ndarray, cfg: CurveConfig) -> np.ndarray:
    """Rates in which moves and spreads are judged: as quoted, or implied zero rates for discount."""
    if cfg.quote != "discount":
        return r
    years = np.array([parse_tenor(t).approx_days / 365.25 for t in labels])
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(r > 0, -np.log(r) / years, np.nan)


def _run_length(flags: np.ndarray) -> np.ndarray:
    """Length of the run of ``True`` ending at each position, along axis 0 (0 where ``False``)."""
    f = np.asarray(flags, dtype=bool)
    c = np.cumsum(f, axis=0)
    reset = np.where(~f, c, 0)
    return c - np.maximum.accumulate(reset, axis=0)


def _previous_valid(valid: np.ndarray) -> np.ndarray:
    """For each cell, the row of the previous valid cell in its column (-1 if none), along axis 0."""
    n = valid.shape[0]
    rows = np.where(valid, np.arange(n)[:, None], -1)
    last = np.maximum.accumulate(rows, axis=0)
    out = np.full_like(last, -1)
    out[1:] = last[:-1]
    return out


# --- missing days ---------------------------------------------------------------------------------

def missing_days(as_of: Any, cfg: CurveConfig, *, previous: Any = None) -> pd.DataFrame:
    """``missing_day`` findings: expected observation days with no curve.

    Expected days are the business days of ``cfg.calendar`` (weekends and configured holidays
    excluded) or, for ``cfg.frequency == "monthly"``, the last business day of each month, between
    the first and the last observed day. ``previous`` (optional) holds days observed before the range
    (an array, or an ``(as_of, rates)`` pair): the gap from the last of them to the range's first day
    is then judged too. One finding per missing day; the detail gives the whole gap's length in
    expected days and its first and last day.
    """
    days = np.unique(as_days(as_of).reshape(-1))
    if isinstance(previous, tuple):
        previous = previous[0]
    prev = np.unique(as_days(previous).reshape(-1)) if previous is not None else np.array([], dtype=DAY)
    days, prev = days[~np.isnat(days)], prev[~np.isnat(prev)]
    if len(days) == 0:
        return empty_findings()
    prev = prev[prev < days[0]]
    # the previous checked day is observed; the span starts just after it
    lo = prev[-1] + np.timedelta64(1, "D") if len(prev) else days[0]
    hi = days[-1]
    cal = cfg.calendar
    monthly = cfg.frequency == "monthly"
    expected = cal.month_ends(lo, hi) if monthly else cal.business_days(lo, hi)
    gone = expected[~np.isin(expected, days)]
    if len(gone) == 0:
        return empty_findings()
    pos = np.searchsorted(expected, gone)
    run = np.concatenate([[0], np.cumsum(np.diff(pos) != 1)])
    _, first_idx, counts = np.unique(run, return_index=True, return_counts=True)
    length = counts[run]
    first = gone[first_idx[run]]
    last = gone[first_idx[run] + counts[run] - 1]
    unit = np.where(length == 1, "month-end" if monthly else "business day",
                    "month-ends" if monthly else "business days").astype(object)
    detail = ("no curve observed; gap of " + length.astype(str).astype(object) + " " + unit
              + " from " + _iso(first) + " to " + _iso(last))
    return _findings(gone, "missing_day", _severity(cfg, "missing_day"), None, detail)


# --- late delivery --------------------------------------------------------------------------------

def late_curve(last_observed: Any, now_local: Any, cfg: CurveConfig, *, zone: str = "") -> pd.DataFrame:
    """``late_curve`` finding: the curve of the last expected observation day that was due by
    ``now_local`` has not arrived.

    A day's curve is due at ``cfg.late_after`` (HH:MM) on that day, in the schedule's time zone;
    ``now_local`` is the wall-clock time there (naive, e.g. ``numpy.datetime64('2031-03-04T18:30')``).
    Expected days are the calendar's business days, or month-ends for a monthly curve. At most one
    finding, for the latest day due, and only when that day is after ``last_observed`` (the last day
    the record holds; None for an empty curve, which is not late: it has not started). ``zone`` only
    names the time zone in the detail.
    """
    if last_observed is None:
        return empty_findings()
    last = np.datetime64(last_observed, "D")
    now = np.datetime64(now_local, "m")
    today = now.astype("datetime64[D]")
    hh, mm = (int(x) for x in cfg.late_after.split(":"))
    cutoff = today if now >= today + np.timedelta64(hh * 60 + mm, "m") else today - np.timedelta64(1, "D")
    lo = max(last + np.timedelta64(1, "D"), cutoff - np.timedelta64(70, "D"))
    if lo > cutoff:
        return empty_findings()
    cal = cfg.calendar
    expected = cal.month_ends(lo, cutoff) if cfg.frequency == "monthly" else cal.business_days(lo, cutoff)
    expected = expected[(expected >= lo) & (expected <= cutoff)]
    if len(expected) == 0:
        return empty_findings()
    due = expected[-1:]
    where = f" {zone}" if zone else ""
    detail = f"no curve for {due[0]} by {cfg.late_after}{where}; the last curve received is for {last}"
    return _findings(due, "late_curve", _severity(cfg, "late_curve"), None, detail)


# --- missing tenors -------------------------------------------------------------------------------

def missing_tenors(as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig) -> pd.DataFrame:
    """``missing_tenor`` findings: an expected tenor (``cfg.tenors``) with no quote on an observed day.

    One finding per (day, tenor). A tenor of ``cfg.tenors`` that is not a column of the panel is
    missing on every day.
    """
    days, labels, r = _sorted_panel(as_of, tenors, rates)
    expected = list(cfg.tenor_labels) or labels
    if len(days) == 0 or not expected:
        return empty_findings()
    col = {t: j for j, t in enumerate(labels)}
    miss = np.ones((len(days), len(expected)), dtype=bool)
    for k, t in enumerate(expected):
        if t in col:
            miss[:, k] = np.isnan(r[:, col[t]])
    di, ti = np.nonzero(miss)
    names = np.array(expected, dtype=object)[ti]
    detail = "no quote for expected tenor " + names
    return _findings(days[di], "missing_tenor", _severity(cfg, "missing_tenor"), names, detail)


# --- stale curves ---------------------------------------------------------------------------------

def stale_curves(
    as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig, *, previous: Previous = None
) -> pd.DataFrame:
    """``stale_curve`` findings.

    * Whole curve: every quote of the day equal to the previous observed day's (same tenors quoted,
      identical values); ``tenor`` is ``None``.
    * Single tenor: the tenor's value is the same on ``cfg.stale_days`` consecutive observed days
      while at least one of its neighbouring tenors (by maturity) moved within those days. Reported
      on every day the condition holds, except on days whose whole curve is stale (already reported).

    ``previous = (as_of, rates)`` of the days before the range lets the first days be compared.
    """
    days, labels, r, n_prev = _with_previous(as_of, tenors, rates, previous)
    n, t = r.shape
    if n - n_prev == 0 or t == 0:
        return empty_findings()
    sev = _severity(cfg, "stale_curve")
    valid = ~np.isnan(r)
    same = np.zeros((n, t), dtype=bool)
    same[1:] = (r[1:] == r[:-1]) | (~valid[1:] & ~valid[:-1])
    whole = np.zeros(n, dtype=bool)
    whole[1:] = same[1:].all(axis=1) & valid[1:].any(axis=1)
    out = []

    cur = np.arange(n) >= n_prev
    wi = np.nonzero(whole & cur)[0]
    if len(wi):
        detail = ("all " + valid[wi].sum(axis=1).astype(str).astype(object)
                  + " quoted tenor(s) identical to the curve of " + _iso(days[wi - 1]))
        out.append(_findings(days[wi], "stale_curve", sev, None, detail))

    if t >= 2:
        unchanged = np.zeros((n, t), dtype=bool)
        unchanged[1:] = (r[1:] == r[:-1])  # NaN never equals: a gap breaks the run
        moved = np.zeros((n, t), dtype=bool)
        moved[1:] = valid[1:] & valid[:-1] & (r[1:] != r[:-1])
        run = _run_length(unchanged)
        window = cfg.stale_days - 1  # moves spanned by stale_days days
        cs = np.vstack([np.zeros((1, t), dtype=np.int64), np.cumsum(moved, axis=0)])
        lo = np.maximum(np.arange(n) - window + 1, 0)
        moves_in_window = cs[np.arange(n) + 1] - cs[lo]  # moves in rows (i-window, i]
        nb = np.zeros((n, t), dtype=bool)
        nb[:, 1:] |= moves_in_window[:, :-1] > 0
        nb[:, :-1] |= moves_in_window[:, 1:] > 0
        stuck = (run >= window) & nb & ~whole[:, None] & cur[:, None]
        di, ti = np.nonzero(stuck)
        if len(di):
            names = np.array(labels, dtype=object)[ti]
            since = days[di - run[di, ti]]
            detail = (names + " unchanged at " + _num(r[di, ti], ".6g") + " on "
                      + (run[di, ti] + 1).astype(str).astype(object) + " observed days since "
                      + _iso(since) + " while its neighbouring tenors moved")
            out.append(_findings(days[di], "stale_curve", sev, names, detail))
    return _concat(out)


# --- jumps and outliers ---------------------------------------------------------------------------

def _moves(c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Move of each quote since the tenor's previous quote (NaN if none) and that quote's row."""
    valid = ~np.isnan(c)
    prev = _previous_valid(valid)
    cols = np.broadcast_to(np.arange(c.shape[1]), c.shape)
    before = np.where(prev >= 0, c[np.maximum(prev, 0), cols], np.nan)
    return np.where(valid & (prev >= 0), c - before, np.nan), prev


def _neighbour_sides(j: int, t: int) -> tuple[list[int], list[int]]:
    """Neighbouring columns of tenor ``j`` on its two sides, nearest first. At the ends of the curve
    both "sides" lie on the one side there is (the nearest and the next), so an end tenor must also
    disagree with two other tenors before it counts as an outlier."""
    left = list(range(j - 1, max(j - 3, -1), -1))
    right = list(range(j + 1, min(j + 3, t)))
    if not left:
        return right[:1], right[1:2]
    if not right:
        return left[:1], left[1:2]
    return left, right


def _relative_moves(c: np.ndarray, delta: np.ndarray, prev_row: np.ndarray) -> np.ndarray:
    """A tenor's move against its neighbours, over the same interval (since the tenor's previous
    quote, so a tenor quoted after a gap is compared with its neighbours' moves over that gap too).

    The excess moves over one neighbour on each side (the nearest quoted one, at most two tenors
    away) are combined: when both have the same sign, the smaller of the two; when they disagree
    the tenor moved with one of its neighbours and the result is 0; with one side only, that side.
    """
    n, t = c.shape
    rel = np.full((n, t), np.nan)
    rows = np.arange(n)
    for j in range(t):
        p = np.maximum(prev_row[:, j], 0)
        has = ~np.isnan(delta[:, j])
        excess = []
        for side in _neighbour_sides(j, t):
            m = np.full(n, np.nan)
            for k in reversed(side):  # the nearest quoted neighbour wins: write it last
                mk = c[rows, k] - c[p, k]
                m = np.where(np.isnan(mk), m, mk)
            excess.append(np.where(has, delta[:, j] - m, np.nan))
        a, b = excess  # a missing second side is all NaN and falls through to the first
        both = ~np.isnan(a) & ~np.isnan(b)
        smaller = np.where(np.abs(a) <= np.abs(b), a, b)
        rel[:, j] = np.where(both, np.where(np.sign(a) == np.sign(b), smaller, 0.0),
                             np.where(np.isnan(a), b, a))
    return rel


def jumps(
    as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig, *, previous: Previous = None
) -> pd.DataFrame:
    """``jump`` findings: suspicious day-on-day moves, one finding per (day, tenor).

    A move is the change since the tenor's previous quote. It is flagged when

    * its size exceeds ``cfg.jump_bp`` basis points, or
    * it is an outlier against the neighbouring tenors: the tenor's move relative to its neighbours
      over the same interval (see :func:`_relative_moves`) lies more than ``cfg.outlier_mads``
      median absolute deviations from that relative move's median over the history given (raw MAD,
      floored at 1 bp; skipped with fewer than 20 moves). A units error (4.5 for 0.45, 0.045 for 4.5) is caught by both.

    The move back from an outlier (the next quote of the same tenor, flagged itself, in the opposite
    direction, and going back at least half-way to the level before the outlier) is reported at
    severity ``info``, so only the bad day is held back; every other flagged move takes
    ``cfg.severity["jump"]``. ``previous = (as_of, rates)`` of earlier days supplies the comparison
    for the first day and more history for the MAD (pass a year or so for incremental runs).
    """
    days, labels, r, n_prev = _with_previous(as_of, tenors, rates, previous)
    n, t = r.shape
    if n - n_prev == 0 or t == 0:
        return empty_findings()
    c = _comparable(labels, r, cfg)
    delta, prev_row = _moves(c)
    big = np.abs(delta) * BP > cfg.jump_bp
    rel = _relative_moves(c, delta, prev_row) if t >= 2 else np.full_like(delta, np.nan)
    finite = ~np.isnan(rel)
    enough = finite.sum(axis=0) >= MIN_MOVES_FOR_MAD
    with np.errstate(invalid="ignore"):
        rel_for_stats = np.where(finite, rel, np.nan)
        med = np.zeros(t)
        mad = np.zeros(t)
        if enough.any():
            med[enough] = np.nanmedian(rel_for_stats[:, enough], axis=0)
            mad[enough] = np.nanmedian(np.abs(rel_for_stats[:, enough] - med[enough]), axis=0)
    scale = np.maximum(mad, MAD_FLOOR)
    score = np.abs(rel - med) / scale
    outlier = enough[None, :] & finite & (score > cfg.outlier_mads)
    flagged = big | outlier

    # the move back from an outlier: per tenor on its own quoted rows
    back = np.zeros((n, t), dtype=bool)
    for j in range(t):
        rows = np.nonzero(~np.isnan(delta[:, j]))[0]
        if len(rows) < 2:
            continue
        f = flagged[rows, j]
        d = delta[rows, j]
        level_before = c[rows, j] - d
        cand = np.zeros(len(rows), dtype=bool)
        cand[1:] = (
            f[1:] & f[:-1] & (np.sign(d[1:]) == -np.sign(d[:-1]))
            & (np.abs(c[rows[1:], j] - level_before[:-1]) <= (1 - RETURN_SHARE) * np.abs(d[:-1]))
        )
        # in a chain of candidates the first is the return from a real outlier, the second is a new
        # outlier, the third its return, ...
        back[rows, j] = cand & (_run_length(cand) % 2 == 1)

    flagged[:n_prev] = False
    di, ti = np.nonzero(flagged)
    if len(di) == 0:
        return empty_findings()
    names = np.array(labels, dtype=object)[ti]
    pr = prev_row[di, ti]
    what = "implied zero rate " if cfg.quote == "discount" else ""
    detail = (names + " " + what + "moved " + _num(delta[di, ti] * BP, "+.1f") + " bp from "
              + _num(c[pr, ti], ".6g") + " on " + _iso(days[pr]) + " to " + _num(c[di, ti], ".6g"))
    detail = np.where(big[di, ti], detail + f" (beyond {cfg.jump_bp:g} bp)", detail)
    detail = np.where(outlier[di, ti],
                      detail + "; " + _num(score[di, ti], ".1f") + " MADs against its neighbouring tenors",
                      detail)
    is_back = back[di, ti]
    detail = np.where(is_back, detail + "; the move back from the outlier of " + _iso(days[pr]), detail)
    sev = np.where(is_back, "info", _severity(cfg, "jump")).astype(object)
    return _concat([_findings(days[di], "jump", sev, names, detail)])


# --- inversions -----------------------------------------------------------------------------------

def _pair_spreads(
    as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig, held: Any = None
) -> tuple[np.ndarray, list[tuple[str, str, np.ndarray, np.ndarray, np.ndarray]]]:
    days, labels, r = _sorted_panel(as_of, tenors, rates)
    c = _comparable(labels, r, cfg)
    if held is not None and len(held):
        # a day held back by a reject finding is not judged: as if it had no curve
        c = np.where(np.isin(days, np.asarray(held, dtype=DAY))[:, None], np.nan, c)
    col = {t: j for j, t in enumerate(labels)}
    pairs = []
    for short, long in cfg.inversion_pairs:
        s, lg = parse_tenor(short).label, parse_tenor(long).label
        if s in col and lg in col:
            cs, cl = c[:, col[s]], c[:, col[lg]]
            pairs.append((s, lg, cs, cl, cl - cs))
    return days, pairs


def pair_spreads(as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig) -> pd.DataFrame:
    """The spread of every configured inversion pair as the inversion check judges it: long minus
    short, in bp, of the quotes (implied continuous zero rates for a discount curve).

    ``as_of`` ``(N,)``, ``rates`` ``(N, len(tenors))`` decimals (NaN where not quoted). Returns the
    columns ``as_of, short_tenor, long_tenor, spread_bp``, one row per day a pair has both quotes.
    """
    days, pairs = _pair_spreads(as_of, tenors, rates, cfg)
    frames = [pd.DataFrame({"as_of": days[ok].astype("datetime64[s]"), "short_tenor": s, "long_tenor": lg,
                            "spread_bp": spread[ok] * BP})
              for s, lg, _, _, spread in pairs for ok in [~np.isnan(spread)]]
    if not frames:
        return pd.DataFrame({"as_of": pd.Series([], dtype="datetime64[s]"), "short_tenor": pd.Series([], dtype=object),
                             "long_tenor": pd.Series([], dtype=object), "spread_bp": pd.Series([], dtype=float)})
    return pd.concat(frames, ignore_index=True)


def pairs_inverted_first(as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig, *,
                         held: Any = None) -> list[tuple[str, str]]:
    """The inversion pairs (short, long labels) whose first judged day in the panel is inverted.

    Judged and inverted as :func:`inversion_episodes` judges them (``held`` days not judged), so a
    caller that reads only a suffix of the history knows which pairs' runs may have begun before its
    first day.
    """
    _, pairs = _pair_spreads(as_of, tenors, rates, cfg, held)
    out = []
    for s, lg, _, _, spread in pairs:
        judged = np.flatnonzero(~np.isnan(spread))
        if judged.size and spread[judged[0]] < 0:
            out.append((s, lg))
    return out


def inversions(as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig) -> pd.DataFrame:
    """``inversion`` findings: for each ``cfg.inversion_pairs`` (short, long), each day on which the
    long rate is strictly below the short one. ``tenor`` is ``"SHORT/LONG"``; the detail gives both
    rates and the spread (long minus short) in bp. Pairs with a tenor not in the panel are skipped."""
    days, pairs = _pair_spreads(as_of, tenors, rates, cfg)
    out = []
    sev = _severity(cfg, "inversion")
    for s, lg, cs, cl, spread in pairs:
        idx = np.nonzero(spread < 0)[0]
        if len(idx) == 0:
            continue
        detail = (f"{lg} " + _num(cl[idx], ".6g") + f" below {s} " + _num(cs[idx], ".6g")
                  + ": spread " + _num(spread[idx] * BP, "+.1f") + " bp")
        out.append(_findings(days[idx], "inversion", sev, f"{s}/{lg}", detail))
    return _concat(out)


def inversion_episodes(as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig, *,
                       held: Any = None) -> pd.DataFrame:
    """Episodes of inversion per configured pair: columns ``short_tenor, long_tenor, first_day,
    last_day, days, deepest_bp``.

    An episode is a run of inverted days among the days on which the pair was *judged* (both tenors
    quoted, and the day not in ``held``: days held back by an open reject finding, whose quotes the
    record does not trust). A business day with no curve, a held day, or a day with either tenor
    missing neither starts, extends nor breaks a run; a judged day that is not inverted breaks it.
    ``days`` counts the inverted judged days; ``deepest_bp`` is the most negative spread (long minus
    short, in bp, so always < 0).
    """
    days, pairs = _pair_spreads(as_of, tenors, rates, cfg, held)
    frames = []
    for s, lg, _, _, spread in pairs:
        judged = ~np.isnan(spread)
        d, sp = days[judged], spread[judged]
        inv = sp < 0
        if not inv.any():
            continue
        start = inv & ~np.concatenate([[False], inv[:-1]])
        run_id = np.cumsum(start)[inv]  # 1-based episode number of each inverted day
        d_inv, sp_inv = d[inv], sp[inv]
        heads = np.concatenate([[0], np.nonzero(np.diff(run_id))[0] + 1])
        counts = np.diff(np.concatenate([heads, [len(run_id)]]))
        frames.append(pd.DataFrame({
            "short_tenor": s,
            "long_tenor": lg,
            "first_day": pd.Series(d_inv[heads].astype("datetime64[s]")),
            "last_day": pd.Series(d_inv[heads + counts - 1].astype("datetime64[s]")),
            "days": counts.astype(np.int64),
            "deepest_bp": np.minimum.reduceat(sp_inv, heads) * BP,
        }))
    if not frames:
        return pd.DataFrame({
            "short_tenor": pd.Series([], dtype=object), "long_tenor": pd.Series([], dtype=object),
            "first_day": pd.Series([], dtype="datetime64[s]"), "last_day": pd.Series([], dtype="datetime64[s]"),
            "days": pd.Series([], dtype=np.int64), "deepest_bp": pd.Series([], dtype=float),
        })
    out = pd.concat(frames, ignore_index=True)
    out["short_tenor"] = out["short_tenor"].astype(object)
    out["long_tenor"] = out["long_tenor"].astype(object)
    return out.sort_values(["short_tenor", "long_tenor", "first_day"], ignore_index=True)


# --- shape of a built curve -----------------------------------------------------------------------

def curve_shape_checks(as_of: Any, times: Any, discount_factors: Any, cfg: CurveConfig) -> pd.DataFrame:
    """Shape checks on built curves: ``non_monotone_discount`` and ``negative_forward``.

    ``times`` is ``(D, K)`` year fractions (the curve's day count) on a fine, increasing grid per
    day; ``discount_factors`` the ``(D, K)`` discount factors there. At most one finding per day and
    check; the detail says where (year fraction) and how much.

    * ``non_monotone_discount``: a discount factor higher than the one before it on the grid (by
      more than 1e-12). On a curve with negative rates this is expected: set the check's severity to
      ``info`` for such curves.
    * ``negative_forward``: a one-period forward ``ln(P_k / P_{k+1}) / (t_{k+1} - t_k)``
      (continuously compounded) below zero on an interval where the curve's zero rates at both ends
      (``-ln P / t``, continuous) are positive. With positive rates the two checks see the same
      defect from two sides, so both fire.
    """
    days = as_days(as_of).reshape(-1)
    t = np.asarray(times, dtype=float)
    p = np.asarray(discount_factors, dtype=float)
    if t.ndim == 1:
        t = np.broadcast_to(t, p.shape)
    if p.shape != t.shape or p.ndim != 2 or p.shape[0] != len(days):
        raise ValueError(f"times {t.shape} and discount_factors {p.shape} must both be (days={len(days)}, K)")
    if p.shape[1] < 2 or len(days) == 0:
        return empty_findings()
    out = []
    rise = p[:, 1:] - p[:, :-1]
    rising = rise > DF_TOL
    di = np.nonzero(rising.any(axis=1))[0]
    if len(di):
        k = np.argmax(np.where(rising, rise, -np.inf), axis=1)[di]
        detail = ("discount factor rises with maturity at " + rising[di].sum(axis=1).astype(str).astype(object)
                  + " grid point(s); largest rise " + _num(rise[di, k], "+.3g") + " from "
                  + _num(p[di, k], ".6f") + " at t=" + _num(t[di, k], ".4g") + "y to "
                  + _num(p[di, k + 1], ".6f") + " at t=" + _num(t[di, k + 1], ".4g") + "y")
        out.append(_findings(days[di], "non_monotone_discount", _severity(cfg, "non_monotone_discount"),
                             None, detail))

    with np.errstate(divide="ignore", invalid="ignore"):
        zero = np.where(t > 0, -np.log(p) / t, np.nan)
        dt = t[:, 1:] - t[:, :-1]
        fwd = np.where(dt > 0, np.log(p[:, :-1] / p[:, 1:]) / dt, np.nan)
    z_left = np.where(t[:, :-1] > 0, zero[:, :-1], zero[:, 1:])  # at t = 0 judge by the right end
    neg = (fwd < -FWD_TOL) & (z_left > 0) & (zero[:, 1:] > 0)
    di = np.nonzero(neg.any(axis=1))[0]
    if len(di):
        k = np.argmin(np.where(neg, fwd, np.inf), axis=1)[di]
        detail = ("one-period forward " + _num(fwd[di, k], ".6g") + " (continuous) on ["
                  + _num(t[di, k], ".4g") + "y, " + _num(t[di, k + 1], ".4g")
                  + "y] where the zero rates are positive; " + neg[di].sum(axis=1).astype(str).astype(object)
                  + " negative interval(s)")
        out.append(_findings(days[di], "negative_forward", _severity(cfg, "negative_forward"), None, detail))
    return _concat(out)


# --- duplicates within a file ---------------------------------------------------------------------

def _to_dates(values: pd.Series) -> pd.Series:
    from pipeline.expectations import to_dates  # the row expectations' date reading (imports the config)

    return to_dates(values)


def duplicate_findings(rows: pd.DataFrame, cfg: CurveConfig | None = None) -> pd.DataFrame:
    """``duplicate`` findings: the same (day, tenor) more than once in one file with different rates.

    ``rows`` is the parsed-rows frame of :func:`pipeline.expectations.validate_rows` (``line``,
    ``as_of``, ``tenor``, ``rate``); rows with an unparsed date, tenor or rate are ignored here (the
    row-level expectations reject them). Repeats with identical values are not findings. One finding
    per (day, tenor); the detail lists each rate with its line. Severity is
    ``cfg.severity["duplicate"]`` (the default severity without ``cfg``).
    """
    sev = cfg.severity.get("duplicate", DEFAULT_SEVERITY["duplicate"]) if cfg else DEFAULT_SEVERITY["duplicate"]
    need = {"as_of", "tenor", "rate"}
    if len(rows) == 0 or not need <= set(rows.columns):
        return empty_findings()
    sub = pd.DataFrame({
        "as_of": _to_dates(rows["as_of"]).to_numpy(),
        "tenor": rows["tenor"].astype(object).to_numpy(),
        "rate": pd.to_numeric(rows["rate"], errors="coerce").to_numpy(dtype=float),
        "line": rows["line"].to_numpy() if "line" in rows else np.arange(1, len(rows) + 1),
    })
    sub = sub[sub["as_of"].notna() & sub["tenor"].notna() & sub["rate"].notna()]
    if sub.empty:
        return empty_findings()
    g = sub.groupby(["as_of", "tenor"], sort=False)["rate"]
    spread = g.transform("max") - g.transform("min")
    dup = sub[spread.to_numpy() > 1e-12].sort_values(["as_of", "tenor", "line"], kind="stable")
    if dup.empty:
        return empty_findings()
    dup = dup.assign(item=_num(dup["rate"].to_numpy(), ".6g") + " (line "
                     + dup["line"].astype(str).to_numpy().astype(object) + ")")
    agg = dup.groupby(["as_of", "tenor"], sort=True).agg(n=("line", "size"), items=("item", ", ".join))
    agg = agg.reset_index()
    names = agg["tenor"].to_numpy(dtype=object)
    detail = (agg["n"].astype(str).to_numpy().astype(object) + " rows for " + names + " on "
              + _iso(agg["as_of"].to_numpy().astype(DAY)) + " with different rates: "
              + agg["items"].to_numpy(dtype=object))
    return _findings(agg["as_of"].to_numpy().astype(DAY), "duplicate", sev, names, detail)


# --- all curve-level checks -----------------------------------------------------------------------

def curve_checks(
    as_of: Any, tenors: Sequence[str], rates: Any, cfg: CurveConfig, *, previous: Previous = None
) -> pd.DataFrame:
    """Run every curve-level check on a ``(D, T)`` panel of one curve's latest quotes.

    ``as_of`` ``(D,)`` observed days, ``tenors`` ``T`` canonical labels, ``rates`` ``(D, T)`` decimals
    (NaN = missing). ``previous = (as_of, rates)`` optionally holds the days just before the range,
    with the same tenor columns, so that an incremental run compares its first day with the last
    checked one (``missing_day``, ``stale_curve``, ``jump``) and has history for the outlier MAD;
    findings are reported for the range only, plus the missing days between ``previous`` and the
    range. Returns the findings frame (columns :data:`FINDING_COLUMNS`), sorted by day, check, tenor.
    """
    days, labels, r = _sorted_panel(as_of, tenors, rates)
    return _concat([
        missing_days(days, cfg, previous=previous),
        missing_tenors(days, labels, r, cfg),
        stale_curves(days, labels, r, cfg, previous=previous),
        jumps(days, labels, r, cfg, previous=previous),
        inversions(days, labels, r, cfg),
    ])
