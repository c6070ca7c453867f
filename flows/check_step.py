"""The check step: curve-level data checks over the stored quotes, recorded as findings.

Incremental by default: only days whose quotes changed since the curve's last check (new or
restated) are checked, with about a year of earlier days as context; ``all_days`` re-checks the
whole history. Findings of re-checked days are closed ("re-checked") and raised afresh, never
deleted. Row-level findings raised by loads are closed when their day is restated.
"""

from __future__ import annotations

import getpass
from dataclasses import dataclass, field
from datetime import UTC, datetime
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from pipeline.checks import CHECKS, curve_checks, inversion_episodes, late_curve, pairs_inverted_first
from pipeline.config import Config
from warehouse.connect import writer
from warehouse.frames import read_quote_panel
from warehouse.loads import utc_now
from warehouse.query import fetch_value

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
               all_days: bool = False) -> CheckSummary:
    """Check the chosen curves (all by default) and record their findings; returns counts per curve."""
    summary = CheckSummary()
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            now = utc_now()
            _close_arrived(con, name, now)
            last_run = fetch_value(con, "SELECT max(ran_at) FROM check_run WHERE curve = ?", [name])
            read_from = None
            if not all_days and last_run is not None and first is None:
                read_from = _context_start(con, name, last_run, last)
                if read_from is None:  # no quote changed since the last run
                    summary.curves[name] = {"days_checked": 0, "findings": 0, "first_day": None, "last_day": None}
                    _close_restated(con, name, now, last_run)
                    continue
            panel = read_quote_panel(con, name, list(c.tenor_labels), read_from, last)
            in_window = np.ones(len(panel), dtype=bool)
            if first is not None:
                in_window &= panel.as_of >= np.datetime64(str(first), "D")
            todo = in_window.copy()
            if not all_days and last_run is not None:
                todo &= panel.recorded_at > np.datetime64(last_run, "us")
            if not todo.any():
                summary.curves[name] = {"days_checked": 0, "findings": 0, "first_day": None, "last_day": None}
                _close_restated(con, name, now, last_run)
                continue
            start = int(np.flatnonzero(todo)[0])
            lo = max(0, start - CONTEXT_DAYS)
            previous = (panel.as_of[lo:start], panel.rates[lo:start]) if start > lo else None
            rng = slice(start, len(panel))
            found = curve_checks(panel.as_of[rng], panel.tenors, panel.rates[rng], c, previous=previous)
            # findings from this run cover days after the last context day (missing days included)
            bound = panel.as_of[start - 1] + np.timedelta64(1, "D") if start > 0 else panel.as_of[0]
            con.execute("BEGIN TRANSACTION")
            try:
                con.execute(
                    "UPDATE finding SET resolved_at = ?, resolution = 're-checked' "
                    f"WHERE curve = ? AND as_of >= ? AND resolved_at IS NULL AND load_id IS NULL "
                    f"AND check_name IN ({', '.join(repr(x) for x in CURVE_LEVEL_CHECKS)})",
                    [now, name, str(bound)],
                )
                if len(found):
                    rows = pd.DataFrame({  # noqa: F841
                        "curve": name, "as_of": found["as_of"].to_numpy().astype("datetime64[D]"),
                        "check_name": found["check_name"].astype(str), "severity": found["severity"].astype(str),
                        "tenor": found["tenor"].astype(object), "detail": found["detail"].astype(str),
                    })
                    con.execute("INSERT INTO finding SELECT curve, as_of, check_name, severity, tenor, detail, ?, "
                                "NULL, NULL, NULL FROM rows", [now])
                _close_restated(con, name, now, last_run)
                # episodes are judged on the days the record trusts: after this run's findings are in,
                # a day held back by a reject finding is not judged
                _store_episodes(con, name, c, panel, incremental=read_from is not None, last=last)
                con.execute("INSERT INTO check_run VALUES (?, ?, ?, ?, ?, ?, ?)",
                            [name, now, str(panel.as_of[start]), str(panel.as_of[-1]), len(panel) - start,
                             len(found), bool(all_days)])
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
            summary.curves[name] = {"days_checked": len(panel) - start, "findings": len(found),
                                    "first_day": str(panel.as_of[start]), "last_day": str(panel.as_of[-1])}
    return summary


