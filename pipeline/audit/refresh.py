"""The audit of a curve's record, whole or folded forward: pure functions, no store.

A curve's audit is a set of *cells*, one per (start, tenor, regime), each with a running
:class:`~pipeline.audit.state.CellState` and the tail of rows it must keep (see
:mod:`pipeline.audit.state`). Two ways to the same ``audit_summary`` and ``term_premium`` rows:

* :func:`audit_record` computes the whole record (:func:`~pipeline.audit.statistics.summarize` and
  :func:`~pipeline.audit.statistics.term_premium`, the reference) and every cell's state;
* :func:`fold` takes the stored states and only the outcomes realised since, and folds them in.
  A (start, tenor) whose new rows break an assumption of the running state (a new outcome not after
  the cell's last as-of date, a Newey-West lag outside the stored lag band, an exhausted median band)
  is named in :attr:`Fold.recompute`; the caller reads those cells' whole records and
  :func:`settle` rebuilds them, so the result equals :func:`audit_record` on the whole record.

Outcome frames carry the columns of :data:`OUTCOME_COLUMNS`, sorted by (start, tenor, as_of), with
``inverted`` (the curve's first inversion pair at the as-of date; NA when unknown). Errors are in
basis points, rates in decimals, dates datetime64[D].
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from pipeline.audit.state import TAIL_COLUMNS, CellState, append_cell, build_cell, cell_summary, premium_increment
from pipeline.audit.statistics import SUMMARY_COLUMNS, premium_band_critical, summarize, term_premium, verdict

__all__ = ["PREMIUM_COLUMNS", "REGIMES", "Fold", "WholeAudit", "audit_record", "build_states", "finish_summary",
           "fold", "join_audits", "regime_masks", "settle", "split_record", "summary_rows"]

REGIMES = ("all", "inverted", "normal")
CELL_KEY = ["start_months", "tenor_months"]
PREMIUM_COLUMNS = ["curve", "as_of", "start_months", "tenor_months", "window_days", "premium_bp", "lower_bp",
                   "upper_bp"]

# a cell's state with the rows it keeps: key (start_months, tenor_months, regime)
States = dict[tuple, tuple[CellState, dict]]


def regime_masks(frame: pd.DataFrame) -> dict[str, np.ndarray]:
    """Row masks of each regime: ``all``, ``inverted`` and ``normal`` (an unknown ``inverted`` is in ``all`` only)."""
    inv = frame["inverted"].astype("boolean")
    return {"all": np.ones(len(frame), dtype=bool), "inverted": inv.fillna(False).to_numpy(dtype=bool),
            "normal": (~inv).fillna(False).to_numpy(dtype=bool)}


def _rows(frame: pd.DataFrame, mask: np.ndarray | None = None) -> dict[str, np.ndarray]:
    return {c: (frame[c].to_numpy() if mask is None else frame[c].to_numpy()[mask]) for c in TAIL_COLUMNS}


def build_states(frame: pd.DataFrame, window: int) -> States:
    """State and tail of every (start, tenor, regime) cell of ``frame`` (sorted by start, tenor, as_of);
    ``window`` is the term-premium window in outcomes (the ``all`` regime keeps its tail)."""
    out: States = {}
    for (s, m), grp in frame.groupby(CELL_KEY, sort=True):
        for regime, mask in regime_masks(grp).items():
            if mask.any():
                out[(int(s), int(m), regime)] = build_cell(_rows(grp, mask), window=window if regime == "all" else None)
    return out


def premium_frame(curve: str, pieces: list[tuple[int, int, dict]], window: int) -> pd.DataFrame:
    """Term-premium rows (:data:`PREMIUM_COLUMNS`) from per-cell increments (start, tenor, increment)."""
    pieces = [p for p in pieces if p[2]["as_of"].size]
    if not pieces:
        return pd.DataFrame({c: [] for c in PREMIUM_COLUMNS})
    size = [p[2]["as_of"].size for p in pieces]
    mean = np.concatenate([p[2]["premium_bp"] for p in pieces])
    half = np.concatenate([p[2]["critical"] * p[2]["se_bp"] for p in pieces])
    return pd.DataFrame({
        "curve": curve,
        "as_of": np.concatenate([p[2]["as_of"] for p in pieces]),
        "start_months": np.repeat([p[0] for p in pieces], size),
        "tenor_months": np.repeat([p[1] for p in pieces], size),
        "window_days": window, "premium_bp": mean, "lower_bp": mean - half, "upper_bp": mean + half,
    })


def finish_summary(summary: pd.DataFrame, data_version, now, first=None, last=None) -> pd.DataFrame:  # noqa: ANN001
    """The summary with its verdict line, window, data version and computation time (as stored)."""
    summary = summary.copy()
    summary["verdict"] = [verdict(r) for r in summary.to_dict("records")]
    summary["window_from"] = pd.to_datetime(first) if first else pd.NaT
    summary["window_to"] = pd.to_datetime(last) if last else pd.NaT
    summary["data_version"] = data_version
    summary["computed_at"] = now
    return summary


def summary_rows(curve: str, states: States) -> pd.DataFrame:
    """``audit_summary`` rows (:data:`SUMMARY_COLUMNS`) from the cells' states, in (start, tenor, regime) order."""
    rows = []
    for key in sorted(states, key=lambda k: (k[0], k[1], REGIMES.index(k[2]))):
        row = {"curve": curve, "start_months": key[0], "tenor_months": key[1], "regime": key[2]}
        row.update(cell_summary(states[key][0]))
        rows.append(row)
    out = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    out["n"] = out["n"].astype(np.int64)
    out["lags"] = out["lags"].astype(np.int64)
    out["indicative"] = out["indicative"].astype(bool)
    return out


