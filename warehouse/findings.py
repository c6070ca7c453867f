"""The findings tables: ``finding`` (never deleted: closed with a resolution), ``check_run`` (how far
curve-level checks have got), ``acceptance`` and ``inversion_episode``.

Functions take an open connection; the caller owns the transaction.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from warehouse.query import fetch_value

__all__ = ["add_acceptance", "changed_from", "close_arrived", "close_rechecked", "close_restated", "context_start",
           "findings_since", "held_days", "insert_findings", "last_check_run", "late_finding_open",
           "latest_episode_start", "open_finding_groups", "open_reject_count", "record_check_run", "replace_episodes"]


def last_check_run(con, curve: str) -> object:  # noqa: ANN001
    """When the curve's curve-level checks last ran (None if never)."""
    return fetch_value(con, "SELECT max(ran_at) FROM check_run WHERE curve = ?", [curve])


def record_check_run(con, curve: str, now, first_day: object, last_day: object, days: int, findings: int,  # noqa: ANN001
                     all_days: bool) -> None:
    con.execute("INSERT INTO check_run VALUES (?, ?, ?, ?, ?, ?, ?)",
                [curve, now, str(first_day), str(last_day), int(days), int(findings), bool(all_days)])


def changed_from(con, curve: str, since: object, last: object = None) -> object:  # noqa: ANN001
    """The first day (up to ``last``) whose quotes changed after ``since``; None when none did."""
    bound = "" if last is None else " AND as_of <= CAST(? AS DATE)"
    extra = [] if last is None else [str(last)]
    return fetch_value(con, f"SELECT min(as_of) FROM quote_version WHERE curve = ? AND recorded_at > ?{bound}",
                       [curve, since, *extra])


def context_start(con, curve: str, day: object, days: int) -> object:  # noqa: ANN001
    """The first of the ``days`` observed days before ``day`` (``day`` itself when there are none)."""
    start = fetch_value(
        con,
        "SELECT min(as_of) FROM (SELECT DISTINCT as_of FROM quote_version WHERE curve = ? "
        "AND superseded_at IS NULL AND as_of < ? ORDER BY as_of DESC LIMIT ?)",
        [curve, day, days],
    )
    return day if start is None else start


def close_rechecked(con, curve: str, now, from_day: object, checks: tuple[str, ...]) -> None:  # noqa: ANN001
    """Close the open curve-level findings ``checks`` of days from ``from_day`` on ("re-checked")."""
    con.execute(
        "UPDATE finding SET resolved_at = ?, resolution = 're-checked' "
        "WHERE curve = ? AND as_of >= ? AND resolved_at IS NULL AND load_id IS NULL "
        f"AND check_name IN ({', '.join(repr(x) for x in checks)})",
        [now, curve, str(from_day)],
    )


def insert_findings(con, curve: str, found: pd.DataFrame, now) -> None:  # noqa: ANN001
    """Record findings (columns as_of, check_name, severity, tenor, detail) raised ``now``."""
    if not len(found):
        return
    rows = pd.DataFrame({  # noqa: F841 - read by DuckDB by its name
        "curve": curve, "as_of": found["as_of"].to_numpy().astype("datetime64[D]"),
        "check_name": found["check_name"].astype(str), "severity": found["severity"].astype(str),
        "tenor": found["tenor"].astype(object), "detail": found["detail"].astype(str),
    })
    con.execute("INSERT INTO finding SELECT curve, as_of, check_name, severity, tenor, detail, ?, "
                "NULL, NULL, NULL FROM rows", [now])


def close_restated(con, curve: str, now, since: object = None) -> None:  # noqa: ANN001
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


def close_arrived(con, curve: str, now) -> None:  # noqa: ANN001
    """Close the ``late_curve`` findings of days whose curve has since arrived."""
    con.execute(
        "UPDATE finding AS f SET resolved_at = ?, resolution = 'arrived' WHERE f.curve = ? "
        "AND f.check_name = 'late_curve' AND f.resolved_at IS NULL "
        "AND EXISTS (SELECT 1 FROM quote_version q WHERE q.curve = f.curve AND q.as_of = f.as_of)",
        [now, curve],
    )


