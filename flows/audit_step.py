"""The audit step: forecast-error statistics and the term-premium record from the current outcomes.

Each run replaces a curve's rows of ``audit_summary`` and ``term_premium`` with figures computed on
the outcomes as they stand, and records the as-of window and the data version (the latest
``realized_at`` used) beside them.
"""

from __future__ import annotations

import pandas as pd

from pipeline.audit import summarize, term_premium, verdict
from pipeline.config import Config
from warehouse.connect import writer
from warehouse.frames import read_frame
from warehouse.loads import utc_now

__all__ = ["read_outcomes", "run_audit"]


def read_outcomes(con, cfg: Config, curve: str) -> pd.DataFrame:  # noqa: ANN001
    """The current outcomes of ``curve``, with ``inverted``: the first inversion pair's long quote below
    its short quote on the as-of date (NULL when the curve has no pair or a quote is missing)."""
    c = cfg.curve(curve)
    if c.inversion_pairs:
        short, long = c.inversion_pairs[0]
        inverted = "ql.rate < qs.rate"
        joins = (f"LEFT JOIN quotes qs ON qs.curve = o.curve AND qs.as_of = o.as_of AND qs.tenor = '{short.label}' "
                 f"LEFT JOIN quotes ql ON ql.curve = o.curve AND ql.as_of = o.as_of AND ql.tenor = '{long.label}'")
    else:
        inverted, joins = "CAST(NULL AS BOOLEAN)", ""
    frame = read_frame(
        con,
        f"""SELECT o.curve, o.as_of, o.start_months, o.tenor_months, o.target_date, o.observed_on, o.forward_rate,
                   o.realized_rate, o.spot_rate, o.error_bp, o.rw_error_bp, {inverted} AS inverted, o.realized_at
            FROM outcome o {joins}
            WHERE o.curve = ? AND o.superseded_at IS NULL
            ORDER BY o.start_months, o.tenor_months, o.as_of""",
        [curve], date_as_object=False,
    )
    for col in ("as_of", "target_date", "observed_on"):
        frame[col] = frame[col].to_numpy().astype("datetime64[D]")
    frame["inverted"] = frame["inverted"].astype("boolean")
    return frame


def run_audit(cfg: Config, curve: str | None = None, first: str | None = None,
              last: str | None = None) -> dict[str, pd.DataFrame]:
    """Recompute and store the audit of the chosen curves; returns each curve's summary frame."""
    out: dict[str, pd.DataFrame] = {}
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            outcomes = read_outcomes(con, cfg, name)
            now = utc_now()
            if outcomes.empty:
                out[name] = pd.DataFrame()
                continue
            summary = summarize(outcomes, first=first, last=last)
            summary["verdict"] = [verdict(r) for _, r in summary.iterrows()]
            summary["window_from"] = pd.to_datetime(first) if first else pd.NaT
            summary["window_to"] = pd.to_datetime(last) if last else pd.NaT
            summary["data_version"] = outcomes["realized_at"].max()
            summary["computed_at"] = now
            window = outcomes
            if first or last:
                keep = pd.Series(True, index=outcomes.index)
                if first:
                    keep &= outcomes["as_of"] >= pd.Timestamp(first)
                if last:
                    keep &= outcomes["as_of"] <= pd.Timestamp(last)
                window = outcomes.loc[keep]
            premium = term_premium(window, c.premium_window_days)
            con.execute("BEGIN TRANSACTION")
            try:
                con.execute("DELETE FROM audit_result WHERE curve = ?", [name])
                con.execute("DELETE FROM term_premium_result WHERE curve = ?", [name])
                cols = [r[0] for r in con.execute("DESCRIBE audit_result").fetchall()]
                s = summary[cols]  # noqa: F841 - read by DuckDB by its name
                con.execute(f"INSERT INTO audit_result SELECT {', '.join(cols)} FROM s")
                if len(premium):
                    p = premium[["curve", "as_of", "start_months", "tenor_months", "window_days",  # noqa: F841
                                 "premium_bp", "lower_bp", "upper_bp"]]
                    con.execute("INSERT INTO term_premium_result SELECT curve, CAST(as_of AS DATE), start_months, "
                                "tenor_months, window_days, premium_bp, lower_bp, upper_bp FROM p")
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
            out[name] = summary
    return out
