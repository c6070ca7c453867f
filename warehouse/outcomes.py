"""The ``outcome`` table: forwards matched with the rate realised on their target date.

An outcome is kept once made; :func:`supersede_stale` stamps superseded those whose days changed.
Functions take an open connection; the caller owns the transaction.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa

from warehouse.frames import read_frame
from warehouse.query import fetch_value

__all__ = ["OUTCOME_COLUMNS", "candidates", "insert_outcomes", "last_realized_at", "observed_days", "pending_count",
           "supersede_stale", "zeros_for"]

OUTCOME_COLUMNS = ["curve", "as_of", "start_months", "tenor_months", "target_date", "observed_on", "forward_rate",
                   "realized_rate", "spot_rate", "error_bp", "rw_error_bp"]


def last_realized_at(con, curve: str) -> object:  # noqa: ANN001
    """When the curve was last realised (its latest ``realized_at``; None if never)."""
    return fetch_value(con, "SELECT max(realized_at) FROM outcome WHERE curve = ?", [curve])


def observed_days(con, curve: str) -> pd.DataFrame:  # noqa: ANN001
    """The official built days (``as_of``, ``built_at``), sorted: the days that count as observed."""
    return read_frame(con, "SELECT as_of, built_at FROM built_day WHERE curve = ? AND scenario = 'official' "
                           "ORDER BY as_of", [curve], date_as_object=False)


def _scope(since: object, targets_from: object, superseded_at: object) -> tuple[str, dict]:
    """The WHERE clause (on forwards) narrowing the candidates to what changed since ``since``."""
    if since is None:
        return "", {}
    terms, params = [], {}
    if targets_from is not None:
        terms.append("start_date >= CAST($lo AS DATE)")
        terms.append("as_of IN (SELECT as_of FROM built_day WHERE curve = $curve AND scenario = 'official' "
                     "AND built_at > $since)")
        params.update(lo=str(targets_from), since=since)
    if superseded_at is not None:
        terms.append("EXISTS (SELECT 1 FROM outcome s WHERE s.curve = $curve AND s.superseded_at = $now "
                     "AND s.as_of = forwards.as_of AND s.start_months = forwards.start_months "
                     "AND s.tenor_months = forwards.tenor_months)")
        params["now"] = superseded_at
    if not terms:
        return "AND false", {}
    return "AND (" + " OR ".join(terms) + ")", params


def candidates(con, curve: str, last_day: object, since: object = None, targets_from: object = None,  # noqa: ANN001
               superseded_at: object = None) -> pd.DataFrame:
    """Forwards with no current outcome whose start date is on or before ``last_day``.

    With ``since`` (the last realisation) only those a change since can realise: targets from
    ``targets_from`` on and forwards of days built after ``since`` (when days were built since), and
    forwards whose outcome was superseded at ``superseded_at``."""
    scope, scope_params = _scope(since, targets_from, superseded_at)
    cand = read_frame(
        con,
        f"""WITH f AS (
                SELECT as_of, start_months, tenor_months, start_date, end_date, forward_rate
                FROM forwards WHERE curve = $curve AND start_date <= CAST($last AS DATE) {scope})
            SELECT f.* FROM f
            WHERE NOT EXISTS (SELECT 1 FROM outcome o
                WHERE o.superseded_at IS NULL AND o.curve = $curve
                  AND o.as_of >= (SELECT min(as_of) FROM f) AND o.as_of = f.as_of
                  AND o.start_months = f.start_months AND o.tenor_months = f.tenor_months)""",
        {"curve": curve, "last": str(last_day), **scope_params}, date_as_object=False,
    )
    for col in ("as_of", "start_date", "end_date"):
        cand[col] = cand[col].to_numpy().astype("datetime64[D]")
    return cand


def zeros_for(con, curve: str, cand: pd.DataFrame) -> pd.DataFrame:  # noqa: ANN001
    """Official zero rates of the candidates' tenors on their as-of dates and on every day from their first target."""
    months = sorted({int(m) for m in cand["tenor_months"].unique()})
    con.register("_candidate_days", pa.table({"as_of": pa.array(np.unique(cand["as_of"].to_numpy()),
                                                                 type=pa.date32())}))
    zeros = read_frame(
        con,
        f"""SELECT as_of, tenor_months, zero_rate FROM zero_rate_built
            WHERE curve = ? AND scenario = 'official' AND tenor_months IN ({', '.join(str(m) for m in months)})
              AND (as_of >= CAST(? AS DATE) OR as_of IN (SELECT as_of FROM _candidate_days))""",
        [curve, str(cand["start_date"].min())], date_as_object=False,
    )
    con.unregister("_candidate_days")
    zeros["as_of"] = zeros["as_of"].to_numpy().astype("datetime64[D]")
    return zeros


