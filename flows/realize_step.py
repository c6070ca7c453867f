"""The realize step: match forwards whose target date has been observed with the realised rate.

Observed days are the official built days (a day held back by a reject finding is not built, so it
does not count as observed). An outcome is kept once made; it is re-derived, and the old one stamped
superseded, when the day it rests on (its as-of or observed day) has been rebuilt since, when that day
is no longer built, or when a day nearer the target has been built since. Forwards with no observation
within the tolerance stay pending: they are never interpolated in time.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline.config import Config, CurveConfig
from pipeline.realize import due_target_window, realize
from warehouse.connect import writer
from warehouse.frames import read_frame
from warehouse.loads import utc_now
from warehouse.query import fetch_value

__all__ = ["RealizeSummary", "run_realize"]

OUTCOME_COLUMNS = ["curve", "as_of", "start_months", "tenor_months", "target_date", "observed_on", "forward_rate",
                   "realized_rate", "spot_rate", "error_bp", "rw_error_bp"]


@dataclass
class RealizeSummary:
    curves: dict[str, dict] = field(default_factory=dict)

    @property
    def realized(self) -> int:
        return sum(c["realized"] for c in self.curves.values())


def run_realize(cfg: Config, curve: str | None = None, full: bool = False) -> RealizeSummary:
    """Realise every forward whose target date has been observed; returns counts per curve.

    Incremental unless ``full``: after the curve's last realisation (its latest ``realized_at``), only
    forwards that a day built since can realise are considered - targets within the tolerance window of
    a new day, forwards of a new as-of day, and forwards whose outcome was just superseded - so a daily
    run does not grow with the history. ``full`` considers every forward without a current outcome
    (what ``afterward realize`` does; it also catches a widened ``realize.tolerance_days``).
    """
    summary = RealizeSummary()
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            now = utc_now()
            con.execute("BEGIN TRANSACTION")
            try:
                since = None if full else fetch_value(con, "SELECT max(realized_at) FROM outcome WHERE curve = ?",
                                                      [name])
                stale = _supersede_stale(con, name, now, since)
                observed = read_frame(con, "SELECT as_of, built_at FROM built_day WHERE curve = ? "
                                           "AND scenario = 'official' ORDER BY as_of", [name], date_as_object=False)
                days = observed["as_of"].to_numpy().astype("datetime64[D]")
                info = {"realized": 0, "re_derived": stale, "pending": 0}
                if len(days):
                    scope, scope_params = _candidate_scope(observed, days, since, stale, now, c)
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
                        {"curve": name, "last": str(days[-1]), **scope_params}, date_as_object=False,
                    )
                    if len(cand):
                        for col in ("as_of", "start_date", "end_date"):
                            cand[col] = cand[col].to_numpy().astype("datetime64[D]")
                        zeros = _zeros_for(con, name, cand)
                        out = realize(cand, zeros, days, c.calendar, c.tolerance_days)
                        if len(out):
                            rows = out.assign(curve=name)[OUTCOME_COLUMNS]  # noqa: F841 - read by DuckDB
                            con.execute(
                                "INSERT INTO outcome SELECT curve, CAST(as_of AS DATE), start_months, tenor_months, "
                                "CAST(target_date AS DATE), CAST(observed_on AS DATE), forward_rate, realized_rate, "
                                "spot_rate, error_bp, rw_error_bp, ?, NULL FROM rows ORDER BY as_of", [now])
                        info["realized"] = len(out)
                    # pending = every forward whose target lies after the last observed day (it cannot
                    # have an outcome yet) plus those due but unmatched: counted without an anti-join over
                    # the whole record
                    later = fetch_value(con, "SELECT count(*) FROM forwards WHERE curve = ? "
                                             "AND start_date > CAST(? AS DATE)", [name, str(days[-1])])
                    due = fetch_value(
                        con,
                        "SELECT (SELECT count(*) FROM forwards WHERE curve = ? AND start_date <= CAST(? AS DATE))"
                        " - (SELECT count(*) FROM outcome WHERE curve = ? AND superseded_at IS NULL)",
                        [name, str(days[-1]), name])
                    info["pending"] = int(later or 0) + max(int(due or 0), 0)
                else:
                    info["pending"] = int(fetch_value(con, "SELECT count(*) FROM pending_forwards WHERE curve = ?",
                                                      [name]) or 0)
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
            summary.curves[name] = info
    return summary


def _candidate_scope(observed: pd.DataFrame, days: np.ndarray, since: object, stale: int, now: object,
                     c: CurveConfig) -> tuple[str, dict]:
    """The extra WHERE clause (on forwards ``f``) that narrows the candidates to what changed since ``since``."""
    if since is None:
        return "", {}
    built_at = observed["built_at"].to_numpy(dtype="datetime64[us]")
    new_days = days[built_at > np.datetime64(since, "us")]
    terms, params = [], {}
    if len(new_days):
        lo, _ = due_target_window(new_days, c.calendar, c.tolerance_days)
        terms.append("start_date >= CAST($lo AS DATE)")
        terms.append("as_of IN (SELECT as_of FROM built_day WHERE curve = $curve AND scenario = 'official' "
                     "AND built_at > $since)")
        params.update(lo=str(lo), since=since)
    if stale:
        terms.append("EXISTS (SELECT 1 FROM outcome s WHERE s.curve = $curve AND s.superseded_at = $now "
                     "AND s.as_of = forwards.as_of AND s.start_months = forwards.start_months "
                     "AND s.tenor_months = forwards.tenor_months)")
        params["now"] = now
    if not terms:
        return "AND false", {}
    return "AND (" + " OR ".join(terms) + ")", params


def _zeros_for(con, curve: str, cand: pd.DataFrame) -> pd.DataFrame:  # noqa: ANN001
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


def _supersede_stale(con, curve: str, now, since: object = None) -> int:  # noqa: ANN001
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