def tail_change(old: dict, new: dict) -> tuple:
    """(keep_from, rows to append) turning the stored tail ``old`` into ``new``: stored rows before
    ``keep_from`` are dropped (all of them when None)."""
    keep_from = new["as_of"][0] if new["as_of"].size else None
    if old["as_of"].size and keep_from is not None:
        fresh = new["as_of"] > old["as_of"][-1]
    else:
        fresh = np.ones(new["as_of"].size, dtype=bool)
    if keep_from is not None and old["as_of"].size and keep_from > old["as_of"][-1]:
        keep_from = None  # nothing of the old tail is kept
    return keep_from, {c: v[fresh] for c, v in new.items()}


# --- the whole record ---------------------------------------------------------------------------

@dataclass
class WholeAudit:
    """A whole-record audit of one curve, computed and not yet stored: the summary and term-premium
    rows, the running state of every cell (None for a windowed audit, which stores none) and the
    data version (the latest ``realized_at`` used)."""

    summary: pd.DataFrame
    premium: pd.DataFrame
    states: States | None
    data_version: object


def audit_record(outcomes: pd.DataFrame, window: int, now, first: str | None = None,  # noqa: ANN001
                 last: str | None = None, version: object = None) -> WholeAudit:
    """The whole-record audit of a curve's outcomes (over as-of ``first``..``last`` if given), stamped
    ``now`` (store clock, naive UTC) and ``version`` (default: the outcomes' latest ``realized_at``);
    ``window`` is the term-premium window in outcomes.

    Every figure belongs to one (start, tenor) cell, so the audit of a record split by cells
    (:func:`split_record`) and put together again (:func:`join_audits`) is the audit of the whole,
    given the whole record's ``version``."""
    windowed = bool(first or last)
    version = outcomes["realized_at"].max() if version is None else version
    summary = finish_summary(summarize(outcomes, first=first, last=last), version, now, first, last)
    part = outcomes
    if windowed:
        keep = pd.Series(True, index=outcomes.index)
        if first:
            keep &= outcomes["as_of"] >= pd.Timestamp(first)
        if last:
            keep &= outcomes["as_of"] <= pd.Timestamp(last)
        part = outcomes.loc[keep]
    premium = term_premium(part, window)
    states = None if windowed else build_states(outcomes, window)
    return WholeAudit(summary, premium, states, version)


def split_record(outcomes: pd.DataFrame, parts: int) -> list[pd.DataFrame]:
    """``outcomes`` (sorted by start, tenor, as-of) cut between (start, tenor) cells into at most
    ``parts`` runs of cells of about equal rows, in order."""
    start = outcomes["start_months"].to_numpy()
    tenor = outcomes["tenor_months"].to_numpy()
    n = len(outcomes)
    cells = np.flatnonzero((np.diff(start) != 0) | (np.diff(tenor) != 0)) + 1  # where each new cell starts
    if parts <= 1 or not cells.size:
        return [outcomes]
    # the cell boundary nearest each equal-rows cut point
    wanted = n * np.arange(1, parts) / parts
    cuts = np.unique(cells[np.abs(cells[None, :] - wanted[:, None]).argmin(axis=1)])
    edges = np.concatenate([[0], cuts, [n]])
    return [outcomes.iloc[a:b] for a, b in zip(edges[:-1], edges[1:], strict=True)]


def join_audits(pieces: list[WholeAudit]) -> WholeAudit:
    """The audits of a record's runs of cells (:func:`split_record`, in order) as one."""
    if len(pieces) == 1:
        return pieces[0]

    def concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
        kept = [f for f in frames if len(f)] or frames[:1]
        return pd.concat(kept, ignore_index=True) if len(kept) > 1 else kept[0].reset_index(drop=True)

    states = None if pieces[0].states is None else {k: v for p in pieces for k, v in p.states.items()}
    return WholeAudit(concat([p.summary for p in pieces]), concat([p.premium for p in pieces]), states,
                      pieces[0].data_version)


