"""Running state of the forecast audit, so that a daily refresh costs O(new outcomes), not O(history).

A *cell* is one (curve, start, tenor, regime) series of outcomes ordered by as-of date, the unit of a
row of :func:`pipeline.audit.summarize`. :func:`build_cell` turns a cell's whole record into a
:class:`CellState` plus a short *tail* (its last rows); :func:`append_cell` folds rows with later
as-of dates into both; :func:`cell_summary` gives the row of statistics, the same figures
:func:`pipeline.audit.summarize` computes from the whole record (to rounding, ~1e-12 relative).
:func:`premium_increment` gives the term-premium rows of the windows that end at the new rows.

Why this is exact:

* Every score the statistics use is a linear combination, with coefficients fixed by the final
  estimates, of the columns of ``W`` (:data:`MONOMIALS`): 1, e, d = e^2 - u^2, F, R, F^2, FR, S, V,
  S^2, SV, where e, u are the forecast and no-change errors (bp), F, R the forward and realised rate
  less a fixed centre (bp), S = forward - spot and V = realised - spot (bp). The Mincer-Zarnowitz and
  Fama-Bliss regressions are run in these units (the slope, its standard error, R^2 and the Wald
  statistic do not change under that affine change of units; ``mz_alpha`` is mapped back to a
  decimal). So the sums ``sum_t W_t`` and the Bartlett-weighted cross moments
  ``cross_moments = sum_{s,t} (1 - |t-s|/(L+1))_+ W_s W_t'`` (P x P) are all the HAC figures need.
  A new row t adds ``W_t W_t' + W_t v_t' + v_t W_t'`` with ``v_t = sum_{j=1..L} (1 - j/(L+1))
  W_{t-j}``: only the last L rows are needed, and they are in the tail.
* The lag L moves with h, and h, a median of integer counts rounded half up, flips by one from
  day to day when the two middle counts of an even-sized record differ (504 and 505 give 505, the
  odd-sized record after it 504). So the state keeps the cross moments for every lag of a band
  (``lag_band``: the build-time lag L0 and :data:`LAG_BAND` lags on each side, clipped at 0), each
  updated on append by the rule above with its own lag (the tail holds the band's largest lag of
  rows). A new L inside the band takes that lag's matrix; only outside it does the update give up
  (and the recompute centres a new band on the new lag).
* The overlap horizon h (:func:`pipeline.audit.overlap_horizon`) is a median of counts. A row whose
  target date is on or before the cell's last as-of date has a final integer count (later as-of
  dates lie after its target), kept in a histogram; the rows whose target lies beyond it ("open"
  rows, about h of them) are all in the tail and are recounted on every update, with the same
  arithmetic as ``overlap_horizon``. The median of the union is exact.
* The median error comes from a *band*: the sorted errors around the median rank plus the counts of
  errors below and above it; a new error lands below, above or inside. When the median rank leaves
  the band the update gives up (returns None) and the caller recomputes the cell from its record.
* Moments (mean, variance of e and V) merge batches with Chan et al.'s pairwise update; the sums of
  squares and absolute values, min/max and hit counts are plain running aggregates.

:func:`append_cell` returns ``None`` whenever an assumption fails: a new row is not after the cell's
last as-of date, the Newey-West lag ``L = max(h-1, 0)`` left the lag band (or the term premium's
capped lag changed) because h changed, or the median band ran out. The caller then recomputes that cell in full.

Rates are decimals, errors bp; dates ``datetime64[D]``. Inputs are never modified.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import Any

import numpy as np
from scipy import special

from pipeline.audit.hac import hln_factor, rolling_mean_hac_se
from pipeline.audit.statistics import MIN_OBS, TIE, overlap_inference
from pipeline.dates import as_days

__all__ = [
    "BAND",
    "LAG_BAND",
    "MONOMIALS",
    "TAIL_COLUMNS",
    "CellState",
    "append_cell",
    "bartlett_cross",
    "bartlett_cross_band",
    "build_cell",
    "cell_summary",
    "horizon_from_counts",
    "premium_increment",
]

MONOMIALS = ("one", "e", "d", "F", "R", "FF", "FR", "S", "V", "SS", "SV")
_ONE, _E, _D, _F, _R, _FF, _FR, _S, _V, _SS, _SV = range(len(MONOMIALS))
P = len(MONOMIALS)
TAIL_COLUMNS = ("as_of", "target_date", "forward_rate", "realized_rate", "spot_rate", "error_bp", "rw_error_bp")
BAND = 256  # errors kept on each side of the median rank
LAG_BAND = 2  # Newey-West lags kept on each side of the build-time lag
_NAN = float("nan")


@dataclass
class CellState:
    """Everything the statistics of one cell need, in O(h) space.

    ``sums`` (P,) and ``cross_moments`` (P, P) are over :data:`MONOMIALS` with lag ``lags`` and the
    centres ``centre`` (of F and R, a decimal rate) and ``centre_s``, ``centre_v``, ``centre_e``,
    ``centre_d`` (of S, V, e and d, bp and bp^2),
    fixed when the state is built. ``hist[i]`` counts the rows whose
    overlap count is final and equals ``hist_from + i``. ``band`` holds sorted errors (bp); ``band_below`` /
    ``band_above`` count the errors before / after it in sorted order. ``premium_lags`` is the term
    premium's lag (``min(lags, window - 1)``) for the cell that carries the premium, else -1.
    ``lag_band`` (B,) lists the lags, ascending, whose cross moments ``lag_cross`` (B, P, P) are kept
    (``lags`` among them; ``cross_moments`` is its matrix).
    """

    n: int
    first_as_of: np.datetime64
    last_as_of: np.datetime64
    horizon: int
    lags: int
    premium_lags: int
    centre: float
    centre_s: float
    centre_v: float
    centre_e: float
    centre_d: float
    sums: np.ndarray
    cross_moments: np.ndarray
    mean_e: float
    m2_e: float
    mean_v: float
    m2_v: float
    sum_e2: float
    sum_u2: float
    sum_v2: float
    sum_abs_e: float
    min_e: float
    max_e: float
    min_f: float
    max_f: float
    min_s: float
    max_s: float
    n_moved: int
    n_hit: int
    hist_from: int
    hist: np.ndarray
    band: np.ndarray
    band_below: int
    band_above: int
    lag_band: np.ndarray
    lag_cross: np.ndarray

    def as_record(self) -> dict[str, Any]:
        """Plain values and 1-D arrays (``cross_moments``, ``lag_cross`` flattened), for storage."""
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["cross_moments"] = np.asarray(self.cross_moments, dtype=float).ravel()
        out["lag_cross"] = np.asarray(self.lag_cross, dtype=float).ravel()
        return out

    @classmethod
    def from_record(cls, rec: dict[str, Any]) -> CellState:
        kw = {f.name: rec[f.name] for f in fields(cls)}
        for k in ("n", "horizon", "lags", "premium_lags", "n_moved", "n_hit", "hist_from", "band_below", "band_above"):
            kw[k] = int(kw[k])
        kw["first_as_of"] = as_days(np.asarray(kw["first_as_of"]).reshape(-1))[0]
        kw["last_as_of"] = as_days(np.asarray(kw["last_as_of"]).reshape(-1))[0]
        kw["sums"] = np.asarray(kw["sums"], dtype=float).copy()
        kw["cross_moments"] = np.asarray(kw["cross_moments"], dtype=float).reshape(P, P).copy()
        kw["hist"] = np.asarray(kw["hist"], dtype=np.int64).copy()
        kw["band"] = np.asarray(kw["band"], dtype=float).copy()
        kw["lag_band"] = np.asarray(kw["lag_band"], dtype=np.int64).copy()
        kw["lag_cross"] = np.asarray(kw["lag_cross"], dtype=float).reshape(-1, P, P).copy()
        if kw["lag_cross"].shape[0] != kw["lag_band"].size or kw["lags"] not in kw["lag_band"]:
            raise ValueError("the stored lag band does not match its cross moments or the lag")
        return cls(**kw)


# ---------------------------------------------------------------- kernels

def _monomials(rows: dict[str, np.ndarray], centre: float, centre_s: float, centre_v: float, centre_e: float,
               centre_d: float) -> np.ndarray:
    e = rows["error_bp"]
    u = rows["rw_error_bp"]
    f = rows["forward_rate"]
    r = rows["realized_rate"]
    s = rows["spot_rate"]
    F = (f - centre) * 1e4
    R = (r - centre) * 1e4
    S = (f - s) * 1e4 - centre_s
    V = (r - s) * 1e4 - centre_v
    return np.column_stack([np.ones(e.size), e - centre_e, (e * e - u * u) - centre_d, F, R, F * F, F * R, S, V,
                            S * S, S * V])


def bartlett_cross(W: np.ndarray, lags: int) -> np.ndarray:
    """``sum_{s,t} (1 - |t-s|/(lags+1))_+ W_s W_t'`` for ``W`` of shape (n, k): (k, k).

    The same quantity as :func:`pipeline.audit.hac.bartlett_long_run` (statsmodels'
    ``S_hac_simple``), by the same block-sum identity, with one matrix product for the k x k
    products (k is 11 here, too many for elementwise sums).
    """
    return bartlett_cross_band(W, [lags])[0]


def bartlett_cross_band(W: np.ndarray, lags: Any) -> np.ndarray:
    """:func:`bartlett_cross` of ``W`` (n, k) for each lag of ``lags`` (B,): (B, k, k), one cumulative sum."""
    x = np.asarray(W, dtype=float)
    cs = np.zeros((x.shape[0] + 1, x.shape[1]))
    np.cumsum(x, axis=0, out=cs[1:])
    return np.stack([_bartlett_from_cumsum(cs, int(L)) for L in np.asarray(lags).reshape(-1)])


def _bartlett_from_cumsum(cs: np.ndarray, L: int) -> np.ndarray:
    n = cs.shape[0] - 1
    if L < n:
        blocks = np.concatenate([cs[1 : L + 1], cs[L + 1 :] - cs[: n - L], cs[n] - cs[n - L : n]])
    else:
        r = np.arange(-L, n)
        blocks = cs[np.minimum(r + L, n - 1) + 1] - cs[np.maximum(r, 0)]
    return (blocks.T @ blocks) / (L + 1)


def _overlap_counts(as_of: np.ndarray, target: np.ndarray, dates: np.ndarray) -> np.ndarray:
    """In-sample part of :func:`pipeline.audit.overlap_horizon`'s count: dates in (as_of, target]."""
    return np.searchsorted(dates, target, side="right") - np.searchsorted(dates, as_of, side="right")


