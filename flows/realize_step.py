"""The realize step: match forwards whose target date has been observed with the realised rate.

Observed days are the official built days (a day held back by a reject finding is not built, so it
does not count as observed). An outcome is kept once made; it is re-derived, and the old one stamped
superseded, when the day it rests on (its as-of or observed day) has been rebuilt since, when that day
is no longer built, or when a day nearer the target has been built since. Forwards with no observation
within the tolerance stay pending: they are never interpolated in time.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from pipeline.config import Config
from pipeline.realize import realize
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


def run_realize(cfg: Config, curve: str | None = None) -> RealizeSummary:
    summary = RealizeSummary()
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            now = utc_now()
            con.execute("BEGIN TRANSACTION")
            try:
                stale = _supersede_stale(con, name, now)
                observed = read_frame(con, "SELECT as_of FROM built_day WHERE curve = ? AND scenario = 'official' "
                                           "ORDER BY as_of", [name], date_as_object=False)
                days = observed["as_of"].to_numpy().astype("datetime64[D]")
                info = {"realized": 0, "re_derived": stale, "pending": 0}
                if len(days):
                    cand = read_frame(
                        con,
                        """SELECT f.as_of, f.start_months, f.tenor_months, f.start_date, f.end_date, f.forward_rate
                           FROM forwards f
                           WHERE f.curve = ? AND f.start_date <= CAST(? AS DATE)
                             AND NOT EXISTS (SELECT 1 FROM outcome o
                                 WHERE o.superseded_at IS NULL AND o.curve = f.curve AND o.as_of = f.as_of
                                   AND o.start_months = f.start_months AND o.tenor_months = f.tenor_months)""",
                        [name, str(days[-1])], date_as_object=False,
                    )
                    if len(cand):
                        months = sorted({int(m) for m in cand["tenor_months"].unique()})
                        zeros = read_frame(
                            con,
                            f"""SELECT as_of, tenor_months, zero_rate FROM zero_rate_built
                                WHERE curve = ? AND scenario = 'official'
                                  AND tenor_months IN ({', '.join(str(m) for m in months)})""",
                            [name], date_as_object=False,
                        )
                        for col in ("as_of", "start_date", "end_date"):
                            cand[col] = cand[col].to_numpy().astype("datetime64[D]")
                        zeros["as_of"] = zeros["as_of"].to_numpy().astype("datetime64[D]")
                        out = realize(cand, zeros, days, c.calendar, c.tolerance_days)
                        if len(out):
                            rows = out.assign(curve=name)[OUTCOME_COLUMNS]  # noqa: F841 - read by DuckDB
                            con.execute(
                                "INSERT INTO outcome SELECT curve, CAST(as_of AS DATE), start_months, tenor_months, "
                                "CAST(target_date AS DATE), CAST(observed_on AS DATE), forward_rate, realized_rate, "
                                "spot_rate, error_bp, rw_error_bp, ?, NULL FROM rows ORDER BY as_of", [now])
                        info["realized"] = len(out)
                    # pending = the candidates left unmatched plus every forward whose target lies after
                    # the last observed day (it cannot have an outcome): the count of the
                    # pending_forwards view without a second anti-join over the whole record
                    later = fetch_value(con, "SELECT count(*) FROM forwards WHERE curve = ? "
                                             "AND start_date > CAST(? AS DATE)", [name, str(days[-1])])
                    info["pending"] = len(cand) - info["realized"] + int(later or 0)
                else:
                    info["pending"] = int(fetch_value(con, "SELECT count(*) FROM pending_forwards WHERE curve = ?",
                                                      [name]) or 0)
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
            summary.curves[name] = info
    return summary


def _supersede_stale(con, curve: str, now) -> int:  # noqa: ANN001
    """Stamp superseded the outcomes whose days were rebuilt, withdrawn, or overtaken; returns the count.

    Written as anti-joins against the built days plus a join with only the days built since the
    earliest current outcome: a correlated EXISTS with an OR took seconds a run at 50 years.
    """
    before = fetch_value(con, "SELECT count(*) FROM outcome WHERE curve = ? AND superseded_at IS NULL", [curve])
    con.execute(
        """
        UPDATE outcome AS o SET superseded_at = $now
        FROM (
            WITH built AS (SELECT as_of, built_at FROM built_day WHERE curve = $curve AND scenario = 'official'),
                 cur AS (SELECT as_of, start_months, tenor_months, target_date, observed_on, realized_at
                         FROM outcome WHERE curve = $curve AND superseded_at IS NULL),
                 fresh AS (SELECT as_of, built_at FROM built WHERE built_at > (SELECT min(realized_at) FROM cur))
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
        {"now": now, "curve": curve},
    )
    after = fetch_value(con, "SELECT count(*) FROM outcome WHERE curve = ? AND superseded_at IS NULL", [curve])
    return int((before or 0) - (after or 0))