# --- folding new outcomes in --------------------------------------------------------------------

@dataclass
class Fold:
    """New outcomes folded into a curve's states (:func:`fold`), before the cells that could not be
    folded are rebuilt (:func:`settle`).

    ``states``: every cell's state after the fold (the ``recompute`` cells still hold their old state);
    ``tail_changes``: per changed cell, (keep_from, rows) as :func:`tail_change` gives;
    ``premium``: the term-premium rows of the windows that end at the new outcomes;
    ``recompute``: the (start, tenor) pairs to rebuild from their whole record."""

    curve: str
    window: int
    states: States
    tail_changes: dict[tuple, tuple] = field(default_factory=dict)
    premium: pd.DataFrame | None = None
    recompute: list[tuple[int, int]] = field(default_factory=list)
    empty_tail: dict = field(default_factory=dict)   # the tail columns with no rows (for a dropped tail)


def fold(curve: str, states: States, new: pd.DataFrame, window: int) -> Fold:
    """Fold ``new`` outcomes (realised since ``states`` were built; sorted by start, tenor, as_of) into a
    copy of ``states``. ``window``: the term-premium window in outcomes."""
    states = dict(states)
    recompute: list[tuple[int, int]] = []
    premium_pieces: list[tuple[int, int, dict]] = []
    tail_changes: dict[tuple, tuple] = {}
    cols = {c: new[c].to_numpy() for c in TAIL_COLUMNS}
    masks = regime_masks(new)
    start, tenor = new["start_months"].to_numpy(), new["tenor_months"].to_numpy()
    cut = np.flatnonzero((np.diff(start) != 0) | (np.diff(tenor) != 0)) + 1
    bounds = zip(np.concatenate([[0], cut]), np.concatenate([cut, [len(new)]]), strict=True) if len(new) else ()
    for g0, g1 in bounds:
        s, m = int(start[g0]), int(tenor[g0])
        key = (s, m, "all")
        if key not in states or cols["as_of"][g0] <= states[key][0].last_as_of:
            recompute.append((s, m))
            continue
        updated: States = {}
        piece = None
        for regime in REGIMES:
            mask = masks[regime][g0:g1]
            if not mask.any():
                continue
            k = (s, m, regime)
            if k not in states:
                break
            state, tail = states[k]
            rows = {c: v[g0:g1][mask] for c, v in cols.items()}
            res = append_cell(state, tail, rows, window=window if regime == "all" else None)
            if res is None:
                break
            if regime == "all":
                piece = (s, m, {**premium_increment(tail, rows, window, res[0].premium_lags),
                                "critical": premium_band_critical(window, res[0].horizon)})
            updated[k] = res
        else:
            for k, res in updated.items():
                tail_changes[k] = tail_change(states[k][1], res[1])
                states[k] = res
            premium_pieces.append(piece)  # type: ignore[arg-type]
            continue
        recompute.append((s, m))
    return Fold(curve, window, states, tail_changes, premium_frame(curve, premium_pieces, window), recompute,
                {c: v[:0] for c, v in cols.items()})


def settle(f: Fold, record: pd.DataFrame | None = None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Rebuild the :attr:`Fold.recompute` cells from ``record`` (their whole current outcomes, sorted
    by start, tenor, as_of; needed when there are such cells), in place; returns (summary rows,
    premium rows to store: the new windows of folded cells and every window of the rebuilt ones)."""
    summary = summary_rows(f.curve, f.states)
    premium = f.premium if f.premium is not None else premium_frame(f.curve, [], f.window)
    if not f.recompute:
        return summary, premium
    if record is None:
        raise ValueError("settle: the fold has cells to rebuild and no record of them was given")
    rebuilt = build_states(record, f.window)
    redo = set(f.recompute)
    for k in [k for k in f.states if (k[0], k[1]) in redo]:
        del f.states[k]
        f.tail_changes[k] = (None, f.empty_tail)
    f.states.update(rebuilt)
    f.tail_changes.update({k: (None, v[1]) for k, v in rebuilt.items()})
    ref = summarize(record)
    summary = summary[~pd.MultiIndex.from_frame(summary[CELL_KEY]).isin(f.recompute)]
    summary = pd.concat([summary, ref], ignore_index=True)
    order = np.lexsort((summary["regime"].map(REGIMES.index).to_numpy(), summary["tenor_months"].to_numpy(),
                        summary["start_months"].to_numpy()))
    summary = summary.iloc[order].reset_index(drop=True)
    premium = pd.concat([premium, term_premium(record, f.window)], ignore_index=True)
    return summary, premium
