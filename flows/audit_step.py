"""The audit step: forecast-error statistics and the term-premium record from the current outcomes.

Read from the store (:mod:`warehouse.audit`), compute (:mod:`pipeline.audit.refresh`), write back. Two
ways to the same rows of ``audit_summary`` and ``term_premium``:

* :func:`run_audit` recomputes a curve's whole record, optionally over an as-of window, and records
  the window and the data version (the latest ``realized_at`` used) beside the figures. An
  unwindowed run also stores the curve's running state (``audit_state_*``, see
  :mod:`pipeline.audit.state`); a windowed run drops it, since the stored rows no longer describe the
  whole record.
* :func:`refresh_audit_incremental` is the daily path: it folds only the outcomes realised since the
  state was stored into it (:func:`pipeline.audit.refresh.fold`). A cell is recomputed from its
  record when the fold cannot take its new rows; the whole curve is, when outcomes were superseded
  since (a restatement), when the counts do not add up, or when the state is missing, was stored in
  an older layout (without the lag band, sql/008) or was built for another premium window or
  inversion pair.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import duckdb
import pandas as pd

from pipeline.audit.refresh import WholeAudit, audit_record, finish_summary, fold, settle
from pipeline.config import Config, CurveConfig
from warehouse import audit as store
from warehouse.connect import transaction, writer_for
from warehouse.loads import utc_now

__all__ = ["STATE_FORMAT", "AuditRefresh", "CurveRecord", "read_outcomes", "read_record",
           "refresh_audit_incremental", "run_audit", "store_whole_audit", "whole_record_due"]

STATE_FORMAT = 3  # bump when CellState's layout or meaning changes: stored states are then rebuilt
# (3: term-premium bands take the fixed-b critical value, so a store audited before is recomputed once)


@dataclass
class AuditRefresh:
    """What :func:`refresh_audit_incremental` did for one curve.

    ``mode`` is ``incremental``, ``full`` (the whole curve recomputed, ``reason`` says why) or
    ``unchanged`` (no new outcomes). ``recomputed`` lists the (start, tenor) cells recomputed from
    their record during an incremental refresh; ``new_outcomes`` counts the outcomes folded in.
    """

    curve: str
    mode: str
    summary: pd.DataFrame
    reason: str = ""
    new_outcomes: int = 0
    recomputed: list[tuple[int, int]] = field(default_factory=list)


@dataclass
class CurveRecord:
    """A curve's current outcomes (:func:`read_outcomes`) as read for a whole-record audit, with
    ``seen``: (latest realized_at, latest superseded_at, count of current rows) when they were read."""

    curve: str
    seen: tuple
    outcomes: pd.DataFrame
    reason: str = ""


def _pair(c: CurveConfig) -> tuple[str, str] | None:
    """The curve's regime pair (its first inversion pair) as tenor labels."""
    return (c.inversion_pairs[0][0].label, c.inversion_pairs[0][1].label) if c.inversion_pairs else None


def _pair_label(c: CurveConfig) -> str:
    pair = _pair(c)
    return f"{pair[0]}/{pair[1]}" if pair else ""


def read_outcomes(con, cfg: Config, curve: str, where: str = "", params: list | None = None,  # noqa: ANN001
                  quotes_between: tuple | None = None) -> pd.DataFrame:
    """The current outcomes of ``curve`` with ``inverted`` (see :func:`warehouse.audit.read_outcomes`)."""
    return store.read_outcomes(con, curve, _pair(cfg.curve(curve)), where, params, quotes_between)


def read_record(con, cfg: Config, name: str) -> CurveRecord:  # noqa: ANN001
    """The curve's current outcomes for a whole-record audit."""
    return CurveRecord(name, store.outcomes_seen(con, name), read_outcomes(con, cfg, name))


def _state_meta(c: CurveConfig, seen: tuple, version, now) -> tuple:  # noqa: ANN001
    return (STATE_FORMAT, c.premium_window_days, _pair_label(c), seen[0], seen[1], seen[2], version, now)


def _version() -> str:
    from flows.build_step import code_version

    return code_version()


def _store_whole(con, name: str, c: CurveConfig, audit: WholeAudit, seen: tuple, now) -> None:  # noqa: ANN001
    store.write_results(con, name, audit.summary, audit.premium, None)
    store.record_run(con, name, now, "full", _version())
    if audit.states is None:
        store.drop_state(con, name)
    else:
        store.write_state(con, name, audit.states, _state_meta(c, seen, audit.data_version, now))


def _full_curve(con, cfg: Config, name: str, now, first: str | None = None,  # noqa: ANN001
                last: str | None = None) -> pd.DataFrame:
    """Recompute a curve's audit from its whole record (over ``first``..``last`` if given) and store it."""
    record = read_record(con, cfg, name)
    if record.outcomes.empty:
        return pd.DataFrame()
    c = cfg.curve(name)
    audit = audit_record(record.outcomes, c.premium_window_days, now, first, last)
    _store_whole(con, name, c, audit, record.seen, now)
    return audit.summary


def run_audit(cfg: Config, curve: str | None = None, first: str | None = None,
              last: str | None = None, *, con: duckdb.DuckDBPyConnection | None = None) -> dict[str, pd.DataFrame]:
    """Recompute and store the audit of the chosen curves; returns each curve's summary frame.
    ``con``: the store to use (default: open one for the call)."""
    out: dict[str, pd.DataFrame] = {}
    names = [curve] if curve else list(cfg.curves)
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            with transaction(con):
                out[name] = _full_curve(con, cfg, name, utc_now(), first, last)
    return out


