"""The report step: read what the report shows from the store (read-only) and write one HTML file.

The page itself is drawn by :mod:`pipeline.report` from the frames read here. The audit figures are
the ones the last ``afterward audit`` stored; when the report is asked for a date window other than
the one that audit covered, they are recomputed for that window with the same functions (nothing
is written back). The file name carries the time it was made, so earlier reports are never
overwritten: each one stays the record of what was known when it was written.
"""

from __future__ import annotations

import os
from datetime import UTC, datetime
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

import pandas as pd

from pipeline.config import Config, CurveConfig
from pipeline.report import CurveReport, ReportData, choose_pairs, render_report
from warehouse.connect import reader
from warehouse.frames import read_frame
from warehouse.query import fetch_one
from warehouse.schema import schema_version

__all__ = ["gather_report", "program_version", "report_path", "write_report"]


def program_version() -> str:
    try:
        return version("afterward")
    except PackageNotFoundError:  # a source tree that is not installed
        return "(source)"


def _window_sql(column: str, first: str | None, last: str | None) -> tuple[str, list]:
    where, params = [], []
    if first:
        where.append(f"{column} >= CAST(? AS DATE)")
        params.append(str(first))
    if last:
        where.append(f"{column} <= CAST(? AS DATE)")
        params.append(str(last))
    return (" AND " + " AND ".join(where)) if where else "", params


def _conventions(c: CurveConfig) -> tuple[tuple[str, str], ...]:
    cal = c.calendar
    weekend = getattr(cal, "weekend", None)
    holidays = getattr(cal, "holidays", None)
    weekend_text = ", ".join(str(w) for w in weekend) if weekend is not None and len(weekend) else "none"
    n_hol = 0 if holidays is None else len(holidays)
    pairs = ", ".join(f"{a.label}/{b.label}" for a, b in c.inversion_pairs) or "none"
    return (
        ("Quote type", c.quote),
        ("Units in the files", c.units),
        ("Compounding", c.compounding),
        ("Day count", c.day_count),
        ("Interpolation", c.interpolation),
        ("Quoted tenors", ", ".join(c.tenor_labels)),
        ("Observation frequency", c.frequency),
        ("Calendar", f"weekend {weekend_text}; {n_hol:,} holiday(s)"),
        ("Maturity roll", "modified following"),
        ("Forward starts", ", ".join(t.label for t in c.forward_starts) or "none"),
        ("Forward tenors", ", ".join(t.label for t in c.forward_tenors) or "none"),
        ("Realisation tolerance", f"{c.tolerance_days} business day(s)"),
        ("Jump threshold", f"{c.jump_bp:g} bp"),
        ("Inversion pairs (first sets the regime)", pairs),
        ("Term-premium window", f"{c.premium_window_days} observation days"),
    )


