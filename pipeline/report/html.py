"""The report as one HTML document: sections, tables, inline SVG charts and the embedded stylesheet.

The page holds no script, loads no font, image or stylesheet from anywhere (a Content-Security-Policy
in the page forbids it, so even a viewer that would follow a link cannot), and so opens the same
offline and years later. Numbers are formatted for people: bp with one decimal, rates in percent,
ISO dates.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable, Sequence

import numpy as np
import pandas as pd

from pipeline.audit import interval_half_width
from pipeline.contenders.verdicts import contender_label
from pipeline.report import charts
from pipeline.report.fmt import (
    MISSING,
    esc,
    fmt_bp,
    fmt_count,
    fmt_date,
    fmt_num,
    fmt_pct,
    fmt_pvalue,
    fmt_timestamp,
    is_missing,
    months_label,
)
from pipeline.report.model import CurveReport, ReportData
from pipeline.report.style import STYLESHEET
from pipeline.report.summary import confidence_counts, horizon_verdicts

__all__ = ["CHECK_ORDER", "SECTIONS", "input_fingerprint", "render_report"]

#: (anchor, heading) of the sections, in order
SECTIONS = (
    ("summary", "Summary"),
    ("scope", "Scope and provenance"),
    ("quality", "Data quality"),
    ("history", "Curve history"),
    ("forwards", "Forwards against what happened"),
    ("errors", "Forecast error by horizon"),
    ("premium", "Term premium over time"),
    ("contenders", "Forecast contenders"),
    ("overrides", "Overrides and what-if builds"),
    ("cautions", "Cautions"),
    ("signoff", "Review and sign-off"),
)
CHECK_ORDER = ("unparseable", "out_of_range", "duplicate", "missing_day", "missing_tenor", "stale_curve",
               "jump", "inversion", "negative_forward", "non_monotone_discount")
ROW_LIMIT = 25
CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'"


# ---- small HTML helpers ---------------------------------------------------------------------------

class _Cell:
    """A table cell: text (escaped unless ``raw``), right-aligned when ``numeric``."""

    __slots__ = ("text", "numeric", "raw", "cls", "row_header")

    def __init__(self, text: object, numeric: bool = False, raw: bool = False, cls: str = "",
                 row_header: bool = False) -> None:
        self.text, self.numeric, self.raw, self.cls, self.row_header = text, numeric, raw, cls, row_header

    def html(self, tag: str = "td") -> str:
        classes = " ".join(c for c in ("n" if self.numeric else "", self.cls) if c)
        attr = f' class="{classes}"' if classes else ""
        if self.row_header:
            tag, attr = "th", attr + ' scope="row"'
        body = str(self.text) if self.raw else esc(self.text)
        return f"<{tag}{attr}>{body}</{tag}>"


def _n(text: object) -> _Cell:
    return _Cell(text, numeric=True)


def _raw(html: str, numeric: bool = False) -> _Cell:
    return _Cell(html, numeric=numeric, raw=True)


def _table(headers: Sequence[str | _Cell], rows: Iterable[Sequence[object]], *, caption: str = "",
           cls: str = "", total: int | None = None, shown_note: str = "") -> str:
    head = "".join(h.html("th") if isinstance(h, _Cell) else f"<th>{esc(h)}</th>" for h in headers)
    body_rows = []
    count = 0
    for r in rows:
        count += 1
        cells = "".join(c.html() if isinstance(c, _Cell) else _Cell(c).html() for c in r)
        body_rows.append(f"<tr>{cells}</tr>")
    cap = f"<caption>{esc(caption)}</caption>" if caption else ""
    klass = f' class="{cls}"' if cls else ""
    out = (f'<div class="table-wrap"><table{klass}>{cap}<thead><tr>{head}</tr></thead>'
           f"<tbody>{''.join(body_rows)}</tbody></table></div>")
    if total is not None and total > count:
        out += f'<p class="more">{esc(shown_note or f"{count:,} of {total:,} rows shown.")}</p>'
    return out


def _nh(text: str) -> _Cell:
    return _Cell(text, numeric=True)


def _empty(text: str) -> str:
    return f'<p class="empty">{esc(text)}</p>'


def _note(text: str) -> str:
    return f'<p class="note">{esc(text)}</p>'


def _sev(severity: object) -> str:
    s = esc(severity)
    return f'<span class="sev sev-{s}">{s}</span>'


def _figure(chart: charts.Chart | None, fig_id: str, empty_text: str) -> str:
    if chart is None:
        return _empty(empty_text)
    return (f'<figure class="chart" id="{fig_id}">{chart.svg}'
            f"<figcaption>{esc(chart.caption)}</figcaption></figure>")


def _section(anchor: str, body: str) -> str:
    index = [a for a, _ in SECTIONS].index(anchor)
    heading = SECTIONS[index][1]
    return (f'<section id="{anchor}"><h2><span class="secno">{index + 1}</span>{esc(heading)}</h2>'
            f"{body}</section>")


def _curve_heading(curve: CurveReport) -> str:
    return f'<h3><span class="curve">Curve {esc(curve.name)}</span></h3>'


def _rows(frame: pd.DataFrame, limit: int | None = None) -> Iterable[pd.Series]:
    if frame is None or frame.empty:
        return []
    part = frame if limit is None else frame.head(limit)
    return (r for _, r in part.iterrows())


def input_fingerprint(sha256s: Iterable[str]) -> str:
    """SHA-256 over the sorted, newline-joined SHA-256 digests of the input files.

    One digest names the whole set of files: the same files give the same fingerprint, whatever
    their names or load order.
    """
    joined = "\n".join(sorted(str(s) for s in sha256s))
    return hashlib.sha256(joined.encode("ascii")).hexdigest()



# ---- section 1: summary ---------------------------------------------------------------------------

_AGAINST_WORD = {"better": "better", "worse": "worse", "even": "even", "untested": "untested"}
_LIST_AT_MOST = 6


def _horizon(start: int, tenor: int) -> str:
    return f"{months_label(start)}\u00d7{months_label(tenor)}"


def _listed(v: pd.DataFrame) -> str:
    names = [_horizon(a, b) for a, b in zip(v["start_months"], v["tenor_months"], strict=True)]
    if len(names) > _LIST_AT_MOST:
        return ", ".join(names[:_LIST_AT_MOST]) + f" and {len(names) - _LIST_AT_MOST} more"
    return ", ".join(names)


def _count_of(k: int, total: int) -> str:
    return f"{k:,} of {total:,} horizon" + ("s" if total != 1 else "")


def _summary_grid(v: pd.DataFrame) -> str:
    starts = sorted(v["start_months"].unique())
    tenors = sorted(v["tenor_months"].unique())
    cell = {(int(r["start_months"]), int(r["tenor_months"])): r for _, r in v.iterrows()}
    head = "".join(f'<th class="n">{esc(months_label(t))}</th>' for t in tenors)
    rows = []
    for a in starts:
        tds = []
        for b in tenors:
            r = cell.get((int(a), int(b)))
            if r is None:
                tds.append(f"<td>{MISSING}</td>")
                continue
            star = " *" if bool(r["indicative"]) else ""
            prem = fmt_bp(r["mean_error_bp"], signed=True)
            prem_html = f"<strong>{esc(prem)}</strong>" if r["premium"] != "unclear" else esc(prem)
            tds.append(f'<td class="g-{esc(r["against"])}"><span class="word">{_AGAINST_WORD[r["against"]]}</span> '
                       f'{esc(fmt_num(r["rmse_ratio"], 2))}{star}<br><span class="bp">{prem_html} bp</span></td>')
        rows.append(f'<tr><th scope="row">{esc(months_label(a))} ahead</th>{"".join(tds)}</tr>')
    return (f'<table class="grid"><caption>Forwards against no-change: verdict and RMSE ratio; below it the mean '
            f'error (premium, bold where distinguishable from zero)</caption><thead><tr><th>Start \\ tenor</th>{head}'
            f'</tr></thead><tbody>{"".join(rows)}</tbody></table>')


def _summary_points(c: CurveReport, v: pd.DataFrame) -> list[str]:
    total = len(v)
    better, worse = v[v["against"] == "better"], v[v["against"] == "worse"]
    even = v[v["against"] == "even"]
    acc = (f"<strong>Against no-change.</strong> Forwards forecast better at {_count_of(len(better), total)}"
           + (f" ({esc(_listed(better))})" if len(better) else "")
           + f"; worse at {len(worse):,}" + (f" ({esc(_listed(worse))})" if len(worse) else "")
           + f"; no clear difference at {len(even):,}"
           + (f"; {int((v['against'] == 'untested').sum()):,} too short to test" if (v["against"] == "untested").any()
              else "") + ".")
    pos, neg = v[v["premium"] == "positive"], v[v["premium"] == "negative"]
    above = int((v["mean_error_bp"] > 0).sum())
    if not v["mean_error_bp"].notna().any():
        return [acc, "<strong>Premium.</strong> No mean error yet.", *_summary_points_rest(c, v)]
    lo, hi = v.loc[v["mean_error_bp"].idxmin()], v.loc[v["mean_error_bp"].idxmax()]
    where = ("above the rates that followed at most horizons" if above * 2 > total else
             "below the rates that followed at most horizons" if above * 2 < total else
             "as often above as below the rates that followed")

    def at(r: pd.Series) -> str:
        where_at = _horizon(r["start_months"], r["tenor_months"])
        return f"{esc(fmt_bp(r['mean_error_bp'], signed=True))} bp ({esc(where_at)})"

    prem = (f"<strong>Premium.</strong> Forwards stood {where} ({above:,} of {total:,} with a positive mean "
            f"error); the mean error runs from {at(lo)} to {at(hi)}. Distinguishable from zero: positive at "
            f"{len(pos):,}, negative at {len(neg):,} horizons.")
    return [acc, prem, *_summary_points_rest(c, v)]


def _summary_points_rest(c: CurveReport, v: pd.DataFrame) -> list[str]:
    total = len(v)
    n_eff = v["n_effective"].to_numpy(dtype=float)
    few = int(v["indicative"].sum())
    finite = n_eff[np.isfinite(n_eff)]
    span = (f"from about {fmt_num(finite.min(), 0)} to {fmt_num(finite.max(), 0)}" if finite.size else MISSING)
    strength = ("weak" if few * 2 > total else "mixed" if few else "adequate for every horizon shown")
    ev = (f"<strong>Strength of evidence: {strength}.</strong> Independent (non-overlapping) periods per horizon run "
          f"{span}; {_count_of(few, total)} have fewer than 10 and are indicative only (marked *). "
          '<span class="caveat">Consecutive forecasts share most of their future, so n counts far more forecasts '
          "than independent outcomes; the p-values allow for the overlap (fixed-b), but long horizons rest on a "
          "handful of periods.</span>")
    counts, cells = confidence_counts(c.confidence_set)
    if cells:
        kept = "; ".join(f"{esc(contender_label(r['contender']))} at {int(r['kept']):,}"
                         for _, r in counts.iterrows())
        cs = (f"<strong>Confidence set.</strong> Of {cells:,} horizons compared (Model Confidence Set at 10 %), "
              f"each contender is not beaten at: {kept}.")
    else:
        cs = "<strong>Confidence set.</strong> Not computed yet (run 'afterward compare')."
    return [ev, cs]


def _summary(data: ReportData) -> str:
    parts = ['<p class="intro">The findings in brief, per curve: where the forwards forecast better than '
             "assuming rates stay where they are, how far and in which direction they missed (the ex-post term "
             "premium), and how much independent evidence stands behind each figure. The sections after this one "
             "hold the detail.</p>"]
    blocks = []
    for c in data.curves:
        v = horizon_verdicts(c.summary)
        head = f'<h3 class="sumhead">{esc(c.name)}</h3>'
        if v.empty:
            blocks.append(f'<div class="sumcurve">{head}{_empty("No audit figures yet (run afterward audit).")}</div>')
            continue
        points = "".join(f"<li>{p}</li>" for p in _summary_points(c, v))
        blocks.append(f'<div class="sumcurve">{head}{_summary_grid(v)}<ul class="points">{points}</ul></div>')
    if not blocks:
        parts.append(_empty("No curve in scope."))
    parts.append(f'<div class="sumgrid">{"".join(blocks)}</div>')
    parts.append('<p class="more">Horizons are written start \u00d7 tenor: 2Y\u00d71Y is the 1Y rate 2Y ahead. '
                 "better / worse: the forwards' squared error is below / above the no-change forecast's at 5 % "
                 "(Diebold-Mariano, fixed-b p-value); even: no significant difference. RMSE ratio: forward over "
                 "no-change. Mean error: forward minus realised rate, in bp.</p>")
    parts.append(_note("Statistical evidence for model validation, not investment advice. The figures depend on the "
                       "input data and the conventions listed under Scope and provenance; decisions stay with "
                       "qualified staff under the institution's own rules (see Cautions)."))
    return _section("summary", "".join(parts))


# ---- section 2: scope and provenance -----------------------------------------------------------

def _scope(data: ReportData) -> str:
    parts = ['<p class="intro">What this report covers, the conventions its numbers follow, and the files, '
             "program and store they were computed from. Everything below can be recomputed from the files "
             "listed here.</p>"]
    curves = data.curves
    parts.append("<h3>Curves and conventions</h3>")
    labels: list[str] = []
    for c in curves:
        for label, _ in c.conventions:
            if label not in labels:
                labels.append(label)
    rows: list[list[object]] = [
        [_Cell("As-of dates shown", row_header=True)]
        + [f"{fmt_date(c.first_day)} to {fmt_date(c.last_day)}" if not is_missing(c.first_day) else MISSING
           for c in curves],
        [_Cell("Days observed", row_header=True)] + [fmt_count(c.days_observed) for c in curves],
    ]
    for label in labels:
        rows.append([_Cell(label, row_header=True)] + [dict(c.conventions).get(label, MISSING) for c in curves])
    header = [_Cell("Setting")] + [_Cell(c.name) for c in curves]
    parts.append(_table(header, rows, cls="settings"))
    parts.append(_inputs(data))
    parts.append(_builds(data))
    window = data.window
    window_text = ("all as-of dates in the store" if window == (None, None) else
                   f"as-of dates from {window[0] or 'the first'} to {window[1] or 'the last'}")
    parts.append("<h3>This report</h3>")
    parts.append(
        '<dl class="meta">'
        f"<dt>Generated at</dt><dd>{esc(fmt_timestamp(data.generated_at))}</dd>"
        f"<dt>Program</dt><dd>afterward {esc(data.program_version)}</dd>"
        f"<dt>Store schema version</dt><dd>{esc(data.schema_version)}</dd>"
        f'<dt>Store</dt><dd class="mono">{esc(data.store_path or MISSING)}</dd>'
        f'<dt>Configuration</dt><dd class="mono">{esc(data.config_path or MISSING)}</dd>'
        f"<dt>Window asked for</dt><dd>{esc(window_text)}</dd>"
        "</dl>"
    )
    return _section("scope", "".join(parts))


def _inputs(data: ReportData) -> str:
    loads = data.loads
    out = ["<h3>Input files</h3>"]
    if loads is None or loads.empty:
        return "".join(out) + _empty("No file has been loaded for these curves.")
    loads = loads.sort_values("load_id").reset_index(drop=True)
    loaded = _resting(loads)
    out.append(f"<p>The figures rest on <strong>{len(loaded):,}</strong> loaded file(s), load ids "
               f"{fmt_count(loaded['load_id'].min()) if len(loaded) else MISSING} to "
               f"{fmt_count(loaded['load_id'].max()) if len(loaded) else MISSING}. Input fingerprint "
               "(SHA-256 of the files' sorted SHA-256 digests): "
               f'<span class="mono">{input_fingerprint(loaded["sha256"])}</span></p>')
    rows = []
    for curve, g in loads.groupby(loads["curve"].fillna("(not routed)").astype(str), sort=True):
        ok = _resting(g)
        rows.append([curve, _n(fmt_count(len(ok))), _n(fmt_count(len(g) - len(ok))),
                     _n(fmt_count(ok["load_id"].min()) if len(ok) else MISSING),
                     _n(fmt_count(ok["load_id"].max()) if len(ok) else MISSING),
                     _n(fmt_timestamp(ok["started_at"].min(), seconds=False) if len(ok) else MISSING),
                     _n(fmt_timestamp(ok["started_at"].max(), seconds=False) if len(ok) else MISSING),
                     _n(fmt_count(ok["rows_read"].sum())), _n(fmt_count(ok["rows_accepted"].sum())),
                     _n(fmt_count(ok["rows_revised"].sum())), _n(fmt_count(ok["rows_rejected"].sum()))])
    out.append(_table(["Curve", _nh("Files"), _nh("Refused"), _nh("First load id"), _nh("Last load id"),
                       _nh("First loaded"), _nh("Last loaded"), _nh("Rows read"), _nh("Accepted"),
                       _nh("Revised"), _nh("Rejected")], rows))
    notable = loads[(loads["status"] != "loaded") | (loads["rows_rejected"] > 0) | (loads["rows_revised"] > 0)]
    if len(notable):
        out.append("<h4>Files with rejected or revised rows, or refused</h4>")
        out.append(_table(
            [_nh("Load id"), "File", "Curve", "SHA-256 (first 16)", _nh("Read"), _nh("Accepted"), _nh("Revised"),
             _nh("Rejected"), "Status"],
            ([_n(fmt_count(r["load_id"])), r["file_name"], r["curve"] if not is_missing(r["curve"]) else MISSING,
              _raw(f'<span class="mono">{esc(str(r["sha256"])[:16])}</span>'), _n(fmt_count(r["rows_read"])),
              _n(fmt_count(r["rows_accepted"])), _n(fmt_count(r["rows_revised"])),
              _n(fmt_count(r["rows_rejected"])),
              r["status"] + ("" if is_missing(r.get("detail")) else f": {r['detail']}")]
             for r in _rows(notable, ROW_LIMIT)),
            total=len(notable)))
    out.append(f"<details><summary>All {len(loads):,} files with their load ids and digests</summary>")
    out.append(_table(
        [_nh("Load id"), "File", "Curve", "Loaded at", "SHA-256", _nh("Rows"), "Status"],
        ([_n(fmt_count(r["load_id"])), r["file_name"], r["curve"] if not is_missing(r["curve"]) else MISSING,
          fmt_timestamp(r["started_at"]), _raw(f'<span class="mono">{esc(r["sha256"])}</span>'),
          _n(fmt_count(r["rows_read"])), r["status"]] for r in _rows(loads))))
    out.append("</details>")
    return "".join(out)


def _resting(loads: pd.DataFrame) -> pd.DataFrame:
    """The loaded files the figures rest on: those holding current quotes in scope (column ``current``,
    when the caller gives it; else every loaded file)."""
    ok = loads["status"] == "loaded"
    if "current" in loads:
        ok &= loads["current"].fillna(False).astype(bool)
    return loads[ok]


def _builds(data: ReportData) -> str:
    out = ["<h3>Curves built and audit runs</h3>"]
    b = data.builds
    if b is None or b.empty:
        out.append(_empty("No curve has been built yet (run 'afterward build')."))
    else:
        out.append(_table(["Curve", "Method", "Program version", _nh("Days built"), _nh("First"), _nh("Last")],
                          ([r["curve"], r["method"], r["code_version"], _n(fmt_count(r["days"])),
                            _n(fmt_date(r["first_day"])), _n(fmt_date(r["last_day"]))] for r in _rows(b))))
    rows = []
    for c in data.curves:
        s = c.summary
        if s is None or s.empty:
            rows.append([c.name, MISSING, MISSING, MISSING, _n(fmt_count(c.pending))])
            continue
        first = s["window_from"].iloc[0] if "window_from" in s else None
        last = s["window_to"].iloc[0] if "window_to" in s else None
        window = ("all outcomes" if is_missing(first) and is_missing(last)
                  else f"as-of {fmt_date(first) if not is_missing(first) else 'start'} to "
                       f"{fmt_date(last) if not is_missing(last) else 'end'}")
        rows.append([c.name, fmt_timestamp(s["computed_at"].max()) if "computed_at" in s else MISSING,
                     fmt_timestamp(s["data_version"].max()) if "data_version" in s else MISSING, window,
                     _n(fmt_count(c.pending))])
    out.append(_table(["Curve", "Audit computed at", "Outcomes as of (data version)", "Audit window",
                       _nh("Forwards still pending")], rows))
    return "".join(out)


# ---- section 3: data quality ----------------------------------------------------------------------

def _quality(data: ReportData, first: object, last: object) -> str:
    f = data.findings
    parts = ['<p class="intro">Every finding the checks recorded and that is still open, every input row '
             "that could not be used, the days missing from the record, and the periods when the curve was "
             "inverted.</p>"]
    if f is None or f.empty:
        parts.append(_empty("No open findings."))
    else:
        by_sev = f["severity"].value_counts()
        parts.append("<p>" + esc(f"{len(f):,} open finding(s): " + ", ".join(
            f"{int(by_sev.get(s, 0)):,} {s}" for s in ("reject", "warn", "info"))) + ".</p>")
        parts.append(_figure(charts.findings_chart(f, CHECK_ORDER, first, last, "fq"), "fig-findings",
                             "No open findings."))
    parts.append("<h3>Days held back: open reject findings</h3>")
    held = data.held
    if held is None or held.empty:
        parts.append(_empty("No day is held back by an open reject finding."))
    else:
        held = held.sort_values(["curve", "as_of"])
        parts.append(_table(["Curve", _nh("As-of date"), "Check", "Tenor", "Detail"],
                            ([r["curve"], _n(fmt_date(r["as_of"])), r["check_name"],
                              r["tenor"] if not is_missing(r["tenor"]) else MISSING, r["detail"]]
                             for r in _rows(held, ROW_LIMIT)), total=len(held)))
    parts.append("<h3>Rejected input rows</h3>")
    rr = data.rejected_rows
    if rr is None or rr.empty:
        parts.append(_empty("No input row was rejected."))
    else:
        # a wide file's line carries one quote per tenor: the same line and reason repeat per quote
        grouped = (rr.assign(raw=rr["raw"].fillna(""))
                   .groupby(["load_id", "file_name", "line", "reason", "raw"], sort=True, dropna=False)
                   .size().rename("quotes").reset_index())
        parts.append(f"<p>{len(rr):,} rejected quote row(s) on {len(grouped):,} input line(s).</p>")
        parts.append(_table(
            [_nh("Load id"), "File", _nh("Line"), "Reason", _nh("Quotes"), "Input as received"],
            ([_n(fmt_count(r["load_id"])), r["file_name"], _n(fmt_count(r["line"])), r["reason"],
              _n(fmt_count(r["quotes"])),
              _raw(f'<span class="mono">{esc(_clip(r["raw"], 72))}</span>')]
             for r in _rows(grouped, ROW_LIMIT)), total=len(grouped)))
    parts.append("<h3>Gaps: expected days with no curve</h3>")
    gaps = f[f["check_name"] == "missing_day"] if f is not None and not f.empty else pd.DataFrame()
    if gaps.empty:
        parts.append(_empty("No expected observation day is missing."))
    else:
        gaps = gaps.sort_values(["curve", "as_of"])
        parts.append(_table(["Curve", _nh("As-of date"), "Severity", "Detail"],
                            ([r["curve"], _n(fmt_date(r["as_of"])), _raw(_sev(r["severity"])), r["detail"]]
                             for r in _rows(gaps, ROW_LIMIT)), total=len(gaps)))
    parts.append("<h3>Inversion episodes</h3>")
    parts.append(_episodes(data.curves))
    return _section("quality", "".join(parts))


def _clip(text: object, width: int) -> str:
    s = "" if is_missing(text) else str(text)
    return s if len(s) <= width else s[: width - 1] + "\u2026"


def _episodes(curves: Sequence[CurveReport]) -> str:
    frames = [c.episodes.assign(curve=c.name) for c in curves if c.episodes is not None and not c.episodes.empty]
    if not frames:
        return _empty("No inversion episode at the configured tenor pairs in the period shown.")
    e = pd.concat(frames, ignore_index=True)
    out = []
    summary = (e.groupby(["curve", "short_tenor", "long_tenor"], sort=True)
               .agg(episodes=("days", "size"), days=("days", "sum"), deepest=("deepest_bp", "min"),
                    first=("first_day", "min"), last=("last_day", "max")).reset_index())
    out.append(_table(["Curve", "Pair", _nh("Episodes"), _nh("Inverted days"), _nh("Deepest (bp)"),
                       _nh("First inverted"), _nh("Last inverted")],
                      ([r["curve"], f"{r['short_tenor']} above {r['long_tenor']}", _n(fmt_count(r["episodes"])),
                        _n(fmt_count(r["days"])), _n(fmt_bp(r["deepest"])), _n(fmt_date(r["first"])),
                        _n(fmt_date(r["last"]))] for r in _rows(summary))))
    longest = e.sort_values(["days", "first_day"], ascending=[False, True]).head(12).sort_values(
        ["curve", "first_day"])
    out.append(_table(["Curve", "Pair", _nh("First day"), _nh("Last day"), _nh("Days"), _nh("Deepest (bp)")],
                      ([r["curve"], f"{r['short_tenor']} above {r['long_tenor']}", _n(fmt_date(r["first_day"])),
                        _n(fmt_date(r["last_day"])), _n(fmt_count(r["days"])), _n(fmt_bp(r["deepest_bp"]))]
                       for r in _rows(longest)),
                      caption="The longest episodes (up to 12), in date order. Days count observed days; "
                              "deepest is the most negative long-minus-short spread."))
    return "".join(out)


# ---- sections 4 to 8: per curve ----------------------------------------------------------------

def _per_curve(curves: Sequence[CurveReport], index: str, intro: str,
               body: Callable[[CurveReport, int], str]) -> str:
    parts = [f'<p class="intro">{esc(intro)}</p>']
    if not curves:
        parts.append(_empty("No curve in scope."))
    for i, c in enumerate(curves):
        parts.append(_curve_heading(c) + body(c, i))
    return _section(index, "".join(parts))


def _history_body(c: CurveReport, i: int) -> str:
    return (_figure(charts.history_chart(c, f"h{i}"), f"fig-history-{i}",
                    "No curve has been built for this curve yet (run 'afterward build').")
            + _figure(charts.spreads_chart(c, f"s{i}"), f"fig-spreads-{i}",
                      "No inversion pair is configured, or its tenors are not quoted."))


def _summary_rows(c: CurveReport, regime: str = "all") -> pd.DataFrame:
    s = c.summary
    if s is None or s.empty:
        return pd.DataFrame()
    s = s[s["regime"] == regime] if "regime" in s else s
    return s.sort_values(["start_months", "tenor_months"]).reset_index(drop=True)


def _interval(r: pd.Series) -> str:
    se = r.get("hac_se_bp")
    if is_missing(se) or is_missing(r.get("mean_error_bp")):
        return MISSING
    half = float(interval_half_width(float(se), r["n"], r["lags"]))
    mean = float(r["mean_error_bp"])
    return _range(mean - half, mean + half)


def _range(lo: object, hi: object) -> str:
    """``lo to hi`` in signed bp; the missing mark when either end is missing (no interval)."""
    if is_missing(lo) or is_missing(hi):
        return MISSING
    return f"{fmt_bp(lo, signed=True)} to {fmt_bp(hi, signed=True)}"


def _forwards_body(c: CurveReport, i: int) -> str:
    out = [_figure(charts.forwards_chart(c, f"f{i}"), f"fig-forwards-{i}",
                   "No forward of the charted horizons has reached its target date yet.")]
    s = _summary_rows(c)
    if not s.empty and c.pairs:
        keep = s[[(int(a), int(b)) in set(c.pairs) for a, b in zip(s["start_months"], s["tenor_months"],
                                                                     strict=True)]]
        if len(keep):
            out.append(_table(
                ["Forward", _nh("Outcomes"), _nh("As-of from"), _nh("As-of to"), _nh("Mean error (bp)"),
                 _nh("RMSE forward (bp)"), _nh("RMSE no-change (bp)")],
                ([f"{months_label(r['tenor_months'])} rate, {months_label(r['start_months'])} ahead",
                  _n(fmt_count(r["n"])), _n(fmt_date(r["first_as_of"])), _n(fmt_date(r["last_as_of"])),
                  _n(fmt_bp(r["mean_error_bp"], signed=True)), _n(fmt_bp(r["rmse_bp"])), _n(fmt_bp(r["rw_rmse_bp"]))]
                 for r in _rows(keep))))
    return "".join(out)


def _errors_body(c: CurveReport, i: int) -> str:
    out = [_note(n) for n in c.notes]
    out.append(_figure(charts.error_chart(c, f"e{i}"), f"fig-errors-{i}",
                       "No audit figures yet (run 'afterward realize' and 'afterward audit')."))
    out.append(_figure(charts.rmse_chart(c, f"r{i}"), f"fig-rmse-{i}", "No audit figures yet."))
    out.append(_figure(charts.error_time_chart(c, f"t{i}"), f"fig-error-time-{i}",
                       "No forward of the charted tenor has reached its target date yet."))
    s = _summary_rows(c)
    if s.empty:
        return "".join(out)
    out.append("<h4>Test results (all outcomes)</h4>")
    if (s["start_months"] == 0).any():
        out.append('<p class="more">Forwards starting now (0M) are the spot rate itself; their error is zero by '
                   "construction, so they are left out of the table and the charts.</p>")
        s = s[s["start_months"] > 0]
    head = ["Start", "Tenor", _nh("n"), _nh("Independent periods"), _nh("Mean error (bp)"),
            _nh("HAC 95 % interval (bp)"), _nh("Lags"), _nh("Bias p (fixed-b)"), _nh("RMSE fwd (bp)"),
            _nh("RMSE no-change (bp)"), _nh("RMSE ratio"), _nh("DM p"), _nh("DM p (fixed-b)"), _nh("MZ slope"),
            _nh("MZ p"), _nh("FB slope"), _nh("Hit rate")]
    body = []
    for _, r in s.iterrows():
        flag = r.get("indicative")
        indep = fmt_num(r.get("n_effective"), 1) + (" *" if not is_missing(flag) and bool(flag) else "")
        cells = [months_label(r["start_months"]), months_label(r["tenor_months"]), _n(fmt_count(r["n"])),
                 _n(indep), _n(fmt_bp(r["mean_error_bp"], signed=True)), _n(_interval(r)),
                 _n(fmt_count(r.get("lags"))), _n(fmt_pvalue(r.get("hac_pvalue"))), _n(fmt_bp(r["rmse_bp"])),
                 _n(fmt_bp(r["rw_rmse_bp"])), _n(fmt_num(r["rmse_ratio"], 2)), _n(fmt_pvalue(r["dm_pvalue"])),
                 _n(fmt_pvalue(r.get("dm_pvalue_fixed_b"))), _n(fmt_num(r["mz_beta"], 2)),
                 _n(fmt_pvalue(r["mz_pvalue"])), _n(fmt_num(r["fb_beta"], 2)),
                 _n(fmt_pct(r["hit_rate"], 0) if not is_missing(r["hit_rate"]) else MISSING)]
        verdict = r.get("verdict")
        if is_missing(verdict) or not str(verdict):
            body.append(f"<tr>{''.join(x.html() if isinstance(x, _Cell) else _Cell(x).html() for x in cells)}</tr>")
            continue
        body.append('<tr class="has-verdict">'
                    + "".join(x.html() if isinstance(x, _Cell) else _Cell(x).html() for x in cells) + "</tr>")
        body.append(f'<tr class="verdict"><td colspan="{len(head)}">{esc(verdict)}</td></tr>')
    out.append('<div class="table-wrap"><table class="results"><thead><tr>'
               + "".join(h.html("th") if isinstance(h, _Cell) else f"<th>{esc(h)}</th>" for h in head)
               + "</tr></thead><tbody>" + "".join(body) + "</tbody></table></div>")
    out.append('<p class="more">Mean error: forward minus realised rate. HAC: Newey-West (Bartlett) with the '
               "lags shown (the overlap of consecutive forecasts); the interval is the plain normal one. "
               "Independent periods: outcomes over the overlap, the number of forecasts that share no future; "
               "* marks fewer than 10, where every figure of the row is indicative only. Bias p (fixed-b): "
               "p-value of the mean error's HAC t under the fixed-b null for overlapping forecasts (the plain "
               "normal reading over-rejects at heavy overlap). RMSE ratio: forward over no-change; below 1 "
               "the forwards forecast better. DM p: Diebold-Mariano test (Harvey-Leybourne-Newbold form) of "
               "equal squared error against no-change; DM p (fixed-b): the same statistic under the fixed-b "
               "null. MZ: Mincer-Zarnowitz regression of realised on forward "
               "(p: joint test of intercept 0 and slope 1). FB slope: Fama-Bliss slope of the realised change on "
               "the forward-spot spread. Hit rate: share of predicted moves whose direction came true. "
               "Significance at 5 %, judged by the fixed-b p-values.</p>")
    regimes = c.summary[(c.summary["regime"] != "all") & (c.summary["start_months"] > 0)] \
        if "regime" in c.summary else pd.DataFrame()
    if len(regimes):
        regimes = regimes.sort_values(["start_months", "tenor_months", "regime"])
        out.append("<details><summary>The same by regime (curve inverted or normal on the as-of date)</summary>")
        out.append(_table(
            ["Start", "Tenor", "Regime", _nh("n"), _nh("Mean error (bp)"), _nh("HAC 95 % interval (bp)"),
             _nh("RMSE fwd (bp)"), _nh("RMSE no-change (bp)"), "Verdict"],
            ([months_label(r["start_months"]), months_label(r["tenor_months"]), r["regime"], _n(fmt_count(r["n"])),
              _n(fmt_bp(r["mean_error_bp"], signed=True)), _n(_interval(r)), _n(fmt_bp(r["rmse_bp"])),
              _n(fmt_bp(r["rw_rmse_bp"])), r.get("verdict") if not is_missing(r.get("verdict")) else MISSING]
             for r in _rows(regimes)), cls="results"))
        out.append("</details>")
    return "".join(out)


def _premium_body(c: CurveReport, i: int) -> str:
    out = [_figure(charts.premium_chart(c, f"p{i}"), f"fig-premium-{i}",
                   "Not enough outcomes yet for a trailing-window premium."),
           _figure(charts.premium_regime_chart(c, f"g{i}"), f"fig-premium-regime-{i}",
                   "No audit figures by regime yet.")]
    p = c.premium
    if p is not None and not p.empty:
        p = p[p["start_months"] > 0]
        latest = p.sort_values("as_of").groupby("start_months", sort=True).tail(1).sort_values("start_months")
        out.append(_table(
            ["Start", "Tenor", _nh("Window ends"), _nh("Premium (bp)"), _nh("95 % band (bp)")],
            ([months_label(r["start_months"]), months_label(r["tenor_months"]), _n(fmt_date(r["as_of"])),
              _n(fmt_bp(r["premium_bp"], signed=True)),
              _n(_range(r["lower_bp"], r["upper_bp"]))]
             for r in _rows(latest)),
            caption="The latest trailing-window premium of each horizon. No band (\u2013) where the window "
                    "holds about one forecast period or less."))
    chart = charts.model_premium_chart(c, f"m{i}")
    if chart is not None:
        out.append("<h4>The model term premium</h4>")
        out.append(_figure(chart, f"fig-model-premium-{i}", ""))
    return "".join(out)


def _contenders_body(c: CurveReport, i: int) -> str:
    s, mcs = c.contender_scores, c.confidence_set
    if s is None or s.empty:
        return _empty("No comparison stored yet (run 'afterward compare').")
    out = []
    if c.compared:
        at, lo, hi = c.compared
        lo_text = "the start" if is_missing(lo) else fmt_date(lo)
        hi_text = "the end" if is_missing(hi) else fmt_date(hi)
        span = "the whole record" if is_missing(lo) and is_missing(hi) else f"as-of dates {lo_text} to {hi_text}"
        out.append(_note(f"As computed by 'afterward compare' on {fmt_timestamp(at)} over {span}."))
    out.append(_figure(charts.contender_rmse_chart(c, f"c{i}"), f"fig-contenders-{i}", "No horizon beyond 0M."))
    names = list(dict.fromkeys(s["contender"]))
    cells = s[s["start_months"] > 0][["start_months", "tenor_months"]].drop_duplicates()
    p = {} if mcs is None or mcs.empty else {
        (int(r["start_months"]), int(r["tenor_months"]), r["contender"]): (r["mcs_p_value"], bool(r["included"]))
        for _, r in mcs.iterrows()}
    sc = {(int(r["start_months"]), int(r["tenor_months"]), r["contender"]): r for _, r in s.iterrows()}

    def cell(key: tuple) -> _Cell:
        if key not in p:
            return _n(MISSING)
        pv, inc = p[key]
        mark = "in" if inc else "out"
        return _Cell(f"{fmt_pvalue(pv)} ({mark})", numeric=True, cls="" if inc else "muted")

    rows = []
    for _, r in cells.iterrows():
        a, b = int(r["start_months"]), int(r["tenor_months"])
        first = sc.get((a, b, names[0]))
        n_eff = next((x["n_effective"] for k, x in sc.items() if k[:2] == (a, b)), None)
        rows.append([months_label(a), months_label(b),
                     _n(fmt_count(first["n"]) if first is not None else MISSING),
                     _n(fmt_num(n_eff, 1) + (" *" if n_eff is not None and n_eff < 10 else "")
                        if n_eff is not None else MISSING),
                     *[cell((a, b, name)) for name in names]])
    out.append(_table(["Start", "Tenor", _nh("n"), _nh("Independent periods"), *[_nh(nm) for nm in names]], rows,
                      caption="Model Confidence Set at 10 %: each contender's MCS p-value; 'in' = not beaten. "
                              "* fewer than 10 non-overlapping periods: indicative only.", cls="results"))
    v = c.contender_verdicts
    if v is not None and len(v):
        v = v[v["start_months"] > 0]
        out.append('<ul class="verdicts">' + "".join(f"<li>{esc(x)}</li>" for x in v["verdict"]) + "</ul>")
    out.append('<p class="more">Contenders: forward (the implied forward), no_change (the spot rate of the '
               "tenor), premium_adjusted (the forward less the trailing premium known on the as-of date), "
               "model_expected (the term-structure model's risk-neutral forward), forward@METHOD (a what-if "
               "build) and any forecast file loaded by the team. Tests and p-values use a fixed-b null that "
               "allows for overlapping forecasts; the pairwise tests are in the contender_tests view.</p>")
    return "".join(out)


# ---- overrides, cautions, sign-off and the page ---------------------------------------------------------------------

CAUTIONS = (
    ("Statistical findings, not advice.",
     "This report describes how past forwards compared with the rates that followed. It is evidence for "
     "model validation and review; it is not investment advice and does not forecast future rates."),
    ("Overlapping observations.",
     "Forecasts made on consecutive days for horizons longer than a day share most of their future, so "
     "their errors are strongly correlated. The intervals and tests use Newey-West standard errors with "
     "lags for that overlap, but a sample of a few years holds only a few independent outcomes at long "
     "horizons; read long-horizon results with that in mind."),
    ("Dependence on input data and conventions.",
     "Every figure depends on the files listed under Scope and provenance, on the quote type, compounding, day count, "
     "calendar and interpolation method configured for each curve, and on the checks that held days "
     "back. Different inputs or conventions give different numbers; the input fingerprint, program version "
     "and schema version identify the ones used here."),
    ("Past sample, one history.",
     "The term premium and the errors are measured over one realised path of rates. A period dominated "
     "by rising or falling rates moves them, and they need not persist."),
    ("Decisions stay with people.",
     "Conclusions about models, limits or hedges remain with qualified staff, under the institution's own "
     "governance and the regulation that applies locally."),
)


def _overrides(data: ReportData) -> str:
    parts = ['<p class="intro">Every decision a person made that changes what the figures rest on: the days whose '
             "reject findings were accepted (so the day was built and scored) and the what-if builds made beside "
             "the official curves. A reviewer checks that each has a named owner and a reason.</p>"]
    parts.append("<h3>Accepted days</h3>")
    a = data.acceptances
    if a is None or a.empty:
        parts.append(_empty("No day's findings have been accepted: every reject finding still holds its day back."))
    else:
        lapsed = int((~a["in_force"].astype(bool)).sum())
        parts.append(_table(
            ["Curve", _nh("Day"), "Findings on the day", "Accepted by", _nh("Accepted at"), "Reason", "Status"],
            ([r["curve"], _n(fmt_date(r["as_of"])), r["findings"] if not is_missing(r["findings"]) else MISSING,
              r["accepted_by"], _n(fmt_timestamp(r["accepted_at"], seconds=False)),
              r["reason"] if not is_missing(r["reason"]) and str(r["reason"]) else "(no reason given)",
              "in force" if bool(r["in_force"]) else "lapsed: the day's quotes changed since"]
             for r in _rows(a)),
            caption=f"{len(a):,} acceptance(s), {lapsed:,} lapsed. An acceptance lasts until the day's quotes "
                    "change; findings are the day's unresolved ones."))
    parts.append("<h3>What-if builds</h3>")
    w = data.scenarios
    if w is None or w.empty:
        parts.append(_empty("No what-if build: only the official curves have been built."))
    else:
        parts.append(_table(
            ["Curve", "Scenario", "Method", "Program version", _nh("Days built"), _nh("First"), _nh("Last"),
             _nh("Last built at")],
            ([r["curve"], r["scenario"], r["method"], r["code_version"], _n(fmt_count(r["days"])),
              _n(fmt_date(r["first_day"])), _n(fmt_date(r["last_day"])),
              _n(fmt_timestamp(r["built_at"], seconds=False))] for r in _rows(w)),
            caption="Scenarios built with another interpolation method ('afterward build --method'); they stand "
                    "beside the official surfaces and change no figure of this report unless compared as a "
                    "contender."))
    return _section("overrides", "".join(parts))


def _signoff(data: ReportData) -> str:
    roles = ("Prepared by", "Reviewed by", "Approved by")
    rows = "".join(f'<tr><th scope="row">{esc(r)}</th><td></td><td></td><td></td></tr>' for r in roles)
    return _section("signoff", (
        '<p class="intro">To be completed on the printed or saved copy. Signing records that the reviewer read '
        "this report with its cautions; it does not turn statistical evidence into a decision.</p>"
        f'<table class="signoff"><caption>Report generated {esc(fmt_timestamp(data.generated_at))}; input '
        f"fingerprint {esc(_fingerprint_short(data))} (its first 16 hex digits; the whole one is under Scope and "
        "provenance)</caption><thead><tr><th>Role</th><th>Name</th>"
        f"<th>Signature</th><th>Date</th></tr></thead><tbody>{rows}</tbody></table>"
        '<div class="remarks"><p>Remarks and conditions</p></div>'))


def _fingerprint_short(data: ReportData) -> str:
    loads = data.loads
    if loads is None or loads.empty:
        return MISSING
    return input_fingerprint(_resting(loads)["sha256"])[:16]


def _cautions() -> str:
    items = "".join(f"<li><strong>{esc(a)}</strong> {esc(b)}</li>" for a, b in CAUTIONS)
    return _section("cautions", f'<ol class="cautions">{items}</ol>')


def _facts(data: ReportData) -> str:
    curves = data.curves
    days = sum(int(c.days_observed) for c in curves)
    loads = data.loads
    files = len(_resting(loads)) if loads is not None and not loads.empty else 0
    outcomes = sum(int(c.summary.loc[c.summary["regime"] == "all", "n"].sum())
                   for c in curves if c.summary is not None and not c.summary.empty)
    findings = 0 if data.findings is None else len(data.findings)
    pending = sum(int(c.pending) for c in curves)
    items = [("Curves", fmt_count(len(curves))), ("Curve-days", fmt_count(days)), ("Input files", fmt_count(files)),
             ("Scored forwards", fmt_count(outcomes)), ("Open findings", fmt_count(findings)),
             ("Pending forwards", fmt_count(pending))]
    return '<dl class="facts">' + "".join(f"<div><dt>{esc(a)}</dt><dd>{esc(b)}</dd></div>" for a, b in items) + "</dl>"


def _span(curves: Sequence[CurveReport]) -> tuple[object, object]:
    firsts = [pd.Timestamp(c.first_day) for c in curves if not is_missing(c.first_day)]
    lasts = [pd.Timestamp(c.last_day) for c in curves if not is_missing(c.last_day)]
    return (min(firsts) if firsts else None, max(lasts) if lasts else None)


def _known_at_banner(data: ReportData) -> str:
    if data.as_known_at is None:
        return ""
    return (f'<p class="known-at" role="note"><strong>Data as known at {esc(fmt_timestamp(data.as_known_at))} UTC.'
            "</strong> This report was recomputed from the archive as it stood then (quote versions, findings and "
            "acceptances of that time; later loads and restatements left out). It is not the current record.</p>")


def render_report(data: ReportData) -> str:
    """The whole report as one self-contained HTML document (UTF-8 text).

    Pure: reads only ``data``; the same data and ``generated_at`` give the same page.
    """
    first, last = _span(data.curves)
    names = ", ".join(c.name for c in data.curves) or "none"
    lede = (f"Curves {names} \u00b7 as-of dates {fmt_date(first)} to {fmt_date(last)} \u00b7 generated "
            f"{fmt_timestamp(data.generated_at)}")
    toc = "".join(f'<li><a href="#{a}">{esc(h)}</a></li>' for a, h in SECTIONS)
    body = [
        '<header class="masthead"><p class="kicker">Model validation evidence \u00b7 implied forwards against '
        "realised rates</p>"
        f"<h1>{esc(data.title)}</h1><p class=\"lede\">{esc(lede)}</p>{_known_at_banner(data)}{_facts(data)}"
        f'<nav class="contents"><p>Contents</p><ol>{toc}</ol></nav></header>',
        _summary(data),
        _scope(data),
        _quality(data, first, last),
        _per_curve(data.curves, "history", "Each curve over time: the colour shows the rate at each tenor, the lines "
                   "follow a few tenors, and shading marks the periods when the short end stood above the "
                   "long end.", _history_body),
        _per_curve(data.curves, "forwards", "For a few horizons, each forward drawn on the date it was a forecast for, "
                   "next to the rate actually observed on that date and to the no-change forecast (today's "
                   "rate, carried forward).", _forwards_body),
        _per_curve(data.curves, "errors", "How far the forwards missed, on average and in spread, at each horizon, "
                   "and whether they beat the no-change forecast.", _errors_body),
        _per_curve(data.curves, "premium", "The ex-post term premium: the average amount by which the forwards "
                   "exceeded the rates that followed, over a trailing window of observation days.", _premium_body),
        _per_curve(data.curves, "contenders", "The forwards scored against every other forecast on the same days: "
                   "which are not beaten, at each horizon, and how much independent evidence there is.",
                   _contenders_body),
        _overrides(data),
        _cautions(),
        _signoff(data),
        f"<footer>afterward {esc(data.program_version)} \u00b7 schema {esc(data.schema_version)} \u00b7 generated "
        f"{esc(fmt_timestamp(data.generated_at))}. This file is self-contained: it loads nothing from "
        "anywhere.</footer>",
    ]
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        f'<meta http-equiv="Content-Security-Policy" content="{CSP}">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f'<meta name="generator" content="afterward {esc(data.program_version)}">'
        f"<title>{esc(data.title)} \u2013 {esc(names)}</title>"
        f"<style>{STYLESHEET}</style></head>"
        f'<body><div class="sheet">{"".join(body)}</div></body></html>\n'
    )