def _refresh_plan(con, cfg: Config, name: str) -> tuple[str, str, tuple, tuple | None]:  # noqa: ANN001
    """How a refresh treats the curve: (mode, reason, seen, stored meta row), mode ``unchanged`` (no
    outcomes), ``full`` (recompute the whole record; reason says why) or ``incremental``."""
    c = cfg.curve(name)
    meta = store.state_meta(con, name)
    seen = store.outcomes_seen(con, name)
    if not seen[2]:
        return "unchanged", "no outcomes", seen, meta
    if meta is None:
        return "full", "no stored state", seen, meta
    fmt, window_days, pair, _, seen_superseded, _, _, older = meta
    if fmt != STATE_FORMAT or window_days != c.premium_window_days or pair != _pair_label(c):
        return "full", "state built for another format, premium window or inversion pair", seen, meta
    if older:
        return "full", "state stored in an older layout (without the lag band)", seen, meta
    if seen[1] is not None and (seen_superseded is None or seen[1] > seen_superseded):
        return "full", "outcomes superseded since the state was stored", seen, meta
    return "incremental", "", seen, meta


def _refresh_curve(con, cfg: Config, name: str, now) -> AuditRefresh:  # noqa: ANN001
    c = cfg.curve(name)
    mode, reason, seen, meta = _refresh_plan(con, cfg, name)
    if mode == "unchanged":
        return AuditRefresh(name, "unchanged", pd.DataFrame(), reason)
    if mode == "full":
        return AuditRefresh(name, "full", _full_curve(con, cfg, name, now), reason, int(seen[2] or 0))
    _, _, _, seen_realized, _, n_current, data_version, _ = meta
    new = read_outcomes(con, cfg, name, "AND o.realized_at > ?", [seen_realized],
                        quotes_between=store.new_outcome_span(con, name, seen_realized))
    if int(n_current) + len(new) != int(seen[2]):
        why = "the current outcomes do not add up to the state's count plus the new ones"
        return AuditRefresh(name, "full", _full_curve(con, cfg, name, now), why, int(seen[2] or 0))
    if new.empty:
        return AuditRefresh(name, "unchanged", store.read_summary(con, name))

    folded = fold(name, store.read_state(con, name), new, c.premium_window_days)
    record = read_outcomes(con, cfg, name, store.cells_sql(folded.recompute)) if folded.recompute else None
    summary, premium = settle(folded, record)
    version = max(pd.Timestamp(data_version), new["realized_at"].max()) if data_version is not None \
        else new["realized_at"].max()
    summary = finish_summary(summary, version, now)
    store.write_results(con, name, summary, premium, folded.recompute)
    store.record_run(con, name, now, "incremental", _version())
    store.write_state(con, name, folded.states, _state_meta(c, seen, version, now), folded.tail_changes)
    return AuditRefresh(name, "incremental", summary, new_outcomes=len(new), recomputed=folded.recompute)


def whole_record_due(cfg: Config, name: str, *, con: duckdb.DuckDBPyConnection | None = None
                     ) -> CurveRecord | None:
    """The curve's record when a refresh would recompute it whole (no stored state yet, say, as after
    a first backfill); None when the refresh has nothing to do or would be incremental.

    With :func:`pipeline.audit.refresh.audit_record` (anywhere) and :func:`store_whole_audit`, this is
    a refresh in three parts, so that the computation, the costly part, can run in another process."""
    with writer_for(cfg.store_path, con) as con:
        mode, reason, _, _ = _refresh_plan(con, cfg, name)
        if mode != "full":
            return None
        record = read_record(con, cfg, name)
    record.reason = reason
    return record if len(record.outcomes) else None


def store_whole_audit(cfg: Config, record: CurveRecord, audit: WholeAudit, now, *,  # noqa: ANN001
                      con: duckdb.DuckDBPyConnection | None = None) -> AuditRefresh:
    """Store ``audit``, computed from ``record`` and stamped ``now``, in one transaction; if the
    curve's outcomes changed since the record was read, refresh the curve here instead (as
    :func:`refresh_audit_incremental` would), so nothing stale is stored."""
    name = record.curve
    with writer_for(cfg.store_path, con) as con, transaction(con):
        if store.outcomes_seen(con, name) != record.seen:
            return _refresh_curve(con, cfg, name, utc_now())
        _store_whole(con, name, cfg.curve(name), audit, record.seen, now)
        return AuditRefresh(name, "full", audit.summary, record.reason, int(record.seen[2] or 0))


def refresh_audit_incremental(cfg: Config, curve: str | None = None, *,
                              con: duckdb.DuckDBPyConnection | None = None) -> dict[str, AuditRefresh]:
    """Bring the stored audit of the chosen curves up to date with the outcomes, folding in only the
    outcomes realised since the last audit (see the module notes); the rows written equal those of
    :func:`run_audit` without a window. Returns what was done per curve."""
    out: dict[str, AuditRefresh] = {}
    names = [curve] if curve else list(cfg.curves)
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            with transaction(con):
                out[name] = _refresh_curve(con, cfg, name, utc_now())
    return out