def _close_arrived(con, curve: str, now) -> None:  # noqa: ANN001
    """Close the ``late_curve`` findings of days whose curve has since arrived."""
    con.execute(
        "UPDATE finding AS f SET resolved_at = ?, resolution = 'arrived' WHERE f.curve = ? "
        "AND f.check_name = 'late_curve' AND f.resolved_at IS NULL "
        "AND EXISTS (SELECT 1 FROM quote_version q WHERE q.curve = f.curve AND q.as_of = f.as_of)",
        [now, curve],
    )


def note_late_curves(cfg: Config, now: datetime | None = None) -> int:
    """Raise a ``late_curve`` finding for each curve whose last curve due by ``now`` (naive UTC; default
    the store's clock) has not arrived; returns how many it raised. A day already noted is not noted
    again; the finding closes when the curve arrives (see :func:`run_checks`)."""
    now = utc_now() if now is None else now
    zone = ZoneInfo(cfg.schedule_timezone)
    local = now.replace(tzinfo=UTC).astimezone(zone).replace(tzinfo=None)
    raised = 0
    with writer(cfg.store_path) as con:
        for name, c in cfg.curves.items():
            last = fetch_value(con, "SELECT max(as_of) FROM quotes WHERE curve = ?", [name])
            found = late_curve(last, np.datetime64(local, "m"), c, zone=cfg.schedule_timezone)
            for rec in found.itertuples(index=False):
                day = str(np.datetime64(rec.as_of, "D"))
                known = fetch_value(con, "SELECT count(*) FROM finding WHERE curve = ? AND as_of = CAST(? AS DATE) "
                                         "AND check_name = 'late_curve' AND resolved_at IS NULL", [name, day])
                if not known:
                    con.execute("INSERT INTO finding VALUES (?, CAST(? AS DATE), 'late_curve', ?, NULL, ?, ?, NULL, "
                                "NULL, NULL)", [name, day, rec.severity, rec.detail, now])
                    raised += 1
    return raised


def _context_start(con, curve: str, last_run: object, last: object) -> object:  # noqa: ANN001
    """The first day to read for an incremental check: :data:`CONTEXT_DAYS` observed days before the
    first day whose quotes changed since ``last_run`` (None when nothing changed)."""
    bound = "" if last is None else " AND as_of <= CAST(? AS DATE)"
    extra = [] if last is None else [str(last)]
    changed = fetch_value(con, f"SELECT min(as_of) FROM quote_version WHERE curve = ? AND recorded_at > ?{bound}",
                          [curve, last_run, *extra])
    if changed is None:
        return None
    start = fetch_value(
        con,
        "SELECT min(as_of) FROM (SELECT DISTINCT as_of FROM quote_version WHERE curve = ? "
        "AND superseded_at IS NULL AND as_of < ? ORDER BY as_of DESC LIMIT ?)",
        [curve, changed, CONTEXT_DAYS],
    )
    return changed if start is None else start


def held_days(con, curve: str) -> np.ndarray:  # noqa: ANN001
    """The days of ``curve`` held back by an open, unaccepted reject finding (datetime64[D], sorted)."""
    t = con.sql("SELECT as_of FROM held_days WHERE curve = ? ORDER BY as_of", params=[curve]).to_arrow_table()
    return t.column("as_of").to_numpy().astype("datetime64[D]")


