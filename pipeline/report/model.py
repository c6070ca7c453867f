"""What the report is drawn from: plain frames and values, gathered by the caller from the store.

The renderer reads nothing else. Every frame may be empty (a store that has loaded files but not
built or audited yet still gets a report that says so). Rates are decimals, errors and premia in bp,
dates are ``datetime64`` / ``pd.Timestamp`` columns.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

import pandas as pd

__all__ = ["CurveReport", "ReportData", "choose_pairs"]


def _empty() -> pd.DataFrame:
    return pd.DataFrame()


@dataclass(frozen=True)
class CurveReport:
    """One curve's part of the report.

    ``conventions``: ``(label, value)`` rows shown in the scope table, in order.
    ``tenors``: the curve's quoted tenors (canonical labels), shortest first.
    ``history``: columns ``as_of, tenor, rate`` (decimal; long form, one row per day and tenor) - the
    curve over time, described by ``history_label`` (e.g. "zero rate, semiannual, ACT/365F").
    ``inversion_pair``: the (short, long) pair whose episodes are shaded (the regime pair), or None.
    ``episodes``: the ``inversion_episodes`` view's rows for this curve.
    ``pairs``: the (start_months, tenor_months) forwards charted against what happened.
    ``outcomes``: the ``outcomes`` view's rows for ``pairs``.
    ``summary``: ``audit_result`` rows (every regime) with ``hac_se_bp``, ``lags`` and ``verdict``.
    ``premium``: ``term_premium`` rows for ``premium_tenor`` (months) and starts above 0.
    ``first_day`` / ``last_day``: the observed as-of range shown; ``days_observed`` its day count.
    ``pending``: forwards whose target date has not been observed yet.
    ``notes``: plain sentences shown at the top of the curve's audit part (e.g. a stale audit).
    ``contender_scores``, ``confidence_set``, ``contender_verdicts``: the stored contender comparison
    (``contender_score`` rows, ``confidence_set`` rows, ``start_months, tenor_months, verdict``);
    ``compared``: (computed_at, first_as_of, last_as_of) of that comparison, or None.
    ``model_premium``: ``as_of, maturity_months, term_premium`` (decimal), the model's real-time term
    premium at month ends.
    ``errors``: ``as_of, start_months, tenor_months, error_bp`` (forward minus realised, bp) of the
    ``premium_tenor`` forwards at every start, one row per as-of date (the error over time).
    ``spreads``: ``as_of, short_tenor, long_tenor, spread_bp`` (long minus short, bp, as the inversion
    check compares them) of every configured inversion pair; ``all_pairs``: those pairs, in order.
    """

    name: str
    conventions: tuple[tuple[str, str], ...] = ()
    tenors: tuple[str, ...] = ()
    history: pd.DataFrame = field(default_factory=_empty)
    history_label: str = "zero rate"
    inversion_pair: tuple[str, str] | None = None
    episodes: pd.DataFrame = field(default_factory=_empty)
    pairs: tuple[tuple[int, int], ...] = ()
    outcomes: pd.DataFrame = field(default_factory=_empty)
    summary: pd.DataFrame = field(default_factory=_empty)
    premium: pd.DataFrame = field(default_factory=_empty)
    premium_tenor: int | None = None
    premium_window_days: int = 250
    first_day: object = None
    last_day: object = None
    days_observed: int = 0
    pending: int = 0
    notes: tuple[str, ...] = ()
    contender_scores: pd.DataFrame = field(default_factory=_empty)
    confidence_set: pd.DataFrame = field(default_factory=_empty)
    contender_verdicts: pd.DataFrame = field(default_factory=_empty)
    compared: tuple | None = None
    model_premium: pd.DataFrame = field(default_factory=_empty)
    errors: pd.DataFrame = field(default_factory=_empty)
    spreads: pd.DataFrame = field(default_factory=_empty)
    all_pairs: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class ReportData:
    """Everything the report shows.

    ``loads``: ``load_log`` rows of the files the figures rest on (``load_id, file_name, sha256, curve,
    started_at, rows_read, rows_accepted, rows_revised, rows_rejected, status, detail``).
    ``builds``: per curve and method: ``curve, method, code_version, days, first_day, last_day``.
    ``findings``: the ``findings`` view's rows in scope; ``held``: open, unaccepted ``reject``
    findings (days kept out of the build); ``rejected_rows``: ``load_id, file_name, line, raw, reason``.
    ``window``: the ``(from, to)`` ISO dates asked for, ``None`` for open ends.
    ``as_known_at``: for a report of the archive as it stood at a past time (naive UTC), that time.
    ``acceptances``: every override of a day's reject findings (``curve, as_of, accepted_by,
    accepted_at, reason, in_force, findings``: in force while the day's quotes are unchanged since).
    ``scenarios``: every what-if build (``curve, scenario, method, code_version, days, first_day,
    last_day, built_at``).
    """

    generated_at: datetime
    program_version: str
    schema_version: int
    curves: tuple[CurveReport, ...]
    store_path: str = ""
    config_path: str = ""
    window: tuple[str | None, str | None] = (None, None)
    as_known_at: datetime | None = None
    loads: pd.DataFrame = field(default_factory=_empty)
    builds: pd.DataFrame = field(default_factory=_empty)
    findings: pd.DataFrame = field(default_factory=_empty)
    held: pd.DataFrame = field(default_factory=_empty)
    rejected_rows: pd.DataFrame = field(default_factory=_empty)
    acceptances: pd.DataFrame = field(default_factory=_empty)
    scenarios: pd.DataFrame = field(default_factory=_empty)
    title: str = "Forward audit report"


def choose_pairs(starts_months: list[int] | tuple[int, ...], tenors_months: list[int] | tuple[int, ...],
                 max_pairs: int = 3) -> tuple[tuple[int, int], ...]:
    """The (start, tenor) forwards the report charts in full: one tenor, a short, middle and long start.

    The tenor is the configured forward tenor closest to one year (the shorter on a tie); the
    starts are the non-zero starts closest to 6 months, 2 and 5 years (each used once). A start of 0
    is left out: that forward is the spot rate itself. Returns pairs sorted by start.
    """
    tenors = sorted({int(t) for t in tenors_months if int(t) > 0})
    starts = sorted({int(s) for s in starts_months if int(s) > 0})
    if not tenors or not starts:
        return ()
    tenor = min(tenors, key=lambda t: (abs(t - 12), t))
    picked: list[int] = []
    for target in (6, 24, 60)[:max_pairs]:
        left = [s for s in starts if s not in picked]
        if not left:
            break
        picked.append(min(left, key=lambda s: (abs(s - target), s)))
    return tuple((s, tenor) for s in sorted(picked))
