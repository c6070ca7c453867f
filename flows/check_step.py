"""The check step: curve-level data checks over the stored quotes, recorded as findings.

Incremental by default: only days whose quotes changed since the curve's last check (new or
restated) are checked, with about a year of earlier days as context; ``all_days`` re-checks the
whole history. Findings of re-checked days are closed ("re-checked") and raised afresh, never
deleted. Row-level findings raised by loads are closed when their day is restated. Inversion
episodes are judged on the days the record trusts: a day held back by a reject finding is not judged.
"""

from __future__ import annotations

import getpass
from dataclasses import dataclass, field
from datetime import UTC, datetime
from zoneinfo import ZoneInfo

import duckdb
import numpy as np

from pipeline.checks import CHECKS, curve_checks, inversion_episodes, late_curve, pairs_inverted_first
from pipeline.config import Config, CurveConfig
from warehouse import findings as store
from warehouse.connect import transaction, writer_for
from warehouse.frames import QuotePanel, last_quoted_day, read_quote_panel
from warehouse.loads import utc_now

__all__ = ["CURVE_LEVEL_CHECKS", "CheckSummary", "accept_day", "note_late_curves", "run_checks"]

# the findings a re-check closes and raises afresh, as the checks declare them
CURVE_LEVEL_CHECKS = tuple(c.name for c in CHECKS if c.rechecked)
CONTEXT_DAYS = 300  # observed days before the first day checked: history for the outlier test


@dataclass
class CheckSummary:
    curves: dict[str, dict] = field(default_factory=dict)

    @property
    def new_findings(self) -> int:
        return sum(c["findings"] for c in self.curves.values())


def run_checks(cfg: Config, curve: str | None = None, first: object = None, last: object = None,
               all_days: bool = False, *, con: duckdb.DuckDBPyConnection | None = None) -> CheckSummary:
    """Check the chosen curves (all by default) and record their findings; returns counts per curve.
    ``con``: the store to use (default: open one for the call)."""
    summary = CheckSummary()
    names = [curve] if curve else list(cfg.curves)
    nothing = {"days_checked": 0, "findings": 0, "first_day": None, "last_day": None}
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            c = cfg.curve(name)
            now = utc_now()
            store.close_arrived(con, name, now)
            last_run = store.last_check_run(con, name)
            read_from = None
            if not all_days and last_run is not None and first is None:
                changed = store.changed_from(con, name, last_run, last)
                if changed is None:  # no quote changed since the last run
                    summary.curves[name] = dict(nothing)
                    store.close_restated(con, name, now, last_run)
                    continue
                read_from = store.context_start(con, name, changed, CONTEXT_DAYS)
            panel = read_quote_panel(con, name, list(c.tenor_labels), read_from, last)
            todo = np.ones(len(panel), dtype=bool)
            if first is not None:
                todo &= panel.as_of >= np.datetime64(str(first), "D")
            if not all_days and last_run is not None:
                todo &= panel.recorded_at > np.datetime64(last_run, "us")
            if not todo.any():
                summary.curves[name] = dict(nothing)
                store.close_restated(con, name, now, last_run)
                continue
            start = int(np.flatnonzero(todo)[0])
            lo = max(0, start - CONTEXT_DAYS)
            previous = (panel.as_of[lo:start], panel.rates[lo:start]) if start > lo else None
            found = curve_checks(panel.as_of[start:], panel.tenors, panel.rates[start:], c, previous=previous)
            # findings from this run cover days after the last context day (missing days included)
            bound = panel.as_of[start - 1] + np.timedelta64(1, "D") if start > 0 else panel.as_of[0]
            with transaction(con):
                store.close_rechecked(con, name, now, bound, CURVE_LEVEL_CHECKS)
                store.insert_findings(con, name, found, now)
                store.close_restated(con, name, now, last_run)
                # after this run's findings are in, so that the days they hold back are not judged
                _store_episodes(con, name, c, panel, incremental=read_from is not None, last=last)
                store.record_check_run(con, name, now, panel.as_of[start], panel.as_of[-1], len(panel) - start,
                                       len(found), all_days)
            summary.curves[name] = {"days_checked": len(panel) - start, "findings": len(found),
                                    "first_day": str(panel.as_of[start]), "last_day": str(panel.as_of[-1])}
    return summary


