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

from pipeline.checks import pair_spreads
from pipeline.config import Config, CurveConfig
from pipeline.report import CurveReport, ReportData, choose_pairs, render_report
from warehouse import report as store
from warehouse.connect import reader
from warehouse.schema import schema_version

__all__ = ["MODEL_PREMIUM_MONTHS", "gather_report", "program_version", "report_path", "write_report"]

MODEL_PREMIUM_MONTHS = (24, 60, 120)  # the model term premium charted: 2, 5 and 10 years


def program_version() -> str:
    try:
        return version("afterward")
    except PackageNotFoundError:  # a source tree that is not installed
        return "(source)"


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
    span = store.curve_span(con, name, first, last)
    freq = {None: "continuous", 0: "simple"}.get(c.frequency_per_year, c.compounding)
    starts = [t.months for t in c.forward_starts if t.months is not None]
    tenors = [t.months for t in c.forward_tenors if t.months is not None]
    pairs = choose_pairs(starts, tenors)
    summary, notes = _summary(con, cfg, name, first, last)
    premium_tenor = pairs[0][1] if pairs else None
    premium = store.premium(con, name, premium_tenor, first, last)
    window_days = int(premium["window_days"].iloc[0]) if len(premium) else c.premium_window_days
    scores, mcs, verdicts, compared = store.comparison(con, name)
    return CurveReport(
        name=name, conventions=_conventions(c), tenors=c.tenor_labels, history=store.history(con, name, first, last),
        history_label=f"zero rate ({freq}, {c.day_count})",
        inversion_pair=(c.inversion_pairs[0][0].label, c.inversion_pairs[0][1].label) if c.inversion_pairs else None,
        episodes=store.episodes(con, name, first, last), pairs=pairs,
        outcomes=store.outcome_pairs(con, name, pairs, first, last), summary=summary, premium=premium,
        premium_tenor=premium_tenor, premium_window_days=window_days,
        first_day=span[0] if span else None, last_day=span[1] if span else None,
        days_observed=int(span[2]) if span and span[2] is not None else 0,
        pending=store.pending(con, name, first, last), notes=tuple(notes),
        contender_scores=scores, confidence_set=mcs, contender_verdicts=verdicts, compared=compared,
        model_premium=store.model_premium(con, name, MODEL_PREMIUM_MONTHS, first, last),
        errors=store.error_series(con, name, premium_tenor, first, last), spreads=_spreads(con, c, first, last),
        all_pairs=tuple((a.label, b.label) for a, b in c.inversion_pairs),
    )


def _spreads(con, c: CurveConfig, first: str | None, last: str | None) -> pd.DataFrame:  # noqa: ANN001
    """Every inversion pair's spread over the window, judged as the inversion check judges it."""
    tenors = list(dict.fromkeys(t.label for pair in c.inversion_pairs for t in pair))
    q = store.pair_quotes(con, c.name, tenors, first, last)
    if q.empty:
        return pd.DataFrame()
    wide = q.pivot_table(index="as_of", columns="tenor", values="rate", aggfunc="last").reindex(columns=tenors)
    return pair_spreads(wide.index.to_numpy(), tenors, wide.to_numpy(dtype=float), c)


def _same_day(a: object, b: str | None) -> bool:
    if b is None:
        return a is None or pd.isna(a)
    return a is not None and not pd.isna(a) and pd.Timestamp(a).date().isoformat() == b


def _summary(con, cfg: Config, name: str, first: str | None, last: str | None  # noqa: ANN001
             ) -> tuple[pd.DataFrame, list[str]]:
    """The audit figures for the report's window: stored ones when they cover it, else recomputed."""
    notes: list[str] = []
    stored = store.stored_summary(con, name)
    latest, n_outcomes = store.outcome_version(con, name)
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
    if latest is not None and pd.Timestamp(stored["data_version"].max()) < pd.Timestamp(latest):
        notes.append(f"The audit figures date from {pd.Timestamp(stored['computed_at'].max()):%Y-%m-%d %H:%M} and do "
                     "not include outcomes realised since; run 'afterward audit' to bring them up to date.")
    return stored, notes


def gather_report(cfg: Config, curve: str | None = None, first: str | None = None,
                  last: str | None = None, *, now: datetime | None = None,
                  as_known_at: datetime | None = None) -> ReportData:
    """Everything the report shows, read from the store on one read-only connection."""
    names = [curve] if curve else list(cfg.curves)
    generated = now or datetime.now(UTC)
    with reader(cfg.store_path) as con:
        schema = schema_version(con)
        curves = tuple(_curve_report(con, cfg, n, first, last) for n in names)
        loads = store.loads_in_scope(con, names, first, last)
        builds = store.official_builds(con, names, first, last)
        findings = store.findings_in_scope(con, names, first, last)
        held = store.findings_in_scope(con, names, first, last, rejects_only=True)
        rejected = store.rejected_in_scope(con, names)
        acceptances = store.acceptances(con, names, first, last)
        scenarios = store.what_if_builds(con, names, first, last)
        if first or last:  # rejected rows carry no date: keep those of the files in scope
            rejected = rejected[rejected["load_id"].isin(loads["load_id"])].reset_index(drop=True)
    return ReportData(
        generated_at=generated, program_version=program_version(), schema_version=schema, curves=curves,
        store_path=str(cfg.store_path), config_path=str(cfg.path) if cfg.path else "",
        window=(first, last), as_known_at=as_known_at, loads=loads, builds=builds, findings=findings, held=held,
        rejected_rows=rejected, acceptances=acceptances, scenarios=scenarios,
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
                 last: str | None = None, *, as_known_at: datetime | None = None) -> Path:
    """Write the self-contained HTML audit report and return its path.

    ``out``: the folder (default ``reports/`` beside the config file, created if needed);
    ``curve``: one curve, or all; ``first`` / ``last``: ISO as-of dates bounding what is shown;
    ``as_known_at``: the time the store ``cfg`` names was reconstructed as of (a scratch copy made by
    :mod:`flows.known_at_step`), said at the top of the page.
    """
    data = gather_report(cfg, curve, first, last, as_known_at=as_known_at)
    page = render_report(data)
    path = report_path(cfg, out, curve, data.generated_at)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".html.part")
    tmp.write_text(page, encoding="utf-8")
    os.replace(tmp, path)
    return path