def late_finding_open(con, curve: str, day: object) -> bool:  # noqa: ANN001
    return bool(fetch_value(con, "SELECT count(*) FROM finding WHERE curve = ? AND as_of = CAST(? AS DATE) "
                                 "AND check_name = 'late_curve' AND resolved_at IS NULL", [curve, str(day)]))


def held_days(con, curve: str) -> np.ndarray:  # noqa: ANN001
    """The days of ``curve`` held back by an open, unaccepted reject finding (datetime64[D], sorted)."""
    t = con.sql("SELECT as_of FROM held_days WHERE curve = ? ORDER BY as_of", params=[curve]).to_arrow_table()
    return t.column("as_of").to_numpy().astype("datetime64[D]")


def open_reject_count(con, curve: str, day: object) -> int:  # noqa: ANN001
    """Open (unaccepted) reject findings of one day."""
    return int(fetch_value(con, "SELECT count(*) FROM open_findings WHERE curve = ? AND as_of = CAST(? AS DATE) "
                                "AND severity = 'reject'", [curve, str(day)]) or 0)


def add_acceptance(con, curve: str, day: object, who: str, now, reason: str) -> None:  # noqa: ANN001
    con.execute("INSERT INTO acceptance VALUES (?, CAST(? AS DATE), ?, ?, ?)", [curve, str(day), who, now, reason])


def latest_episode_start(con, curve: str, short: str, long: str, before: object) -> object:  # noqa: ANN001
    """The first day of the latest stored episode of the pair that began before ``before`` (None if none)."""
    return fetch_value(con, "SELECT max(first_day) FROM inversion_episode WHERE curve = ? AND short_tenor = ? "
                            "AND long_tenor = ? AND first_day < CAST(? AS DATE)", [curve, short, long, str(before)])


def replace_episodes(con, curve: str, episodes: pd.DataFrame, from_day: object = None) -> None:  # noqa: ANN001
    """Replace the curve's stored episodes (those ending on or after ``from_day``; all when None) by
    ``episodes`` (columns short_tenor, long_tenor, first_day, last_day, days, deepest_bp)."""
    if from_day is None:
        con.execute("DELETE FROM inversion_episode WHERE curve = ?", [curve])
    else:
        con.execute("DELETE FROM inversion_episode WHERE curve = ? AND last_day >= CAST(? AS DATE)",
                    [curve, str(from_day)])
    if len(episodes):
        cols = ["curve", "short_tenor", "long_tenor", "first_day", "last_day", "days", "deepest_bp"]
        # spreads are differences of quoted decimals: round off the float noise (1e-6 bp)
        ep = episodes.assign(curve=curve, deepest_bp=episodes["deepest_bp"].round(6))[cols]  # noqa: F841
        con.execute("INSERT INTO inversion_episode SELECT * FROM ep")


def findings_since(con, since: object) -> dict[tuple[str, str], int]:  # noqa: ANN001
    """Findings raised at or after ``since`` (store clock, naive UTC), by (curve, severity)."""
    rows = con.execute("SELECT curve, severity, count(*) FROM finding WHERE found_at >= ? GROUP BY ALL",
                       [since]).fetchall()
    return {(c, s): int(n) for c, s, n in rows}


def open_finding_groups(con, curve: str | None = None, first: object = None,  # noqa: ANN001
                        last: object = None) -> tuple[list[tuple], int]:
    """The open findings (of ``curve``, over as-of ``first``..``last``) grouped by check, curve and
    severity: (check, curve, severity, count, first day, last day, first detail) rows; and the number
    of open reject findings among them."""
    where, params = ["TRUE"], []
    if curve:
        where.append("curve = ?")
        params.append(curve)
    if first:
        where.append("as_of >= CAST(? AS DATE)")
        params.append(str(first))
    if last:
        where.append("as_of <= CAST(? AS DATE)")
        params.append(str(last))
    groups = con.execute(
        f"""SELECT check_name, curve, severity, count(*), min(as_of), max(as_of),
                   arg_min(coalesce(tenor || ': ', '') || detail, as_of)
            FROM open_findings WHERE {' AND '.join(where)}
            GROUP BY ALL ORDER BY check_name, curve, severity""", params).fetchall()
    rejects = con.execute(f"SELECT count(*) FROM open_findings WHERE severity = 'reject' AND "
                          f"{' AND '.join(where)}", params).fetchall()[0][0]
    return groups, int(rejects)