def insert_outcomes(con, curve: str, out: pd.DataFrame, now) -> None:  # noqa: ANN001
    """Record new outcomes (:data:`OUTCOME_COLUMNS` less ``curve``), stamped realised ``now``."""
    rows = out.assign(curve=curve)[OUTCOME_COLUMNS]  # noqa: F841 - read by DuckDB by its name
    con.execute(
        "INSERT INTO outcome SELECT curve, CAST(as_of AS DATE), start_months, tenor_months, "
        "CAST(target_date AS DATE), CAST(observed_on AS DATE), forward_rate, realized_rate, "
        "spot_rate, error_bp, rw_error_bp, ?, NULL FROM rows ORDER BY as_of", [now])


def pending_count(con, curve: str, last_day: object | None) -> int:  # noqa: ANN001
    """Forwards without a current outcome. With ``last_day`` (the last observed day): every forward
    whose target lies after it (it cannot have an outcome yet) plus those due but unmatched, counted
    without an anti-join over the whole record."""
    if last_day is None:
        return int(fetch_value(con, "SELECT count(*) FROM pending_forwards WHERE curve = ?", [curve]) or 0)
    later = fetch_value(con, "SELECT count(*) FROM forwards WHERE curve = ? AND start_date > CAST(? AS DATE)",
                        [curve, str(last_day)])
    due = fetch_value(
        con,
        "SELECT (SELECT count(*) FROM forwards WHERE curve = ? AND start_date <= CAST(? AS DATE))"
        " - (SELECT count(*) FROM outcome WHERE curve = ? AND superseded_at IS NULL)",
        [curve, str(last_day), curve])
    return int(later or 0) + max(int(due or 0), 0)


def supersede_stale(con, curve: str, now, since: object = None) -> int:  # noqa: ANN001
    """Stamp superseded the outcomes whose days were rebuilt, withdrawn, or overtaken; returns the count.

    Written as anti-joins against the built days plus a join with only the days built since the
    earliest current outcome (or since ``since``, the last realisation: a day rebuilt before it has
    already superseded what it overtook): a correlated EXISTS with an OR took seconds a run at 50 years.
    """
    con.execute(
        """
        UPDATE outcome AS o SET superseded_at = $now
        FROM (
            WITH built AS (SELECT as_of, built_at FROM built_day WHERE curve = $curve AND scenario = 'official'),
                 cur AS (SELECT as_of, start_months, tenor_months, target_date, observed_on, realized_at
                         FROM outcome WHERE curve = $curve AND superseded_at IS NULL),
                 fresh AS (SELECT as_of, built_at FROM built
                           WHERE built_at > coalesce($since, (SELECT min(realized_at) FROM cur)))
            SELECT as_of, start_months, tenor_months FROM cur
            WHERE as_of NOT IN (SELECT as_of FROM built) OR observed_on NOT IN (SELECT as_of FROM built)
            UNION
            SELECT c.as_of, c.start_months, c.tenor_months FROM cur c JOIN fresh b
                ON b.built_at > c.realized_at AND b.as_of = c.as_of
            UNION
            SELECT c.as_of, c.start_months, c.tenor_months FROM cur c JOIN fresh b
                ON b.built_at > c.realized_at AND b.as_of >= c.target_date AND b.as_of <= c.observed_on
        ) AS s
        WHERE o.curve = $curve AND o.superseded_at IS NULL AND o.as_of = s.as_of
          AND o.start_months = s.start_months AND o.tenor_months = s.tenor_months
        """,
        {"now": now, "curve": curve, "since": since},
    )
    return int(fetch_value(con, "SELECT count(*) FROM outcome WHERE curve = ? AND superseded_at = ?",
                           [curve, now]) or 0)
