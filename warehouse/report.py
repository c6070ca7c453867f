"""What the report reads: each curve's history, episodes, outcomes and premium over a window, and the
provenance (files, builds, findings, rejected rows) the figures rest on. Read-only queries.
"""

from __future__ import annotations

import duckdb
import pandas as pd

from warehouse.frames import read_frame
from warehouse.query import fetch_one

__all__ = ["acceptances", "comparison", "curve_span", "episodes", "error_series", "findings_in_scope", "history",
           "loads_in_scope", "model_premium", "official_builds", "outcome_pairs", "outcome_version", "pair_quotes",
           "pending", "premium", "rejected_in_scope", "stored_summary", "what_if_builds"]

Con = duckdb.DuckDBPyConnection


def _window(column: str, first: str | None, last: str | None) -> tuple[str, list]:
    where, params = [], []
    if first:
        where.append(f"{column} >= CAST(? AS DATE)")
        params.append(str(first))
    if last:
        where.append(f"{column} <= CAST(? AS DATE)")
        params.append(str(last))
    return (" AND " + " AND ".join(where)) if where else "", params


def curve_span(con: Con, curve: str, first: str | None, last: str | None) -> tuple | None:
    """(first day, last day, days observed) of the curve's quotes in the window."""
    w, wp = _window("as_of", first, last)
    return fetch_one(con, f"SELECT min(as_of), max(as_of), count(DISTINCT as_of) FROM quotes WHERE curve = ?{w}",
                     [curve, *wp])


def history(con: Con, curve: str, first: str | None, last: str | None) -> pd.DataFrame:
    """as_of, tenor, rate: the curve's zero rates (own compounding and day count) in the window."""
    w, wp = _window("as_of", first, last)
    return read_frame(con, f"SELECT as_of, tenor, zero_rate AS rate FROM zero_rates WHERE curve = ?{w} "
                           "ORDER BY as_of", [curve, *wp])


def episodes(con: Con, curve: str, first: str | None, last: str | None) -> pd.DataFrame:
    """The inversion episodes that overlap the window."""
    ew, ewp = "", []
    if first:
        ew += " AND last_day >= CAST(? AS DATE)"
        ewp.append(first)
    if last:
        ew += " AND first_day <= CAST(? AS DATE)"
        ewp.append(last)
    return read_frame(con, f"SELECT short_tenor, long_tenor, first_day, last_day, days, deepest_bp "
                           f"FROM inversion_episodes WHERE curve = ?{ew} ORDER BY first_day", [curve, *ewp])


def outcome_pairs(con: Con, curve: str, pairs: list[tuple[int, int]], first: str | None,
                  last: str | None) -> pd.DataFrame:
    """The current outcomes of the (start, tenor) ``pairs`` in the window."""
    if not pairs:
        return pd.DataFrame()
    w, wp = _window("as_of", first, last)
    values = ", ".join(f"({int(s)}, {int(t)})" for s, t in pairs)
    return read_frame(
        con,
        "SELECT start_months, tenor_months, as_of, target_date, observed_on, forward_rate, realized_rate, "
        f"spot_rate, error_bp, rw_error_bp FROM outcomes WHERE curve = ?{w} "
        f"AND (start_months, tenor_months) IN ({values}) ORDER BY start_months, tenor_months, as_of", [curve, *wp])


def premium(con: Con, curve: str, tenor_months: int | None, first: str | None, last: str | None) -> pd.DataFrame:
    """The term-premium record of one tenor (forward starts after 0) in the window."""
    if tenor_months is None:
        return pd.DataFrame()
    w, wp = _window("as_of", first, last)
    return read_frame(con, "SELECT start_months, tenor_months, as_of, window_days, premium_bp, lower_bp, "
                           f"upper_bp FROM term_premium WHERE curve = ? AND tenor_months = ?{w} "
                           "AND start_months > 0 ORDER BY start_months, as_of", [curve, tenor_months, *wp])


def pending(con: Con, curve: str, first: str | None, last: str | None) -> int:
    w, wp = _window("as_of", first, last)
    row = fetch_one(con, f"SELECT count(*) FROM pending_forwards WHERE curve = ?{w}", [curve, *wp])
    return int(row[0]) if row else 0