def _open_counts(counts: np.ndarray, target: np.ndarray, first: np.datetime64, last: np.datetime64,
                 n: int) -> np.ndarray:
    """Counts of rows whose target lies beyond ``last``: the same float arithmetic as overlap_horizon."""
    out = counts.astype(float)
    if n > 1:
        spacing = (last - first).astype(np.int64) / (n - 1)
        beyond = np.maximum((target - last).astype(np.int64), 0)
        out += beyond / spacing
    return out


def horizon_from_counts(hist: np.ndarray, open_counts: np.ndarray, hist_from: int = 0) -> int:
    """``max(round-half-up(median), 1)`` of the multiset ``{hist_from + i repeated hist[i]} + open_counts``.

    Equals ``overlap_horizon`` when ``hist`` holds the final counts and ``open_counts`` the others.
    """
    hist = np.asarray(hist, dtype=np.int64)
    n = int(hist.sum()) + open_counts.size
    if n == 0:
        return 1
    values = np.concatenate([np.arange(hist_from, hist_from + hist.size, dtype=float),
                             np.asarray(open_counts, dtype=float)])
    freq = np.concatenate([hist, np.ones(open_counts.size, dtype=np.int64)])
    order = np.argsort(values, kind="stable")
    v, cum = values[order], np.cumsum(freq[order])
    lo = v[np.searchsorted(cum, (n - 1) // 2, side="right")]
    hi = v[np.searchsorted(cum, n // 2, side="right")]
    median = lo if n % 2 else (lo + hi) / 2.0
    return max(int(np.floor(median + 0.5)), 1)


def _sign(x: np.ndarray) -> np.ndarray:
    return np.where(x > TIE, 1, np.where(x < -TIE, -1, 0))


def _moments(x: np.ndarray) -> tuple[float, float]:
    m = float(x.mean())
    return m, float(np.sum((x - m) ** 2))


def _merge(n_a: int, mean_a: float, m2_a: float, x: np.ndarray) -> tuple[float, float]:
    """Chan et al. (1979) pairwise update of (mean, sum of squared deviations) by a batch ``x``."""
    n_b = x.size
    mean_b, m2_b = _moments(x)
    n = n_a + n_b
    delta = mean_b - mean_a
    return mean_a + delta * n_b / n, m2_a + m2_b + delta * delta * n_a * n_b / n


def _band_from(err: np.ndarray) -> tuple[np.ndarray, int, int]:
    n = err.size
    s = np.sort(err)
    lo, hi = max((n - 1) // 2 - BAND, 0), min(n // 2 + BAND, n - 1)
    return s[lo : hi + 1].copy(), lo, n - 1 - hi


def _as_rows(rows: dict[str, Any]) -> dict[str, np.ndarray]:
    out = {c: np.asarray(rows[c], dtype=float) for c in TAIL_COLUMNS[2:]}
    out["as_of"] = as_days(np.asarray(rows["as_of"]))
    out["target_date"] = as_days(np.asarray(rows["target_date"]))
    return out


def _take(rows: dict[str, np.ndarray], sl: slice) -> dict[str, np.ndarray]:
    return {c: v[sl].copy() for c, v in rows.items()}


def _tail_start(n: int, keep: int, open_mask: np.ndarray) -> int:
    """First row to keep: the last ``keep`` rows and every open row."""
    start = max(n - keep, 0)
    if open_mask.any():
        start = min(start, int(np.flatnonzero(open_mask)[0]))
    return start


def _histogram(counts: np.ndarray) -> tuple[int, np.ndarray]:
    """(first count, frequencies from it) of non-negative integer ``counts``."""
    if counts.size == 0:
        return 0, np.zeros(0, dtype=np.int64)
    lo = int(counts.min())
    return lo, np.bincount(counts - lo).astype(np.int64)


def _add_histograms(a_from: int, a: np.ndarray, b_from: int, b: np.ndarray) -> tuple[int, np.ndarray]:
    if a.size == 0:
        return b_from, b
    if b.size == 0:
        return a_from, a
    lo = min(a_from, b_from)
    out = np.zeros(max(a_from + a.size, b_from + b.size) - lo, dtype=np.int64)
    out[a_from - lo : a_from - lo + a.size] += a
    out[b_from - lo : b_from - lo + b.size] += b
    return lo, out


def _keep(lags: int, window: int | None) -> int:
    return max(lags, (window - 1) if window else 0)


def _lag_band(lags: int) -> np.ndarray:
    return np.arange(max(lags - LAG_BAND, 0), lags + LAG_BAND + 1, dtype=np.int64)


# ---------------------------------------------------------------- state

def build_cell(rows: dict[str, Any], *, window: int | None = None,
               ) -> tuple[CellState, dict[str, np.ndarray]]:
    """The state and tail of one cell from its whole record.

    ``rows`` maps :data:`TAIL_COLUMNS` to equal-length arrays sorted by (unique) as-of date, at
    least one row. ``window`` (observation days) marks the cell that carries the term premium
    (the ``all`` regime); its tail then keeps the last ``window - 1`` rows as well.
    """
    r = _as_rows(rows)
    a, t, e = r["as_of"], r["target_date"], r["error_bp"]
    n = e.size
    if n == 0:
        raise ValueError("a cell needs at least one outcome")
    counts = _overlap_counts(a, t, a)
    last = a[-1]
    closed = t <= last
    hist_from, hist = _histogram(counts[closed])
    h = horizon_from_counts(hist, _open_counts(counts[~closed], t[~closed], a[0], last, n), hist_from)
    L = max(h - 1, 0)
    f, s, real = r["forward_rate"], r["spot_rate"], r["realized_rate"]
    centre = float(np.mean(f))
    centre_s, centre_v = float(np.mean((f - s) * 1e4)), float(np.mean((real - s) * 1e4))
    centre_e, centre_d = float(np.mean(e)), float(np.mean(e * e - r["rw_error_bp"] ** 2))
    W = _monomials(r, centre, centre_s, centre_v, centre_e, centre_d)
    v = W[:, _V]
    mean_e, m2_e = _moments(e)
    mean_v, m2_v = _moments(v)
    predicted = _sign(f - s)
    moved = predicted != 0
    band, below, above = _band_from(e)
    lag_band = _lag_band(L)
    lag_cross = bartlett_cross_band(W, lag_band)
    state = CellState(
        n=n, first_as_of=a[0], last_as_of=last, horizon=h, lags=L,
        premium_lags=min(L, window - 1) if window else -1, centre=centre, centre_s=centre_s, centre_v=centre_v,
        centre_e=centre_e, centre_d=centre_d,
        sums=W.sum(axis=0), cross_moments=lag_cross[int(np.searchsorted(lag_band, L))].copy(),
        mean_e=mean_e, m2_e=m2_e, mean_v=mean_v, m2_v=m2_v,
        sum_e2=float(np.sum(e * e)), sum_u2=float(np.sum(r["rw_error_bp"] ** 2)), sum_v2=float(np.sum(v * v)),
        sum_abs_e=float(np.sum(np.abs(e))),
        min_e=float(e.min()), max_e=float(e.max()), min_f=float(f.min()), max_f=float(f.max()),
        min_s=float((f - s).min()), max_s=float((f - s).max()),
        n_moved=int(moved.sum()), n_hit=int((moved & (predicted == _sign(real - s))).sum()),
        hist_from=hist_from, hist=hist, band=band, band_below=below, band_above=above,
        lag_band=lag_band, lag_cross=lag_cross,
    )
    start = _tail_start(n, _keep(int(lag_band[-1]), window), ~closed)
    return state, _take(r, slice(start, n))


def append_cell(state: CellState, tail: dict[str, Any], new: dict[str, Any], *, window: int | None = None,
                ) -> tuple[CellState, dict[str, np.ndarray]] | None:
    """Fold ``new`` rows (later as-of dates than the state's last, sorted) into ``state`` and ``tail``.

    Returns the new ``(state, tail)``, or ``None`` when the cell must be recomputed from its whole
    record (see the module notes). ``window`` as for :func:`build_cell`.
    """
    nw = _as_rows(new)
    k = nw["error_bp"].size
    tl = _as_rows(tail)
    if k == 0:
        return state, tl
    a_new = nw["as_of"]
    if a_new[0] <= state.last_as_of or (k > 1 and not (a_new[1:] > a_new[:-1]).all()):
        return None
    m0 = tl["error_bp"].size
    lag_band = state.lag_band
    L_max = int(lag_band[-1])
    if m0 < min(_keep(L_max, window), state.n):
        return None  # the tail is shorter than the update needs (an older state's layout)
    rows = {c: np.concatenate([tl[c], nw[c]]) for c in tl}
    n0, n1 = state.n, state.n + k
    a, t = rows["as_of"], rows["target_date"]
    last = a[-1]
    counts = _overlap_counts(a, t, a)
    closing = t <= last
    closing[:m0] &= tl["target_date"] > state.last_as_of  # tail rows already final are in hist
    hist_from, hist = _add_histograms(state.hist_from, state.hist, *_histogram(counts[closing]))
    open_mask = t > last
    h = horizon_from_counts(hist, _open_counts(counts[open_mask], t[open_mask], state.first_as_of, last, n1),
                            hist_from)
    L = max(h - 1, 0)
    at = int(np.searchsorted(lag_band, L))
    if at >= lag_band.size or lag_band[at] != L:
        return None  # outside the band: the recompute centres a new one
    premium_lags = min(L, window - 1) if window else -1
    if premium_lags != state.premium_lags:
        return None

    # cross moments of every lag b of the band: each new row against itself and the b rows before it
    z0 = max(m0 - min(L_max, n0), 0)
    Z = _monomials(_take(rows, slice(z0, None)), state.centre, state.centre_s, state.centre_v, state.centre_e,
                   state.centre_d)
    Wn = Z[-k:]
    q = np.arange(Z.shape[0] - k, Z.shape[0])[:, None]
    lag = (q - np.arange(Z.shape[0])[None, :])[None, :, :]
    b = lag_band[:, None, None].astype(float)
    K = np.where((lag >= 1) & (lag <= b), 1.0 - lag / (b + 1.0), 0.0)  # (B, k, rows of Z)
    Vt = K @ Z  # (B, k, P)
    WV = Wn.T @ Vt  # (B, P, P)
    lag_cross = state.lag_cross + (Wn.T @ Wn)[None] + WV + WV.transpose(0, 2, 1)

    e, f, s, real = nw["error_bp"], nw["forward_rate"], nw["spot_rate"], nw["realized_rate"]
    v = Wn[:, _V]
    mean_e, m2_e = _merge(n0, state.mean_e, state.m2_e, e)
    mean_v, m2_v = _merge(n0, state.mean_v, state.m2_v, v)
    predicted = _sign(f - s)
    moved = predicted != 0

    band = state.band
    if band.size == 0:
        return None
    below = state.band_below + int((e < band[0]).sum())
    above = state.band_above + int((e > band[-1]).sum())
    band = np.sort(np.concatenate([band, e[(e >= band[0]) & (e <= band[-1])]]), kind="stable")
    r_lo, r_hi = (n1 - 1) // 2 - below, n1 // 2 - below
    if r_lo < 0 or r_hi > band.size - 1:
        return None
    keep_lo, keep_hi = max(r_lo - BAND, 0), min(r_hi + BAND, band.size - 1)
    above += band.size - 1 - keep_hi
    below += keep_lo
    band = band[keep_lo : keep_hi + 1].copy()

    out = replace(
        state, n=n1, last_as_of=last, horizon=h, lags=L, sums=state.sums + Wn.sum(axis=0),
        cross_moments=lag_cross[at].copy(), lag_cross=lag_cross,
        mean_e=mean_e, m2_e=m2_e, mean_v=mean_v, m2_v=m2_v,
        sum_e2=state.sum_e2 + float(np.sum(e * e)), sum_u2=state.sum_u2 + float(np.sum(nw["rw_error_bp"] ** 2)),
        sum_v2=state.sum_v2 + float(np.sum(v * v)), sum_abs_e=state.sum_abs_e + float(np.sum(np.abs(e))),
        min_e=min(state.min_e, float(e.min())), max_e=max(state.max_e, float(e.max())),
        min_f=min(state.min_f, float(f.min())), max_f=max(state.max_f, float(f.max())),
        min_s=min(state.min_s, float((f - s).min())), max_s=max(state.max_s, float((f - s).max())),
        n_moved=state.n_moved + int(moved.sum()),
        n_hit=state.n_hit + int((moved & (predicted == _sign(real - s))).sum()),
        hist_from=hist_from, hist=hist, band=band, band_below=below, band_above=above,
    )
    m1 = m0 + k
    start = _tail_start(m1, _keep(L_max, window), open_mask)
    return out, _take(rows, slice(start, m1))


# ---------------------------------------------------------------- figures

def _quad(cross: np.ndarray, c: np.ndarray) -> np.ndarray:
    return c @ cross @ c.T


def _ols(state: CellState, x: int, y: int, xx: int, xy: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """OLS of column y on [1, column x] from the sums, and the HAC covariance from the cross moments."""
    s = state.sums
    xtx = np.array([[state.n, s[x]], [s[x], s[xx]]], dtype=float)
    inv = np.linalg.inv(xtx)
    a, b = inv @ np.array([s[y], s[xy]])
    c = np.zeros((2, P))
    c[0, _ONE], c[0, y], c[0, x] = -a, 1.0, -b        # residual
    c[1, x], c[1, xy], c[1, xx] = -a, 1.0, -b         # regressor x residual
    cov = inv @ _quad(state.cross_moments, c) @ inv.T
    return np.array([a, b]), cov, inv


def _hac_of(state: CellState, col: int, mean: float) -> float:
    c = np.zeros((1, P))
    c[0, _ONE], c[0, col] = -mean, 1.0
    s = float(_quad(state.cross_moments, c)[0, 0])
    return float(np.sqrt(max(s, 0.0)) / state.n)


def cell_summary(state: CellState) -> dict[str, Any]:
    """The statistics of :func:`pipeline.audit.summarize` for this cell (its keys after the grouping
    columns): n, dates, mean, median, std, RMSE, MAE, HAC t, DM, MZ, FB, hit rate and the overlap figures
    (:func:`pipeline.audit.statistics.overlap_inference`)."""
    n, h, L = state.n, state.horizon, state.lags
    rmse = float(np.sqrt(state.sum_e2 / n))
    rw_rmse = float(np.sqrt(state.sum_u2 / n))
    r_lo, r_hi = (n - 1) // 2 - state.band_below, n // 2 - state.band_below
    median = float(state.band[r_lo]) if n % 2 else float((state.band[r_lo] + state.band[r_hi]) / 2.0)
    out: dict[str, Any] = {
        "n": n, "first_as_of": state.first_as_of, "last_as_of": state.last_as_of,
        "mean_error_bp": state.mean_e, "median_error_bp": median,
        "std_error_bp": float(np.sqrt(state.m2_e / (n - 1))) if n >= 2 else _NAN,
        "rmse_bp": rmse, "mae_bp": state.sum_abs_e / n, "hac_t": _NAN, "hac_se_bp": _NAN, "lags": L,
        "rw_rmse_bp": rw_rmse, "rmse_ratio": rmse / rw_rmse if rw_rmse > 0 else _NAN,
        "dm_stat": _NAN, "dm_pvalue": _NAN, "mz_alpha": _NAN, "mz_beta": _NAN, "mz_pvalue": _NAN,
        "fb_beta": _NAN, "fb_beta_se": _NAN, "fb_r2": _NAN,
        "hit_rate": state.n_hit / state.n_moved if state.n_moved else _NAN,
    }
    if n < MIN_OBS or h >= n or state.max_e - state.min_e <= TIE * 1e4:
        out.update(overlap_inference(n, h, _NAN, _NAN))
        return out
    mean = state.mean_e
    se = _hac_of(state, _E, float(state.sums[_E] / n))  # the centred errors' mean
    out["hac_se_bp"] = se
    out["hac_t"] = mean / se if se > 0 else _NAN
    if max(abs(state.min_s), abs(state.max_s)) > TIE:
        dc = float(state.sums[_D] / n)
        dbar = state.centre_d + dc
        dse = _hac_of(state, _D, dc)
        k = hln_factor(n, h)
        if np.isfinite(k) and dse > 0.0 and np.isfinite(dse):
            dm = k * dbar / dse
            out["dm_stat"], out["dm_pvalue"] = float(dm), float(2.0 * special.stdtr(n - 1, -abs(dm)))
    if state.max_f - state.min_f > TIE:
        (a, b), cov, _ = _ols(state, _F, _R, _FF, _FR)
        diff = np.array([a, b - 1.0])
        wald = float(diff @ np.linalg.solve(cov, diff))
        out["mz_alpha"] = state.centre * (1.0 - b) + a / 1e4
        out["mz_beta"], out["mz_pvalue"] = float(b), float(special.chdtrc(2, wald))
    if state.max_s - state.min_s > TIE:
        (a, b), cov, _ = _ols(state, _S, _V, _SS, _SV)
        s = state.sums
        ssr = (state.sum_v2 - 2 * a * s[_V] - 2 * b * s[_SV] + n * a * a + 2 * a * b * s[_S] + b * b * s[_SS])
        out["fb_beta"], out["fb_beta_se"] = float(b), float(np.sqrt(cov[1, 1]))
        out["fb_r2"] = 1.0 - ssr / state.m2_v if state.m2_v > 0 else _NAN
    out.update(overlap_inference(n, h, out["hac_t"], out["dm_stat"]))
    return out


def premium_increment(tail: dict[str, Any], new: dict[str, Any], window: int, lags: int,
                      ) -> dict[str, np.ndarray]:
    """Term-premium figures of the trailing windows that end at the ``new`` rows.

    ``tail`` holds (at least) the ``window - 1`` rows before them. Returns ``as_of``, ``premium_bp``
    and ``se_bp`` (the Newey-West standard error of the window mean with ``lags`` lags), one entry per
    new row that completes a full window: the figures of :func:`pipeline.audit.term_premium` there.
    """
    w = int(window)
    e_tail = np.asarray(tail["error_bp"], dtype=float)[-(w - 1):] if w > 1 else np.empty(0)
    e_new = np.asarray(new["error_bp"], dtype=float)
    x = np.concatenate([e_tail, e_new])
    mean, se = rolling_mean_hac_se(x, w, lags)
    a = as_days(np.asarray(new["as_of"]))[e_new.size - mean.size:]
    return {"as_of": a, "premium_bp": mean, "se_bp": se}