def _curve_report(con, cfg: Config, name: str, first: str | None, last: str | None) -> CurveReport:  # noqa: ANN001
    c = cfg.curve(name)
    w, wp = _window_sql("as_of", first, last)
    span = fetch_one(con, f"SELECT min(as_of), max(as_of), count(DISTINCT as_of) FROM quotes WHERE curve = ?{w}",
                     [name, *wp])
    history = read_frame(con, f"SELECT as_of, tenor, zero_rate AS rate FROM zero_rates WHERE curve = ?{w} "
                              "ORDER BY as_of", [name, *wp])
    freq = {None: "continuous", 0: "simple"}.get(c.frequency_per_year, c.compounding)
    history_label = f"zero rate ({freq}, {c.day_count})"
    ew, ewp = "", []
    if first:
        ew += " AND last_day >= CAST(? AS DATE)"
        ewp.append(first)
    if last:
        ew += " AND first_day <= CAST(? AS DATE)"
        ewp.append(last)
    episodes = read_frame(con, f"SELECT short_tenor, long_tenor, first_day, last_day, days, deepest_bp "
                               f"FROM inversion_episodes WHERE curve = ?{ew} ORDER BY first_day", [name, *ewp])
    starts = [t.months for t in c.forward_starts if t.months is not None]
    tenors = [t.months for t in c.forward_tenors if t.months is not None]
    pairs = choose_pairs(starts, tenors)
    outcomes = pd.DataFrame()
    if pairs:
        values = ", ".join(f"({int(s)}, {int(t)})" for s, t in pairs)
        outcomes = read_frame(
            con,
            "SELECT start_months, tenor_months, as_of, target_date, observed_on, forward_rate, realized_rate, "
            f"spot_rate, error_bp, rw_error_bp FROM outcomes WHERE curve = ?{w} "
            f"AND (start_months, tenor_months) IN ({values}) ORDER BY start_months, tenor_months, as_of",
            [name, *wp])
    summary, notes = _summary(con, cfg, name, first, last)
    premium_tenor = pairs[0][1] if pairs else None
    premium = pd.DataFrame()
    if premium_tenor is not None:
        premium = read_frame(con, "SELECT start_months, tenor_months, as_of, window_days, premium_bp, lower_bp, "
                                  f"upper_bp FROM term_premium WHERE curve = ? AND tenor_months = ?{w} "
                                  "AND start_months > 0 ORDER BY start_months, as_of",
                             [name, premium_tenor, *wp])
    window_days = int(premium["window_days"].iloc[0]) if len(premium) else c.premium_window_days
    pending = fetch_one(con, f"SELECT count(*) FROM pending_forwards WHERE curve = ?{w}", [name, *wp])
    return CurveReport(
        name=name, conventions=_conventions(c), tenors=c.tenor_labels, history=history,
        history_label=history_label,
        inversion_pair=(c.inversion_pairs[0][0].label, c.inversion_pairs[0][1].label) if c.inversion_pairs else None,
        episodes=episodes, pairs=pairs, outcomes=outcomes, summary=summary, premium=premium,
        premium_tenor=premium_tenor, premium_window_days=window_days,
        first_day=span[0] if span else None, last_day=span[1] if span else None,
        days_observed=int(span[2]) if span and span[2] is not None else 0,
        pending=int(pending[0]) if pending else 0, notes=tuple(notes),
    )


def _same_day(a: object, b: str | None) -> bool:
    if b is None:
        return a is None or pd.isna(a)
    return a is not None and not pd.isna(a) and pd.Timestamp(a).date().isoformat() == b


def _summary(con, cfg: Config, name: str, first: str | None, last: str | None  # noqa: ANN001
             ) -> tuple[pd.DataFrame, list[str]]:
    """The audit figures for the report's window: stored ones when they cover it, else recomputed."""
    notes: list[str] = []
    stored = read_frame(con, "SELECT * FROM audit_result WHERE curve = ? ORDER BY start_months, tenor_months, regime",
                        [name])
    latest = fetch_one(con, "SELECT max(realized_at), count(*) FROM outcome WHERE curve = ? AND superseded_at IS NULL",
                       [name])
    n_outcomes = int(latest[1]) if latest else 0
    if n_outcomes == 0:
        return stored.iloc[0:0] if len(stored) else stored, notes
    covers = (len(stored) and _same_day(stored["window_from"].iloc[0], first)
              and _same_day(stored["window_to"].iloc[0], last))
    if (first or last) and not covers:
        from flows.audit_step import read_outcomes
        from pipeline.audit import summarize, verdict

        outcomes = read_outcomes(con, cfg, name)
        summary = summarize(outcomes, first=first, last=last)
        if len(summary):
            summary["verdict"] = [verdict(r) for _, r in summary.iterrows()]
            summary["window_from"] = pd.to_datetime(first) if first else pd.NaT
            summary["window_to"] = pd.to_datetime(last) if last else pd.NaT
            summary["data_version"] = outcomes["realized_at"].max()
            summary["computed_at"] = pd.Timestamp(datetime.now(UTC).replace(tzinfo=None))
        notes.append("The statistics below were computed for this report's date window from the current "
                     "outcomes; the store's audit tables cover a different window and were left unchanged.")
        return summary, notes
    if not len(stored):
        notes.append("Outcomes exist but no audit has been run yet: run 'afterward audit' to add the "
                     "statistics.")
        return stored, notes
    if latest[0] is not None and pd.Timestamp(stored["data_version"].max()) < pd.Timestamp(latest[0]):
        notes.append(f"The audit figures date from {pd.Timestamp(stored['computed_at'].max()):%Y-%m-%d %H:%M} and do "
                     "not include outcomes realised since; run 'afterward audit' to bring them up to date.")
    return stored, notes


