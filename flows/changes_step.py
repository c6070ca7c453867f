"""``afterward changes --since TS``: what changed in the record since TS, and why.

Restated quotes (old and new rate, the load that restated them), days rebuilt after TS, outcomes
superseded after TS (read from the official store, :mod:`warehouse.changes`), and the audit cells
whose mean error or verdict moved: the audit as known at TS (recomputed on a scratch copy by
:mod:`flows.known_at_step`) against the audit stored now.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

import pandas as pd

from pipeline.config import Config
from warehouse import changes as store
from warehouse.connect import reader

__all__ = ["Changes", "MOVED_BP", "changes_since", "change_rows"]

MOVED_BP = 0.05  # a mean error that moved by less than this (bp) is rounding, not a change
_CELL = ["curve", "start_months", "tenor_months", "regime"]


@dataclass
class Changes:
    """The frames of :func:`changes_since` (each may be empty)."""

    since: datetime
    restated: pd.DataFrame
    rebuilt: pd.DataFrame
    superseded: pd.DataFrame
    moved: pd.DataFrame  # curve, start_months, tenor_months, regime, old/new mean_error_bp, old/new verdict


def _moved(then: pd.DataFrame, now: pd.DataFrame) -> pd.DataFrame:
    cols = ["mean_error_bp", "verdict"]
    if then.empty and now.empty:
        return pd.DataFrame(columns=[*_CELL, "old_mean_error_bp", "new_mean_error_bp", "old_verdict", "new_verdict"])
    m = then[_CELL + cols].merge(now[_CELL + cols], on=_CELL, how="outer", suffixes=("_old", "_new"))
    old, new = m["mean_error_bp_old"], m["mean_error_bp_new"]
    moved = (old - new).abs().gt(MOVED_BP) | old.isna().ne(new.isna()) | m["verdict_old"].ne(m["verdict_new"])
    out = m[moved].rename(columns={"mean_error_bp_old": "old_mean_error_bp", "mean_error_bp_new": "new_mean_error_bp",
                                   "verdict_old": "old_verdict", "verdict_new": "new_verdict"})
    return out.sort_values(_CELL, ignore_index=True)


def changes_since(cfg: Config, since: datetime, curve: str | None = None) -> Changes:
    """What changed in the record of ``curve`` (default: every curve) since ``since`` (naive UTC)."""
    from flows.audit_step import run_audit
    from flows.known_at_step import known_at

    with reader(cfg.store_path) as con:
        restated = store.restated_quotes(con, since, curve)
        rebuilt = store.rebuilt_days(con, since, curve)
        superseded = store.superseded_outcomes(con, since, curve)
        now = con.sql("SELECT * FROM audit_result" + (" WHERE curve = $curve" if curve else ""),
                      params={"curve": curve} if curve else None).df()
    with known_at(cfg, since, audit=False) as k:
        results = run_audit(k.cfg, curve)
    frames = [f for f in results.values() if len(f)]
    then = pd.concat(frames, ignore_index=True) if frames else now.iloc[0:0]
    return Changes(since, restated, rebuilt, superseded, _moved(then, now))


def change_rows(ch: Changes) -> pd.DataFrame:
    """Every change as one row: ``kind`` (restated | rebuilt | superseded | audit), ``curve``, ``as_of``,
    ``item`` (tenor, or start x tenor / regime), ``old``, ``new`` and ``why`` (plain words)."""
    rows = []
    for r in ch.restated.itertuples(index=False):
        rows.append(("restated", r.curve, r.as_of, r.tenor, f"{r.old_rate:.10g}", f"{r.new_rate:.10g}",
                     f"load {r.load_id} ({r.file_name}) at {r.restated_at:%Y-%m-%d %H:%M:%S}"))
    for r in ch.rebuilt.itertuples(index=False):
        rows.append(("rebuilt", r.curve, r.as_of, "", "", f"{int(r.forwards)} forwards",
                     f"built again at {r.built_at:%Y-%m-%d %H:%M:%S}"))
    for r in ch.superseded.itertuples(index=False):
        rows.append(("superseded", r.curve, r.first_as_of, f"{int(r.start_months)}M x {int(r.tenor_months)}M",
                     f"{int(r.outcomes)} outcomes", "re-derived",
                     f"as-of {r.first_as_of:%Y-%m-%d} to {r.last_as_of:%Y-%m-%d}: their days were rebuilt"))
    for r in ch.moved.itertuples(index=False):
        old = "" if pd.isna(r.old_mean_error_bp) else f"{r.old_mean_error_bp:.1f} bp"
        new = "" if pd.isna(r.new_mean_error_bp) else f"{r.new_mean_error_bp:.1f} bp"
        why = ("verdict: " + str(r.old_verdict) + " -> " + str(r.new_verdict)) if r.old_verdict != r.new_verdict \
            else "mean error moved"
        rows.append(("audit", r.curve, None, f"{int(r.start_months)}M x {int(r.tenor_months)}M {r.regime}", old, new,
                     why))
    return pd.DataFrame(rows, columns=["kind", "curve", "as_of", "item", "old", "new", "why"])
