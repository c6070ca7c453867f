"""The realize step: match forwards whose target date has been observed with the realised rate.

Observed days are the official built days (a day held back by a reject finding is not built, so it
does not count as observed). An outcome is kept once made; it is re-derived, and the old one stamped
superseded, when the day it rests on (its as-of or observed day) has been rebuilt since, when that day
is no longer built, or when a day nearer the target has been built since. Forwards with no observation
within the tolerance stay pending: they are never interpolated in time.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import duckdb
import numpy as np

from pipeline.config import Config
from pipeline.realize import due_target_window, realize
from warehouse import outcomes as store
from warehouse.connect import transaction, writer_for
from warehouse.loads import utc_now

__all__ = ["RealizeSummary", "run_realize"]


@dataclass
class RealizeSummary:
    curves: dict[str, dict] = field(default_factory=dict)

    @property
    def realized(self) -> int:
        return sum(c["realized"] for c in self.curves.values())


def run_realize(cfg: Config, curve: str | None = None, full: bool = False, *,
                con: duckdb.DuckDBPyConnection | None = None) -> RealizeSummary:
    """Realise every forward whose target date has been observed; returns counts per curve.
    ``con``: the store to use (default: open one for the call).

    Incremental unless ``full``: after the curve's last realisation (its latest ``realized_at``), only
    forwards that a day built since can realise are considered - targets within the tolerance window of
    a new day, forwards of a new as-of day, and forwards whose outcome was just superseded - so a daily
    run does not grow with the history. ``full`` considers every forward without a current outcome
    (what ``afterward realize`` does; it also catches a widened ``realize.tolerance_days``).
    """
    summary = RealizeSummary()
    names = [curve] if curve else list(cfg.curves)
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            c = cfg.curve(name)
            now = utc_now()
            with transaction(con):
                since = None if full else store.last_realized_at(con, name)
                stale = store.supersede_stale(con, name, now, since)
                observed = store.observed_days(con, name)
                days = observed["as_of"].to_numpy().astype("datetime64[D]")
                info = {"realized": 0, "re_derived": stale, "pending": 0}
                if len(days):
                    targets_from = None
                    if since is not None:
                        new_days = days[observed["built_at"].to_numpy(dtype="datetime64[us]")
                                        > np.datetime64(since, "us")]
                        if len(new_days):  # targets a new day can realise
                            targets_from = due_target_window(new_days, c.calendar, c.tolerance_days)[0]
                    cand = store.candidates(con, name, days[-1], since, targets_from, now if stale else None)
                    if len(cand):
                        out = realize(cand, store.zeros_for(con, name, cand), days, c.calendar, c.tolerance_days)
                        if len(out):
                            store.insert_outcomes(con, name, out, now)
                        info["realized"] = len(out)
                info["pending"] = store.pending_count(con, name, days[-1] if len(days) else None)
            summary.curves[name] = info
    return summary