def gather_report(cfg: Config, curve: str | None = None, first: str | None = None,
                  last: str | None = None, *, now: datetime | None = None) -> ReportData:
    """Everything the report shows, read from the store on one read-only connection."""
    names = [curve] if curve else list(cfg.curves)
    generated = now or datetime.now(UTC)
    with reader(cfg.store_path) as con:
        schema = schema_version(con)
        curves = tuple(_curve_report(con, cfg, n, first, last) for n in names)
        placeholders = ", ".join("?" for _ in names)
        w, wp = _window_sql("as_of", first, last)
        # the files the figures rest on (holding current quotes in scope), the files whose rows in scope were
        # all restated or rejected (any version in scope), and the refused files (they carry no dates)
        loads = read_frame(
            con,
            "SELECT load_id, file_name, source_file, sha256, size_bytes, curve, started_at, finished_at, rows_read, "
            "rows_accepted, rows_revised, rows_rejected, status, detail, "
            "load_id IN (SELECT DISTINCT load_id FROM quote_version WHERE superseded_at IS NULL "
            f"AND curve IN ({placeholders}){w}) AS current FROM load_log l "
            "WHERE l.load_id IN (SELECT DISTINCT load_id FROM quote_version "
            f"WHERE curve IN ({placeholders}){w}) "
            f"OR (l.status <> 'loaded' AND (l.curve IS NULL OR l.curve IN ({placeholders}))) "
            + ("" if first or last else f"OR (l.rows_rejected > 0 AND l.curve IN ({placeholders})) ")
            + "ORDER BY load_id",
            [*names, *wp, *names, *wp, *names, *([] if first or last else names)])
        builds = read_frame(
            con,
            "SELECT curve, method, code_version, count(*) AS days, min(as_of) AS first_day, max(as_of) AS last_day "
            f"FROM built_day WHERE scenario = 'official' AND curve IN ({placeholders}){w} "
            "GROUP BY curve, method, code_version ORDER BY curve, first_day", [*names, *wp])
        findings = read_frame(
            # open ones only (a finding on a day with an acceptance in force is not open): the count that
            # `status` and `check` show
            con, f"SELECT curve, as_of, check_name, severity, tenor, detail FROM findings WHERE state = 'open' "
                 f"AND curve IN ({placeholders}){w} ORDER BY curve, as_of", [*names, *wp])
        held = read_frame(
            con, f"SELECT curve, as_of, check_name, severity, tenor, detail FROM open_findings WHERE severity = "
                 f"'reject' AND curve IN ({placeholders}){w} ORDER BY curve, as_of", [*names, *wp])
        rejected = read_frame(
            con, "SELECT r.load_id, l.file_name, r.line, r.raw, r.reason FROM rejected_rows r JOIN load_log l "
                 f"USING (load_id) WHERE l.curve IN ({placeholders}) OR l.curve IS NULL ORDER BY r.load_id, r.line",
            names)
        if first or last:  # rejected rows carry no date: keep those of the files in scope
            rejected = rejected[rejected["load_id"].isin(loads["load_id"])].reset_index(drop=True)
    return ReportData(
        generated_at=generated, program_version=program_version(), schema_version=schema, curves=curves,
        store_path=str(cfg.store_path), config_path=str(cfg.path) if cfg.path else "",
        window=(first, last), loads=loads, builds=builds, findings=findings, held=held, rejected_rows=rejected,
    )


def report_path(cfg: Config, out: Path | None, curve: str | None, generated: datetime) -> Path:
    """Where the report goes: ``out`` or ``reports/`` beside the config file, named by curve and time."""
    folder = Path(out) if out is not None else (
        (cfg.path.parent if cfg.path else Path(cfg.store_path).parent) / "reports")
    stamp = generated.astimezone(UTC).strftime("%Y%m%dT%H%M%SZ")
    base = f"afterward-report_{curve or 'all-curves'}_{stamp}"
    path = folder / f"{base}.html"
    n = 2
    while path.exists():
        path = folder / f"{base}-{n}.html"
        n += 1
    return path


def write_report(cfg: Config, out: Path | None = None, curve: str | None = None, first: str | None = None,
                 last: str | None = None) -> Path:
    """Write the self-contained HTML audit report and return its path.

    ``out``: the folder (default ``reports/`` beside the config file, created if needed);
    ``curve``: one curve, or all; ``first`` / ``last``: ISO as-of dates bounding what is shown.
    """
    data = gather_report(cfg, curve, first, last)
    page = render_report(data)
    path = report_path(cfg, out, curve, data.generated_at)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".html.part")
    tmp.write_text(page, encoding="utf-8")
    os.replace(tmp, path)
    return path