def stored_summary(con: Con, curve: str) -> pd.DataFrame:
    """The stored ``audit_result`` rows of a curve, by start, tenor, regime."""
    return read_frame(con, "SELECT * FROM audit_result WHERE curve = ? ORDER BY start_months, tenor_months, regime",
                      [curve])


def outcome_version(con: Con, curve: str) -> tuple[object, int]:
    """(latest realized_at, count) of the curve's current outcomes."""
    row = fetch_one(con, "SELECT max(realized_at), count(*) FROM outcome WHERE curve = ? AND superseded_at IS NULL",
                    [curve])
    return (row[0], int(row[1])) if row else (None, 0)


def loads_in_scope(con: Con, curves: list[str], first: str | None, last: str | None) -> pd.DataFrame:
    """The files the figures rest on (holding current quotes in scope), the files whose rows in scope were
    all restated or rejected (any version in scope), and the refused files (they carry no dates)."""
    ph = ", ".join("?" for _ in curves)
    w, wp = _window("as_of", first, last)
    return read_frame(
        con,
        "SELECT load_id, file_name, source_file, sha256, size_bytes, curve, started_at, finished_at, rows_read, "
        "rows_accepted, rows_revised, rows_rejected, status, detail, "
        "load_id IN (SELECT DISTINCT load_id FROM quote_version WHERE superseded_at IS NULL "
        f"AND curve IN ({ph}){w}) AS current FROM load_log l "
        "WHERE l.load_id IN (SELECT DISTINCT load_id FROM quote_version "
        f"WHERE curve IN ({ph}){w}) "
        f"OR (l.status <> 'loaded' AND (l.curve IS NULL OR l.curve IN ({ph}))) "
        + ("" if first or last else f"OR (l.rows_rejected > 0 AND l.curve IN ({ph})) ")
        + "ORDER BY load_id",
        [*curves, *wp, *curves, *wp, *curves, *([] if first or last else curves)])


def official_builds(con: Con, curves: list[str], first: str | None, last: str | None) -> pd.DataFrame:
    """Official builds by curve, method and program version: days and first/last day."""
    ph = ", ".join("?" for _ in curves)
    w, wp = _window("as_of", first, last)
    return read_frame(
        con,
        "SELECT curve, method, code_version, count(*) AS days, min(as_of) AS first_day, max(as_of) AS last_day "
        f"FROM built_day WHERE scenario = 'official' AND curve IN ({ph}){w} "
        "GROUP BY curve, method, code_version ORDER BY curve, first_day", [*curves, *wp])


def findings_in_scope(con: Con, curves: list[str], first: str | None, last: str | None,
                      rejects_only: bool = False) -> pd.DataFrame:
    """The open findings in the window (a finding on a day with an acceptance in force is not open: the
    count ``status`` and ``check`` show); ``rejects_only``: those holding their day back."""
    ph = ", ".join("?" for _ in curves)
    w, wp = _window("as_of", first, last)
    sev = "AND severity = 'reject' " if rejects_only else ""
    return read_frame(con, f"SELECT curve, as_of, check_name, severity, tenor, detail FROM open_findings "
                           f"WHERE curve IN ({ph}){w} {sev}ORDER BY curve, as_of", [*curves, *wp])


def rejected_in_scope(con: Con, curves: list[str]) -> pd.DataFrame:
    """The rejected rows of the curves' files (and of files with no curve)."""
    ph = ", ".join("?" for _ in curves)
    return read_frame(con, "SELECT r.load_id, l.file_name, r.line, r.raw, r.reason FROM rejected_rows r "
                           f"JOIN load_log l USING (load_id) WHERE l.curve IN ({ph}) OR l.curve IS NULL "
                           "ORDER BY r.load_id, r.line", curves)


def comparison(con: Con, curve: str) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, tuple | None]:
    """The curve's stored contender comparison: scores (with ``h``, ``hac_p_value``), the confidence
    set, the verdict lines, and (computed_at, first_as_of, last_as_of) of the ``compare_run``."""
    scores = read_frame(con, "SELECT * FROM contender_score WHERE curve = ? ORDER BY start_months, tenor_months, "
                             "contender", [curve])
    mcs = read_frame(con, "SELECT * FROM confidence_set WHERE curve = ? ORDER BY start_months, tenor_months, "
                          "contender", [curve])
    verdicts = read_frame(con, "SELECT start_months, tenor_months, verdict FROM contender_verdict WHERE curve = ? "
                               "ORDER BY start_months, tenor_months", [curve])
    run = fetch_one(con, "SELECT computed_at, first_as_of, last_as_of FROM compare_run WHERE curve = ?", [curve])
    return scores, mcs, verdicts, run


