"""The model step: the term-structure lens of each curve, from its official built curves.

Read (the stored nodes of every built day) -> compute (:mod:`pipeline.term_structure`: month-end
panel, excess returns, expectations-hypothesis regressions, the ACM term premium, real-time and
full-sample) -> write (each curve's rows replaced in one transaction). :func:`model_due` says which
curves have closed a month (or been rebuilt) since their last estimate: what the daily job refreshes.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import duckdb
import numpy as np

from pipeline.config import Config
from pipeline.curves.build import curves_from_stored
from pipeline.term_structure import (
    DEFAULT_MIN_MONTHS,
    MIN_MODEL_MONTHS,
    ModelInputError,
    closed_month_ends,
    cochrane_piazzesi_factor,
    eh_regressions,
    eh_verdicts,
    excess_returns,
    fit_acm,
    longest_tenor_months,
    model_term_premium,
    realtime_fits,
    term_panel,
)
from warehouse import model as store
from warehouse.connect import transaction, writer_for
from warehouse.loads import utc_now

__all__ = ["HEADLINE_MONTHS", "ModelSummary", "model_due", "run_model"]

HEADLINE_MONTHS = (24, 60, 120)  # the 2-, 5- and 10-year term premium the command shows


@dataclass
class ModelSummary:
    curves: dict[str, dict] = field(default_factory=dict)
    refused: dict[str, str] = field(default_factory=dict)  # curve -> one-line reason (nothing stored)


def run_model(cfg: Config, curve: str | None = None, factors: int | None = None, max_months: int | None = None,
              full_sample_only: bool = False, *, con: duckdb.DuckDBPyConnection | None = None) -> ModelSummary:
    """Estimate and store the term-structure lens of ``curve`` (default: every curve).

    ``factors`` / ``max_months`` override the curve's ``model.factors`` / ``model.max_months``.
    ``full_sample_only``: only the full-sample fit (its rows replaced; the real-time rows stay).
    A curve the model cannot use (longest tenor under 24 months, too few month ends) raises
    :class:`ModelInputError` when named; among all curves it is listed in ``refused`` (nothing of it
    stored), and the error is raised only when no curve could be estimated.
    """
    summary = ModelSummary()
    names = [curve] if curve else list(cfg.curves)
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            c = cfg.curve(name)
            k = int(factors or c.model_factors)
            stored = store.stored_curves(con, name)
            try:
                curves = curves_from_stored(stored.as_of, stored.methods, stored.times, stored.zero_cc,
                                            stored.params, c.day_count)
                panel = term_panel(curves, longest_tenor_months(c.tenors), int(max_months or c.model_max_months),
                                   name, calendar=c.calendar)
                full = fit_acm(panel, k)
                realtime = ([] if full_sample_only or panel.as_of.size < DEFAULT_MIN_MONTHS
                            else realtime_fits(panel, k))
                fits = ("full",) if full_sample_only else ("realtime", "full")
                rows = model_term_premium(panel, k, fits=fits, realtime=realtime)
            except ModelInputError as exc:
                if curve:
                    raise
                summary.refused[name] = str(exc)
                continue
            regs = eh_regressions(panel)
            verdicts = eh_verdicts(regs, cochrane_piazzesi_factor(panel))
            passed = tuple(f"{f.estimated_through}: {f.problem()}" for f in realtime if f.problem())
            estimate = None if full_sample_only else store.Estimate(
                utc_now(), k, panel.max_months, panel.as_of[-1] if panel.as_of.size else None, int(panel.as_of.size),
                panel.skipped_months, len(realtime), passed, full.problem())
            with transaction(con):
                written = store.replace_curve(con, name, panel.frame(), excess_returns(panel), regs, verdicts, rows,
                                              fits, estimate)
            rt = rows[rows["fit"] == "realtime"]
            latest = rt[rt["as_of"] == rt["as_of"].max()] if len(rt) else rt
            summary.curves[name] = {
                "months": int(panel.as_of.size), "skipped": panel.skipped_months, "open_month": panel.open_month,
                "max_months": panel.max_months, "factors": k, "realtime_fits": len(realtime),
                "realtime_used": int(rt["estimated_through"].nunique()), "passed": passed,
                "full_problem": full.problem(), "full_sample_only": full_sample_only,
                "realtime_skipped": (None if full_sample_only or realtime else
                                     f"real-time fits start at {DEFAULT_MIN_MONTHS} month ends; the panel has "
                                     f"{panel.as_of.size}"),
                "latest_as_of": latest["as_of"].max() if len(latest) else None,
                "latest_through": latest["estimated_through"].max() if len(latest) else None,
                "latest_bp": {m: float(latest.loc[latest["maturity_months"] == m, "term_premium"].iloc[0]) * 1e4
                              for m in HEADLINE_MONTHS if (latest["maturity_months"] == m).any()},
                "verdicts": list(verdicts["verdict"]), "rows": written,
            }
    if not summary.curves and summary.refused:
        raise ModelInputError(next(iter(summary.refused.values())))
    return summary


def model_due(cfg: Config, *, con: duckdb.DuckDBPyConnection | None = None) -> list[str]:
    """The curves whose estimate is due: a month has closed since the last estimate (or none was
    made), a day up to the last closed month end was built after it, or ``model.factors`` /
    ``model.max_months`` changed. Curves whose longest tenor is under 24 months are never due."""
    due = []
    with writer_for(cfg.store_path, con) as con:
        for name, c in cfg.curves.items():
            longest = longest_tenor_months(c.tenors)
            if longest < MIN_MODEL_MONTHS:
                continue
            days, built_at = store.built_days(con, name)
            ends = closed_month_ends(days, c.calendar)
            if ends.size == 0:
                continue
            last = store.last_estimate(con, name)
            if (last is None or last.panel_through is None
                    or np.datetime64(last.panel_through, "D") != ends[-1]
                    or (last.factors, last.max_months) != (c.model_factors, min(c.model_max_months, longest))
                    or bool(np.any(built_at[days <= ends[-1]] > np.datetime64(last.computed_at, "us")))):
                due.append(name)
    return due