def note_late_curves(cfg: Config, now: datetime | None = None, *,
                     con: duckdb.DuckDBPyConnection | None = None) -> int:
    """Raise a ``late_curve`` finding for each curve whose last curve due by ``now`` (naive UTC; default
    the store's clock) has not arrived; returns how many it raised. A day already noted is not noted
    again; the finding closes when the curve arrives (see :func:`run_checks`)."""
    now = utc_now() if now is None else now
    local = now.replace(tzinfo=UTC).astimezone(ZoneInfo(cfg.schedule_timezone)).replace(tzinfo=None)
    raised = 0
    with writer_for(cfg.store_path, con) as con:
        for name, c in cfg.curves.items():
            found = late_curve(last_quoted_day(con, name), np.datetime64(local, "m"), c, zone=cfg.schedule_timezone)
            fresh = [not store.late_finding_open(con, name, np.datetime64(d, "D")) for d in found["as_of"]]
            store.insert_findings(con, name, found.loc[fresh], now)
            raised += sum(fresh)
    return raised


def _store_episodes(con, curve: str, c: CurveConfig, panel: QuotePanel | None = None, *,  # noqa: ANN001
                    incremental: bool = False, last: object = None) -> None:
    """Derive ``curve``'s inversion episodes and store them, in the caller's transaction.

    ``panel``: the quotes read (the whole record up to ``last``, or read here when None). With
    ``incremental`` it holds only the days a check read, and the work is limited to the episodes
    that may have changed: the stored ones ending before it are final.
    """
    held = store.held_days(con, curve)
    tenors = list(c.tenor_labels)
    if not incremental:
        if panel is None:
            panel = read_quote_panel(con, curve, tenors, None, last)
        store.replace_episodes(con, curve, inversion_episodes(panel.as_of, panel.tenors, panel.rates, c, held=held))
        return
    episodes_from = _episodes_from(con, curve, panel, c, held)
    if episodes_from < panel.as_of[0]:
        # an episode of the stored record may run on into the days read: recompute it whole
        panel = read_quote_panel(con, curve, tenors, episodes_from, last)
    episodes = inversion_episodes(panel.as_of, panel.tenors, panel.rates, c, held=held)
    # episodes that end before the recomputed span are final and stay
    keep_before = min(episodes_from, panel.as_of[0])
    store.replace_episodes(con, curve, episodes[episodes["first_day"].to_numpy().astype("datetime64[D]")
                                                >= keep_before], keep_before)


def _episodes_from(con, curve: str, panel: QuotePanel, c: CurveConfig, held: np.ndarray) -> np.datetime64:  # noqa: ANN001
    """The first day from which inversion episodes must be recomputed when only ``panel``'s days were read.

    Runs are broken only by a day on which the pair was judged and not inverted. If a pair's first judged
    day in the panel is inverted, its run may have begun before the panel: recompute from the first day of
    the latest stored episode that began before it. Otherwise every earlier episode is final.
    """
    start = panel.as_of[0]
    out = start
    for short, long in pairs_inverted_first(panel.as_of, panel.tenors, panel.rates, c, held=held):
        began = store.latest_episode_start(con, curve, short, long, start)
        if began is not None:
            out = min(out, np.datetime64(began, "D"))
    return out


def accept_day(cfg: Config, curve: str, day: str, reason: str, *,
               con: duckdb.DuckDBPyConnection | None = None) -> int:
    """Accept one day's open reject findings (recorded with who, when and ``reason``), so the day is built;
    returns how many it covers. Nothing is recorded when the day has none (returns 0).

    The acceptance lasts until the day's quotes change (a re-check does not reopen it). The curve's
    inversion episodes are derived again, since the accepted day now counts.
    """
    c = cfg.curve(curve)
    with writer_for(cfg.store_path, con) as con:
        n = store.open_reject_count(con, curve, day)
        if n == 0:
            return 0
        try:
            who = getpass.getuser()
        except Exception:  # no user name in some containers
            who = "unknown"
        with transaction(con):
            store.add_acceptance(con, curve, day, who, utc_now(), reason)
            _store_episodes(con, curve, c)
    return n