def model_premium(con: Con, curve: str, months: tuple[int, ...], first: str | None, last: str | None) -> pd.DataFrame:
    """as_of, maturity_months, term_premium (decimal): the model's real-time term premium at ``months``
    in the window, month ends only (the days between carry the same estimate)."""
    w, wp = _window("p.as_of", first, last)
    return read_frame(con, f"""SELECT p.as_of, p.maturity_months, p.term_premium FROM model_term_premium p
                               JOIN term_panel t ON t.curve = p.curve AND t.as_of = p.as_of
                                                AND t.maturity_months = p.maturity_months
                               WHERE p.curve = ? AND p.fit = 'realtime'
                                 AND p.maturity_months IN ({', '.join(str(int(m)) for m in months)}){w}
                               ORDER BY p.as_of, p.maturity_months""", [curve, *wp])


def acceptances(con: Con, curves: list[str], first: str | None, last: str | None) -> pd.DataFrame:
    """Every acceptance of the curves' days in the window, lapsed ones too: ``curve, as_of, accepted_by,
    accepted_at, reason, in_force`` (a row of ``acceptance_in_force``) and ``findings``, the day's
    unresolved findings as ``check (severity, tenor)`` joined by ``"; "``."""
    ph = ", ".join("?" for _ in curves)
    w, wp = _window("a.as_of", first, last)
    return read_frame(
        con,
        "SELECT a.curve, a.as_of, a.accepted_by, a.accepted_at, a.note AS reason, "
        "EXISTS (SELECT 1 FROM acceptance_in_force i WHERE i.curve = a.curve AND i.as_of = a.as_of "
        "AND i.accepted_at = a.accepted_at) AS in_force, "
        "(SELECT string_agg(f.check_name || ' (' || f.severity || coalesce(', ' || f.tenor, '') || ')', '; ' "
        "ORDER BY f.check_name, f.tenor) FROM findings f WHERE f.curve = a.curve AND f.as_of = a.as_of) AS findings "
        f"FROM acceptance a WHERE a.curve IN ({ph}){w} ORDER BY a.curve, a.as_of, a.accepted_at",
        [*curves, *wp])


def what_if_builds(con: Con, curves: list[str], first: str | None, last: str | None) -> pd.DataFrame:
    """Every scenario other than the official one, by curve, scenario, method and program version:
    ``days, first_day, last_day`` built and ``built_at`` (the latest build)."""
    ph = ", ".join("?" for _ in curves)
    w, wp = _window("as_of", first, last)
    return read_frame(
        con,
        "SELECT curve, scenario, method, code_version, count(*) AS days, min(as_of) AS first_day, "
        "max(as_of) AS last_day, max(built_at) AS built_at FROM built_day "
        f"WHERE scenario <> 'official' AND curve IN ({ph}){w} "
        "GROUP BY curve, scenario, method, code_version ORDER BY curve, scenario, first_day", [*curves, *wp])


def error_series(con: Con, curve: str, tenor_months: int | None, first: str | None, last: str | None) -> pd.DataFrame:
    """as_of, start_months, tenor_months, error_bp: the current outcomes of one tenor at every start
    after 0, over the window."""
    if tenor_months is None:
        return pd.DataFrame()
    w, wp = _window("as_of", first, last)
    return read_frame(con, "SELECT as_of, start_months, tenor_months, error_bp FROM outcomes WHERE curve = ? "
                           f"AND tenor_months = ? AND start_months > 0{w} ORDER BY start_months, as_of",
                      [curve, int(tenor_months), *wp])


def pair_quotes(con: Con, curve: str, tenors: list[str], first: str | None, last: str | None) -> pd.DataFrame:
    """as_of, tenor, rate: the current quotes of ``tenors`` (canonical labels) in the window."""
    if not tenors:
        return pd.DataFrame()
    w, wp = _window("as_of", first, last)
    ph = ", ".join("?" for _ in tenors)
    return read_frame(con, f"SELECT as_of, tenor, rate FROM quotes WHERE curve = ? AND tenor IN ({ph}){w} "
                           "ORDER BY as_of", [curve, *tenors, *wp])