def _store_episodes(con, curve: str, c, panel=None, *, incremental: bool = False,  # noqa: ANN001
                    last: object = None) -> None:
    """Derive ``curve``'s inversion episodes and store them, in the caller's transaction.

    ``panel``: the quotes read (the whole record up to ``last``, or read here when None). With
    ``incremental`` it holds only the days a check read, and the work is limited to the episodes
    that may have changed: the stored ones ending before it are final.
    """
    held = held_days(con, curve)
    tenors = list(c.tenor_labels)
    if not incremental:
        if panel is None:
            panel = read_quote_panel(con, curve, tenors, None, last)
        episodes = inversion_episodes(panel.as_of, panel.tenors, panel.rates, c, held=held)
        con.execute("DELETE FROM inversion_episode WHERE curve = ?", [curve])
    else:
        episodes_from = _episodes_from(con, curve, panel, c, held)
        if episodes_from < panel.as_of[0]:
            # an episode of the stored record may run on into the days read: recompute it whole
            panel = read_quote_panel(con, curve, tenors, episodes_from, last)
        episodes = inversion_episodes(panel.as_of, panel.tenors, panel.rates, c, held=held)
        # episodes that end before the recomputed span are final and stay
        keep_before = min(episodes_from, panel.as_of[0])
        con.execute("DELETE FROM inversion_episode WHERE curve = ? AND last_day >= CAST(? AS DATE)",
                    [curve, str(keep_before)])
        episodes = episodes[episodes["first_day"].to_numpy().astype("datetime64[D]") >= keep_before]
    if len(episodes):
        cols = ["curve", "short_tenor", "long_tenor", "first_day", "last_day", "days", "deepest_bp"]
        # spreads are differences of quoted decimals: round off the float noise (1e-6 bp)
        ep = episodes.assign(curve=curve, deepest_bp=episodes["deepest_bp"].round(6))[cols]  # noqa: F841
        con.execute("INSERT INTO inversion_episode SELECT * FROM ep")


def _episodes_from(con, curve: str, panel, c, held: np.ndarray) -> np.datetime64:  # noqa: ANN001
    """The first day from which inversion episodes must be recomputed when only ``panel``'s days were read.

    Runs are broken only by a day on which the pair was judged and not inverted. If a pair's first judged
    day in the panel is inverted, its run may have begun before the panel: recompute from the first day of
    the latest stored episode that began before it. Otherwise every earlier episode is final.
    """
    start = panel.as_of[0]
    out = start
    for short, long in pairs_inverted_first(panel.as_of, panel.tenors, panel.rates, c, held=held):
        began = fetch_value(con, "SELECT max(first_day) FROM inversion_episode WHERE curve = ? AND short_tenor = ? "
                                 "AND long_tenor = ? AND first_day < CAST(? AS DATE)",
                            [curve, short, long, str(start)])
        if began is not None:
            out = min(out, np.datetime64(began, "D"))
    return out


def _close_restated(con, curve: str, now, since: object = None) -> None:  # noqa: ANN001
    """Close load-time findings whose (day, tenor) has since received a new quote version.

    With ``since`` (the curve's last check), only versions recorded after it are looked at: an older
    one closed its findings in that check.
    """
    con.execute(
        f"""
        UPDATE finding AS f SET resolved_at = ?, resolution = 'restated'
        WHERE f.curve = ? AND f.load_id IS NOT NULL AND f.resolved_at IS NULL
          AND EXISTS (SELECT 1 FROM quote_version q
                      WHERE q.curve = f.curve AND q.as_of = f.as_of AND (f.tenor IS NULL OR q.tenor = f.tenor)
                        AND q.recorded_at > f.found_at{"" if since is None else " AND q.recorded_at > ?"})
        """,
        [now, curve] if since is None else [now, curve, since],
    )


def accept_day(cfg: Config, curve: str, day: str, reason: str) -> int:
    """Accept one day's open reject findings (recorded with who, when and ``reason``), so the day is built;
    returns how many it covers. Nothing is recorded when the day has none (returns 0).

    The acceptance lasts until the day's quotes change (a re-check does not reopen it). The curve's
    inversion episodes are derived again, since the accepted day now counts.
    """
    c = cfg.curve(curve)
    with writer(cfg.store_path) as con:
        n = int(fetch_value(
            con, "SELECT count(*) FROM open_findings WHERE curve = ? AND as_of = CAST(? AS DATE) "
            "AND severity = 'reject'", [curve, day],
        ) or 0)
        if n == 0:
            return 0
        try:
            who = getpass.getuser()
        except Exception:  # no user name in some containers
            who = "unknown"
        con.execute("BEGIN TRANSACTION")
        try:
            con.execute("INSERT INTO acceptance VALUES (?, CAST(? AS DATE), ?, ?, ?)",
                        [curve, day, who, utc_now(), reason])
            _store_episodes(con, curve, c)
            con.execute("COMMIT")
        except BaseException:
            con.execute("ROLLBACK")
            raise
    return n
