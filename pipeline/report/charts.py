"""The report's charts: frames in, inline SVG strings out (matplotlib on its SVG canvas).

Every chart has a title, axis labels with units and a legend or colour bar. Colours are the
Okabe-Ito palette for lines and points and ``cividis`` for colour scales, both chosen to stay
distinguishable for colour-blind readers. Long daily series are thinned to one point per period
(:mod:`pipeline.report.series`); each function returns the SVG and a caption naming that period,
or ``None`` when there is nothing to draw.
"""

from __future__ import annotations

from dataclasses import dataclass

import matplotlib.dates as mdates
import numpy as np
import pandas as pd
from matplotlib import colormaps
from matplotlib.cm import ScalarMappable
from matplotlib.colors import ListedColormap, Normalize
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from pipeline.audit import interval_half_width
from pipeline.report.fmt import months_label
from pipeline.report.model import CurveReport
from pipeline.report.series import choose_period, period_keys, period_start, thin_frame
from pipeline.report.svg import INK, MUTED, OKABE_ITO, RULE, chart_style, figure_svg, new_figure
from pipeline.tenors import parse_tenor

__all__ = [
    "Chart",
    "contender_rmse_chart",
    "error_chart",
    "error_time_chart",
    "findings_chart",
    "forwards_chart",
    "history_chart",
    "model_premium_chart",
    "premium_chart",
    "premium_regime_chart",
    "rmse_chart",
    "spreads_chart",
]

WIDTH = 9.6  # inches; 72 pt each, scaled to the page width by the browser
LINE_POINTS = 1600  # a long line: one point per week for up to ~30 years
PANEL_POINTS = 500  # a small panel: one point per month for up to ~40 years
HEAT_COLUMNS = 1600
TENOR_COLOURS = [OKABE_ITO[k] for k in ("blue", "vermillion", "green", "purple", "orange", "sky", "black")]
FORWARD, REALISED, NO_CHANGE = OKABE_ITO["vermillion"], OKABE_ITO["black"], OKABE_ITO["sky"]
SHADE = OKABE_ITO["purple"]
SEVERITY_FILL = {"reject": OKABE_ITO["vermillion"], "warn": OKABE_ITO["orange"], "info": OKABE_ITO["blue"]}
PERIOD_WORD = {"day": "day", "week": "week", "month": "month", "quarter": "quarter", "year": "year"}


@dataclass(frozen=True)
class Chart:
    """A drawn chart: the ``<svg>`` element, its title (accessible name) and a caption for people."""

    svg: str
    title: str
    caption: str


def _days(values: object) -> np.ndarray:
    return np.asarray(pd.to_datetime(pd.Series(values)).to_numpy().astype("datetime64[D]"))


def _date_axis(ax, first: np.datetime64, last: np.datetime64, width_in: float = WIDTH - 1.0) -> None:  # noqa: ANN001
    """Year ticks for long spans, ISO months for shorter ones, ISO days for a few weeks.

    ``width_in``: the axes' width in inches; the number of ticks is held to what fits there without
    two labels touching (a "YYYY-MM" label at the tick font is about 0.45 in wide, a year 0.3 in, a
    "YYYY-MM-DD" 0.65 in; a label's width again is left free between two).
    """
    span = (last - first).astype("timedelta64[D]").astype(int)
    if span > 3 * 365:
        fit = max(int(width_in / 0.5), 2)
        years = max(span / 365.25, 1.0)
        base = next((b for b in (1, 2, 5, 10, 20, 50, 100) if years / b <= fit), 100)
        ax.xaxis.set_major_locator(mdates.YearLocator(base))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y"))
    elif span > 62:
        fit = max(int(width_in / 0.65), 2)
        months = max(span / 30.4, 1.0)
        step = next((s for s in (1, 2, 3, 6, 12, 24) if months / s <= fit), 24)
        ax.xaxis.set_major_locator(mdates.MonthLocator(bymonth=range(1, 13, step) if 12 % step == 0 else None,
                                                       interval=1 if 12 % step == 0 else step))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y-%m"))
    else:
        fit = max(int(width_in / 1.0), 2)
        ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=2, maxticks=min(8, fit)))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y-%m-%d"))
    pad = np.timedelta64(max(int(span * 0.01), 1), "D")
    ax.set_xlim(mdates.date2num(first - pad), mdates.date2num(last + pad))


def _thinned_note(period: str) -> str:
    if period == "day":
        return "every observed day is plotted"
    return f"one point per {PERIOD_WORD[period]} (the last observed day of each)"


# ---- data quality ---------------------------------------------------------------------------------

def findings_chart(findings: pd.DataFrame, check_order: tuple[str, ...], first: object, last: object,
                   prefix: str) -> Chart | None:
    """Open findings counted by check (rows: curve, check, severity) and year or month (columns).

    ``findings``: columns ``curve, as_of, check_name, severity``. Months are used when the period
    from ``first`` to ``last`` is three years or less, else years. Empty cells mean no finding.
    """
    if findings.empty:
        return None
    days = _days(findings["as_of"])
    lo = min(days.min(), _days([first])[0]) if first is not None else days.min()
    hi = max(days.max(), _days([last])[0]) if last is not None else days.max()
    period = "month" if (hi - lo).astype(int) <= 3 * 366 else "year"
    keys = period_keys(days, period)
    k0, k1 = int(period_keys([lo], period)[0]), int(period_keys([hi], period)[0])
    order = {c: i for i, c in enumerate(check_order)}
    sev_order = {"reject": 0, "warn": 1, "info": 2}
    frame = pd.DataFrame({"curve": findings["curve"].astype(str).to_numpy(),
                          "check": findings["check_name"].astype(str).to_numpy(),
                          "severity": findings["severity"].astype(str).to_numpy(),
                          "col": keys - k0})
    rows = (frame[["curve", "check", "severity"]].drop_duplicates()
            .assign(o1=lambda f: f["check"].map(order).fillna(len(order)),
                    o2=lambda f: f["severity"].map(sev_order).fillna(3))
            .sort_values(["curve", "o1", "o2"]).reset_index(drop=True))
    row_of = {tuple(r): i for i, r in enumerate(rows[["curve", "check", "severity"]].itertuples(index=False))}
    frame["row"] = [row_of[(a, b, c)] for a, b, c in zip(frame["curve"], frame["check"], frame["severity"],
                                                          strict=True)]
    counts = np.zeros((len(rows), k1 - k0 + 1))
    np.add.at(counts, (frame["row"].to_numpy(), frame["col"].to_numpy()), 1)
    n_rows, n_cols = counts.shape
    # colour says how serious (one reject outweighs many infos), the number says how many
    level = rows["severity"].map({"info": 1, "warn": 2, "reject": 3}).fillna(1).to_numpy(dtype=float)
    shade = np.where(counts > 0, level[:, None], 0.0)
    fills = ["#ffffff", SEVERITY_FILL["info"], SEVERITY_FILL["warn"], SEVERITY_FILL["reject"]]
    title = f"Open findings by check and {period}"
    with chart_style():
        fig = new_figure(WIDTH, 1.45 + 0.27 * n_rows)
        ax = fig.add_subplot()
        ax.imshow(shade, aspect="auto", interpolation="none", cmap=ListedColormap(fills), vmin=-0.5, vmax=3.5,
                  extent=(-0.5, n_cols - 0.5, n_rows - 0.5, -0.5))
        ax.grid(False)
        ax.set_yticks(range(n_rows), [f"{c} \u00b7 {k} ({s})" for c, k, s in
                                      rows[["curve", "check", "severity"]].itertuples(index=False)])
        starts = period_start(np.arange(k0, k1 + 1), period)
        labels = [str(d)[:4] if period == "year" else str(d)[:7] for d in starts]
        step = max(1, int(np.ceil(n_cols / 16)))
        ax.set_xticks(range(0, n_cols, step), labels[::step])
        ax.set_xticks(np.arange(-0.5, n_cols, 1), minor=True)
        ax.set_yticks(np.arange(-0.5, n_rows, 1), minor=True)
        ax.grid(True, which="minor", color=RULE, linewidth=0.4)
        ax.tick_params(which="minor", length=0)
        ax.set_xlabel(f"{period.capitalize()} of the as-of date")
        ax.set_title(title)
        size = 6.5 if n_cols <= 40 else max(3.5, 6.5 * 40 / n_cols)
        for r, c in zip(*np.nonzero(counts), strict=True):
            ink = "#ffffff" if shade[r, c] in (1.0, 3.0) else INK
            ax.text(c, r, f"{int(counts[r, c]):,}", ha="center", va="center", fontsize=size, color=ink)
        ax.legend(handles=[Patch(facecolor=SEVERITY_FILL[k], label=k) for k in ("reject", "warn", "info")],
                  title="Severity", loc="upper left", bbox_to_anchor=(1.0, 1.0))
        svg = figure_svg(fig, prefix, title)
    caption = (f"The number in a cell counts the open findings of one check on as-of dates in that {period}; "
               "its colour is the check's severity (reject, warn, info), whatever the count; a blank cell has none.")
    return Chart(svg, title, caption)


# ---- curve history --------------------------------------------------------------------------------

def _line_tenors(tenors: tuple[str, ...], wanted: tuple[str, ...] = ("3M", "2Y", "10Y", "30Y")) -> list[str]:
    if not tenors:
        return []
    days = {t: parse_tenor(t).approx_days for t in tenors}
    picked: list[str] = []
    for w in wanted:
        target = parse_tenor(w).approx_days
        best = min(tenors, key=lambda t: (abs(np.log(days[t] / target)), days[t]))
        if best not in picked:
            picked.append(best)
    return sorted(picked, key=lambda t: days[t])


def _episode_spans(episodes: pd.DataFrame, pair: tuple[str, str] | None) -> list[tuple[float, float]]:
    if pair is None or episodes.empty:
        return []
    sel = episodes[(episodes["short_tenor"] == pair[0]) & (episodes["long_tenor"] == pair[1])]
    if sel.empty:
        return []
    a = mdates.date2num(_days(sel["first_day"]))
    b = mdates.date2num(_days(sel["last_day"]) + np.timedelta64(1, "D"))
    return list(zip(a.tolist(), (b - a).tolist(), strict=True))


def _maturity_rows(tenors: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """(centre, edges) of each tenor's strip on a log10-years axis: centres at the maturities, edges
    halfway between neighbours (half a gap beyond the first and the last)."""
    y = np.log10(np.array([parse_tenor(t).approx_days / 365.25 for t in tenors]))
    if y.size == 1:
        return y, np.array([y[0] - 0.5, y[0] + 0.5])
    mid = (y[1:] + y[:-1]) / 2
    return y, np.r_[y[0] - (y[1] - y[0]) / 2, mid, y[-1] + (y[-1] - y[-2]) / 2]


def _spaced(y: np.ndarray, min_gap: float) -> list[int]:
    """Positions of ``y`` (ascending) to label: the first, then each at least ``min_gap`` above the last
    kept, the longest always (dropping its neighbour instead when the two are too close)."""
    kept = [0]
    for j in range(1, len(y)):
        if y[j] - y[kept[-1]] >= min_gap:
            kept.append(j)
    last = len(y) - 1
    if kept[-1] != last:
        if len(kept) > 1 and y[last] - y[kept[-1]] < min_gap:
            kept.pop()
        kept.append(last)
    return kept


def history_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """A heatmap of the curve (tenor x date, colour = rate in %) over a few tenors as lines, with the
    inversion episodes of ``curve.inversion_pair`` shaded in the lower panel."""
    h = curve.history
    if h.empty:
        return None
    tenors = [t for t in curve.tenors if t in set(h["tenor"].astype(str))] or sorted(set(h["tenor"].astype(str)))
    tenors = sorted(tenors, key=lambda t: parse_tenor(t).approx_days)
    frame = pd.DataFrame({"as_of": _days(h["as_of"]), "tenor": h["tenor"].astype(str).to_numpy(),
                          "rate": h["rate"].to_numpy(dtype=float)})
    frame = frame[frame["tenor"].isin(tenors)]
    dates = np.unique(frame["as_of"].to_numpy())
    first, last = dates[0], dates[-1]
    # a column per calendar day would leave weekends and holidays as empty stripes: a week is the finest
    heat_period = choose_period(dates, HEAT_COLUMNS)
    if heat_period == "day":
        heat_period = "week"
    heat = thin_frame(frame, "as_of", heat_period, by=["tenor"])
    keys = period_keys(heat["as_of"].to_numpy(), heat_period)
    k0, k1 = int(keys.min()), int(keys.max())
    row = {t: i for i, t in enumerate(tenors)}
    mat = np.full((len(tenors), k1 - k0 + 1), np.nan)
    mat[heat["tenor"].map(row).to_numpy(), keys - k0] = heat["rate"].to_numpy() * 100.0
    x0 = mdates.date2num(period_start([k0], heat_period)[0])
    x1 = mdates.date2num(period_start([k1 + 1], heat_period)[0])
    line_period = choose_period(dates, LINE_POINTS)
    lines = thin_frame(frame, "as_of", line_period, by=["tenor"])
    spans = _episode_spans(curve.episodes, curve.inversion_pair)
    title = f"{curve.name}: {curve.history_label} by tenor and date"
    with chart_style():
        fig = new_figure(WIDTH, 5.6)
        top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=[1.15, 1.0])
        cmap = colormaps["cividis"].copy()
        cmap.set_bad("#ebe8e2")
        finite = mat[np.isfinite(mat)]
        norm = Normalize(float(finite.min()), float(finite.max())) if finite.size else Normalize(0.0, 1.0)
        # each tenor is a strip placed at its maturity (log years), so 10Y to 30Y looks as far as it is
        y, edges = _maturity_rows(tenors)
        seam = 0.004 * (edges[-1] - edges[0])  # each strip runs under the next: no hairline gap between
        for j in range(len(tenors)):
            top.imshow(mat[j:j + 1], aspect="auto", interpolation="none", cmap=cmap, norm=norm, origin="lower",
                       extent=(x0, x1, edges[j], edges[j + 1] + (seam if j + 1 < len(tenors) else 0.0)))
        top.set_xlim(x0, x1)
        top.set_ylim(edges[0], edges[-1])
        top.grid(False)
        shown = _spaced(y, min_gap=0.055 * (edges[-1] - edges[0]))
        top.set_yticks(y[shown], [tenors[j] for j in shown])
        top.set_yticks(y, minor=True)
        top.tick_params(axis="y", which="minor", length=2)
        top.set_ylabel("Tenor (by maturity, log scale)")
        top.set_title(title)
        bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=top, pad=0.01, fraction=0.03)
        bar.set_label("Rate (%)")
        handles = []
        for colour, tenor in zip(TENOR_COLOURS, _line_tenors(tuple(tenors)), strict=False):
            part = lines[lines["tenor"] == tenor]
            (ln,) = bottom.plot(part["as_of"].to_numpy(), part["rate"].to_numpy() * 100.0, color=colour,
                                label=tenor, linewidth=1.0)
            handles.append(ln)
        if spans:
            bottom.broken_barh(spans, (0, 1), transform=bottom.get_xaxis_transform(), facecolor=SHADE,
                               alpha=0.22, linewidth=0)
            handles.append(Patch(facecolor=SHADE, alpha=0.22,
                                 label=f"{curve.inversion_pair[0]}\u2013{curve.inversion_pair[1]} inverted"))
        bottom.set_ylabel("Rate (%)")
        bottom.set_xlabel("As-of date")
        bottom.set_title(f"{curve.name}: selected tenors", fontsize=8.5)
        bottom.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0, 1.0), ncols=len(handles),
                      fontsize=7.5, borderaxespad=0.2)
        _date_axis(bottom, first, last)
        svg = figure_svg(fig, prefix, title)
    caption = (f"Upper panel: {_thinned_note(heat_period)}; each tenor's strip sits at its maturity on a log "
               "scale (every quoted tenor has a minor tick); grey cells: no curve. Lower panel: "
               f"{_thinned_note(line_period)}"
               + (f"; shaded: days the {curve.inversion_pair[0]} quote was above the {curve.inversion_pair[1]} "
                  "quote (inversion episodes)." if spans else "."))
    return Chart(svg, title, caption)


# ---- forwards against outcomes --------------------------------------------------------------------

def forwards_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """For each charted (start, tenor): the forward at its target date, the rate realised there, and
    the no-change forecast (the as-of spot rate of the same tenor), in %."""
    o = curve.outcomes
    if o.empty or not curve.pairs:
        return None
    pairs = [p for p in curve.pairs
             if ((o["start_months"] == p[0]) & (o["tenor_months"] == p[1])).any()]
    if not pairs:
        return None
    title = f"{curve.name}: forwards at their target date against the realised rate"
    target_all = _days(o["target_date"])
    first, last = target_all.min(), target_all.max()
    period = choose_period(np.unique(target_all), LINE_POINTS)
    with chart_style():
        fig = new_figure(WIDTH, 1.0 + 2.1 * len(pairs))
        axes = np.atleast_1d(fig.subplots(len(pairs), 1, sharex=True))
        for i, (ax, (s, t)) in enumerate(zip(axes, pairs, strict=True)):
            part = o[(o["start_months"] == s) & (o["tenor_months"] == t)]
            part = part.assign(target_date=_days(part["target_date"]))
            part = thin_frame(part, "target_date", period)
            x = part["target_date"].to_numpy()
            ax.plot(x, part["realized_rate"].to_numpy() * 100.0, color=REALISED, linewidth=1.0,
                    label="realised rate")
            ax.plot(x, part["forward_rate"].to_numpy() * 100.0, color=FORWARD, linewidth=1.0,
                    label="forward (made at as-of date)")
            ax.plot(x, part["spot_rate"].to_numpy() * 100.0, color=NO_CHANGE, linewidth=1.0, linestyle=(0, (4, 2)),
                    label="no-change forecast (as-of spot)")
            ax.set_title(f"{months_label(t)} rate, {months_label(s)} ahead", fontsize=8.5)
            ax.set_ylabel("Rate (%)")
            if i == 0:
                ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.12), ncols=3)
        axes[-1].set_xlabel("Target date")
        _date_axis(axes[-1], first, last)
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = (f"Each forward is drawn at its target date, against the {curve.history_label} realised on that "
               f"date and the rate of the same tenor on the day the forward was made; {_thinned_note(period)} "
               "by target date.")
    return Chart(svg, title, caption)


# ---- forecast error by horizon ------------------------------------------------------------------

def _all_regime(summary: pd.DataFrame) -> pd.DataFrame:
    if summary.empty:
        return summary
    s = summary[summary["regime"] == "all"] if "regime" in summary else summary
    return s.sort_values(["tenor_months", "start_months"]).reset_index(drop=True)


def _half(part: pd.DataFrame, mean: np.ndarray) -> np.ndarray:
    """Error-bar half-widths of summary rows: the overlap-aware 95 % interval (fixed-b critical
    value of the row's n and lags), 0 (no bar) where it is undefined."""
    if not {"hac_se_bp", "n", "lags"} <= set(part.columns):
        return np.zeros(mean.shape)
    half = interval_half_width(part["hac_se_bp"].to_numpy(dtype=float), part["n"].to_numpy(dtype=float),
                               part["lags"].to_numpy(dtype=float))
    return np.where(np.isfinite(half), half, 0.0)


def error_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """Mean error (forward minus realised, bp) by forward start, one series per tenor, with the HAC
    95 % interval ``mean +/- c * hac_se_bp``, ``c`` the overlap-aware fixed-b critical value of the
    row's n and lags (:func:`pipeline.audit.interval_half_width`; no bar where it is undefined)."""
    s = _all_regime(curve.summary)
    s = s[s["start_months"] > 0] if not s.empty else s
    if s.empty:
        return None
    starts = sorted(s["start_months"].unique())
    tenors = sorted(s["tenor_months"].unique())
    pos = {st: i for i, st in enumerate(starts)}
    width = 0.7 / max(len(tenors), 1)
    title = f"{curve.name}: mean forecast error by horizon, with HAC 95 % interval"
    with chart_style():
        fig = new_figure(WIDTH, 3.6)
        ax = fig.add_subplot()
        ax.axhline(0.0, color=MUTED, linewidth=0.8)
        for j, (colour, t) in enumerate(zip(TENOR_COLOURS, tenors, strict=False)):
            part = s[s["tenor_months"] == t]
            x = np.array([pos[v] for v in part["start_months"]]) + (j - (len(tenors) - 1) / 2) * width
            mean = part["mean_error_bp"].to_numpy(dtype=float)
            half = _half(part, mean)
            ax.errorbar(x, mean, yerr=half, fmt="o", color=colour, markersize=4, capsize=2.5, elinewidth=1.0,
                        label=f"{months_label(t)} forward")
        ax.set_xticks(range(len(starts)), [months_label(v) for v in starts])
        ax.set_xlabel("Forward start (how far ahead the forward begins)")
        ax.set_ylabel("Mean error, forward \u2212 realised (bp)")
        ax.set_title(title)
        ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), title="Tenor")
        svg = figure_svg(fig, prefix, title)
    caption = ("Points: mean of forward minus realised rate over all outcomes of that horizon; bars: 95 % "
               "intervals from the Newey-West standard error (lags for the overlap of the forecasts) and the "
               "overlap-aware fixed-b critical value, 1.96 without overlap and wider as the forecasts overlap "
               "more (none where the sample holds too few periods). Above zero: the forwards were higher than "
               "what happened.")
    return Chart(svg, title, caption)


def rmse_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """Root-mean-square error of the forwards against the no-change forecast, by start, a panel per tenor."""
    s = _all_regime(curve.summary)
    s = s[s["start_months"] > 0] if not s.empty else s
    if s.empty:
        return None
    tenors = sorted(s["tenor_months"].unique())
    starts = sorted(s["start_months"].unique())
    pos = {st: i for i, st in enumerate(starts)}
    title = f"{curve.name}: RMSE of the forwards and of the no-change forecast"
    with chart_style():
        fig = new_figure(WIDTH, 3.0)
        axes = np.atleast_1d(fig.subplots(1, len(tenors), sharey=True))
        for i, (ax, t) in enumerate(zip(axes, tenors, strict=True)):
            part = s[s["tenor_months"] == t]
            x = np.array([pos[v] for v in part["start_months"]])
            ax.plot(x, part["rmse_bp"].to_numpy(dtype=float), marker="o", markersize=3.5, color=FORWARD,
                    label="forward")
            ax.plot(x, part["rw_rmse_bp"].to_numpy(dtype=float), marker="s", markersize=3.2, color=NO_CHANGE,
                    linestyle=(0, (4, 2)), label="no-change")
            ax.set_xticks(range(len(starts)), [months_label(v) for v in starts], fontsize=7)
            ax.set_title(f"{months_label(t)} tenor", fontsize=8.5)
            ax.set_xlabel("Forward start")
            if i == 0:
                ax.set_ylabel("RMSE (bp)")
        axes[-1].legend(loc="upper left", bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = ("Lower is better. Where the forward line lies above the no-change line, simply assuming that "
               "rates stay where they are would have forecast better.")
    return Chart(svg, title, caption)


# ---- term premium ---------------------------------------------------------------------------------

def premium_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """The trailing-window ex-post term premium (mean error, bp) with its HAC 95 % band, one panel per
    start, for the tenor ``curve.premium_tenor``."""
    p = curve.premium
    if p.empty:
        return None
    p = p[p["start_months"] > 0]
    if p.empty:
        return None
    starts = sorted(p["start_months"].unique())
    cols = min(3, len(starts))
    rows = int(np.ceil(len(starts) / cols))
    as_of = _days(p["as_of"])
    first, last = as_of.min(), as_of.max()
    period = choose_period(np.unique(as_of), PANEL_POINTS)
    tenor = months_label(curve.premium_tenor) if curve.premium_tenor else "chosen"
    title = (f"{curve.name}: trailing {curve.premium_window_days}-day term premium of the {tenor} forward, "
             "with HAC 95 % band")
    with chart_style():
        fig = new_figure(WIDTH, 0.7 + 2.0 * rows)
        axes = np.atleast_1d(fig.subplots(rows, cols, sharex=True, squeeze=False)).ravel()
        for i, ax in enumerate(axes):
            if i >= len(starts):
                ax.set_visible(False)
                continue
            st = starts[i]
            part = p[p["start_months"] == st].assign(as_of=lambda f: _days(f["as_of"]))
            part = thin_frame(part, "as_of", period)
            x = part["as_of"].to_numpy()
            ax.axhline(0.0, color=MUTED, linewidth=0.7)
            lower, upper = part["lower_bp"].to_numpy(dtype=float), part["upper_bp"].to_numpy(dtype=float)
            band = ax.fill_between(x, lower, upper, color=OKABE_ITO["sky"], alpha=0.35, linewidth=0,
                                   label="95 % band (HAC, fixed-b)")
            if not np.isfinite(upper).any():  # say why there is no band rather than leave it out silently
                ax.text(0.02, 0.04, "no 95 % band: the window holds about\none forecast period or less",
                        transform=ax.transAxes, fontsize=6.5, color=MUTED, va="bottom")
            (ln,) = ax.plot(x, part["premium_bp"].to_numpy(dtype=float), color=OKABE_ITO["blue"], linewidth=1.0,
                            label="premium")
            ax.set_title(f"{months_label(st)} ahead", fontsize=8.5)
            if i % cols == 0:
                ax.set_ylabel("Premium (bp)")
            if i >= len(starts) - cols:
                ax.set_xlabel("As-of date (end of window)")
            _date_axis(ax, first, last, WIDTH / cols - 0.5)
            ax.tick_params(axis="x", labelbottom=True)
            if i == 0:
                handles = [ln, band]
        fig.legend(handles=handles, loc="upper right", ncols=2, bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = (f"Each point is the mean of forward minus realised rate over the {curve.premium_window_days} "
               f"observation days ending at that date; {_thinned_note(period)}. A band clear of zero marks a "
               "premium distinguishable from no premium at 5 %; its width uses the overlap-aware fixed-b "
               "critical value of the window, and there is no band where the window holds about one forecast "
               "period or less (the overlap above 0.9 of the window).")
    return Chart(svg, title, caption)


def model_premium_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """The model's real-time term premium (bp) at the maturities held in ``curve.model_premium``, at
    month ends, over time: the ex-ante premium beside the ex-post record of :func:`premium_chart`."""
    m = curve.model_premium
    if m is None or m.empty:
        return None
    as_of = _days(m["as_of"])
    first, last = as_of.min(), as_of.max()
    title = f"{curve.name}: model term premium (real-time estimate, month ends)"
    with chart_style():
        fig = new_figure(WIDTH, 2.8)
        ax = fig.subplots()
        ax.axhline(0.0, color=MUTED, linewidth=0.7)
        for k, n in enumerate(sorted(m["maturity_months"].unique())):
            part = m[m["maturity_months"] == n]
            ax.plot(_days(part["as_of"]), part["term_premium"].to_numpy(dtype=float) * 1e4,
                    color=TENOR_COLOURS[k % len(TENOR_COLOURS)], linewidth=1.0, label=f"{months_label(n)} yield")
        ax.set_ylabel("Term premium (bp)")
        ax.set_xlabel("Month end")
        _date_axis(ax, first, last)
        ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = ("The model's yield minus its risk-neutral yield (continuous, bp), each month end estimated with "
               "data up to that month end only. It is a model's split of the yield, not an observed quantity; "
               "the ex-post premium above is what the forwards actually missed by.")
    return Chart(svg, title, caption)


def contender_rmse_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """RMSE (bp) of every contender by forward start, one panel per tenor, on each cell's common sample."""
    s = curve.contender_scores
    if s is None or s.empty:
        return None
    s = s[s["start_months"] > 0]
    if s.empty:
        return None
    tenors = sorted(s["tenor_months"].unique())
    starts = sorted(s["start_months"].unique())
    names = list(dict.fromkeys(s["contender"]))
    pos = {st: i for i, st in enumerate(starts)}
    markers = ("o", "s", "^", "D", "v", "P", "X")
    title = f"{curve.name}: RMSE of each contender by horizon"
    with chart_style():
        fig = new_figure(WIDTH, 3.0)
        axes = np.atleast_1d(fig.subplots(1, len(tenors), sharey=True))
        for i, (ax, t) in enumerate(zip(axes, tenors, strict=True)):
            for k, name in enumerate(names):
                part = s[(s["tenor_months"] == t) & (s["contender"] == name)].sort_values("start_months")
                if part.empty:
                    continue
                ax.plot([pos[v] for v in part["start_months"]], part["rmse_bp"].to_numpy(dtype=float),
                        marker=markers[k % len(markers)], markersize=3.2, linewidth=1.0,
                        color=TENOR_COLOURS[k % len(TENOR_COLOURS)], label=name)
            ax.set_xticks(range(len(starts)), [months_label(v) for v in starts], fontsize=7)
            ax.set_title(f"{months_label(t)} tenor", fontsize=8.5)
            ax.set_xlabel("Forward start")
            if i == 0:
                ax.set_ylabel("RMSE (bp)")
        handles, labels = axes[0].get_legend_handles_labels()
        axes[-1].legend(handles, labels, loc="upper left", bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = ("Lower is better. Each cell's contenders are scored on the as-of days all of them have an "
               "outcome, so the points of one horizon compare like with like.")
    return Chart(svg, title, caption)


# ---- charts reviewers look for --------------------------------------------------------------------

REGIME_STYLE = {"normal": (OKABE_ITO["blue"], "o"), "inverted": (OKABE_ITO["vermillion"], "s"),
                "all": (OKABE_ITO["black"], "D")}


def _shade(ax, spans: list[tuple[float, float]]) -> None:  # noqa: ANN001
    if spans:
        ax.broken_barh(spans, (0, 1), transform=ax.get_xaxis_transform(), facecolor=SHADE, alpha=0.22, linewidth=0)


def spreads_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """The spread (long minus short, bp) of every configured inversion pair over time, one panel per
    pair, each with its own inversion episodes shaded."""
    sp = curve.spreads
    if sp is None or sp.empty:
        return None
    pairs = [p for p in (curve.all_pairs or tuple(dict.fromkeys(zip(sp["short_tenor"], sp["long_tenor"],
                                                                     strict=True))))
             if ((sp["short_tenor"] == p[0]) & (sp["long_tenor"] == p[1])).any()]
    if not pairs:
        return None
    days = _days(sp["as_of"])
    first, last = days.min(), days.max()
    period = choose_period(np.unique(days), LINE_POINTS)
    title = f"{curve.name}: the spread of each inversion pair"
    with chart_style():
        fig = new_figure(WIDTH, 0.9 + 1.8 * len(pairs))
        axes = np.atleast_1d(fig.subplots(len(pairs), 1, sharex=True, squeeze=False)).ravel()
        for ax, (short, long) in zip(axes, pairs, strict=True):
            part = sp[(sp["short_tenor"] == short) & (sp["long_tenor"] == long)]
            part = thin_frame(part.assign(as_of=_days(part["as_of"])), "as_of", period)
            _shade(ax, _episode_spans(curve.episodes, (short, long)))
            ax.axhline(0.0, color=MUTED, linewidth=0.7)
            ax.plot(part["as_of"].to_numpy(), part["spread_bp"].to_numpy(dtype=float), color=OKABE_ITO["blue"],
                    linewidth=0.9)
            ax.set_title(f"{long} minus {short}", fontsize=8.5)
            ax.set_ylabel("Spread (bp)")
        axes[-1].set_xlabel("As-of date")
        _date_axis(axes[-1], first, last)
        fig.legend(handles=[Patch(facecolor=SHADE, alpha=0.22, label="inverted (episode)")], loc="upper right",
                   bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = (f"Long minus short quote, as the inversion check compares them; {_thinned_note(period)}. Shaded: "
               "that pair's inversion episodes (runs of days with the short quote above the long one).")
    return Chart(svg, title, caption)


def error_time_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """The forecast error (forward minus realised, bp) of the ``curve.premium_tenor`` forwards by as-of
    date, one panel per start, with the inversion episodes of ``curve.inversion_pair`` shaded."""
    e = curve.errors
    if e is None or e.empty:
        return None
    e = e[e["start_months"] > 0]
    if e.empty:
        return None
    starts = sorted(e["start_months"].unique())
    cols = min(3, len(starts))
    rows = int(np.ceil(len(starts) / cols))
    as_of = _days(e["as_of"])
    first, last = as_of.min(), as_of.max()
    period = choose_period(np.unique(as_of), PANEL_POINTS)
    spans = _episode_spans(curve.episodes, curve.inversion_pair)
    tenor = months_label(curve.premium_tenor) if curve.premium_tenor else months_label(e["tenor_months"].iloc[0])
    title = f"{curve.name}: forecast error of the {tenor} forward over time, by start"
    with chart_style():
        fig = new_figure(WIDTH, 0.7 + 2.0 * rows)
        axes = np.atleast_1d(fig.subplots(rows, cols, sharex=True, sharey=True, squeeze=False)).ravel()
        for i, ax in enumerate(axes):
            if i >= len(starts):
                ax.set_visible(False)
                continue
            st = starts[i]
            part = e[e["start_months"] == st].assign(as_of=lambda f: _days(f["as_of"]))
            part = thin_frame(part, "as_of", period)
            _shade(ax, spans)
            ax.axhline(0.0, color=MUTED, linewidth=0.7)
            ax.plot(part["as_of"].to_numpy(), part["error_bp"].to_numpy(dtype=float), color=FORWARD, linewidth=0.9)
            ax.set_title(f"{months_label(st)} ahead", fontsize=8.5)
            if i % cols == 0:
                ax.set_ylabel("Error (bp)")
            if i >= len(starts) - cols:
                ax.set_xlabel("As-of date")
            _date_axis(ax, first, last, WIDTH / cols - 0.5)
            ax.tick_params(axis="x", labelbottom=True)
        handles = [Line2D([], [], color=FORWARD, linewidth=0.9, label="forward \u2212 realised")]
        if spans:
            handles.append(Patch(facecolor=SHADE, alpha=0.22,
                                 label=f"{curve.inversion_pair[0]}\u2013{curve.inversion_pair[1]} inverted"))
        fig.legend(handles=handles, loc="upper right", ncols=2, bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = (f"Each line is the error of the forward made on that as-of date, once its target date came; "
               f"{_thinned_note(period)}. Above zero: the forward was higher than what happened. Shaded: the "
               "curve's inversion episodes on the as-of date. Panels share the vertical scale.")
    return Chart(svg, title, caption)


def premium_regime_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """The mean error (the ex-post premium, bp) by start for normal and inverted curves on the as-of
    date (and all days), with the HAC 95 % interval, one panel per tenor."""
    s = curve.summary
    if s is None or s.empty or "regime" not in s:
        return None
    s = s[(s["start_months"] > 0) & s["regime"].isin(list(REGIME_STYLE))]
    if not (s["regime"] != "all").any():
        return None
    tenors = sorted(s["tenor_months"].unique())
    starts = sorted(s["start_months"].unique())
    pos = {st: i for i, st in enumerate(starts)}
    regimes = [r for r in ("normal", "inverted", "all") if (s["regime"] == r).any()]
    width = 0.6 / max(len(regimes), 1)
    title = f"{curve.name}: term premium (mean error) by regime and horizon, with HAC 95 % interval"
    with chart_style():
        fig = new_figure(WIDTH, 3.1)
        axes = np.atleast_1d(fig.subplots(1, len(tenors), sharey=True))
        for i, (ax, t) in enumerate(zip(axes, tenors, strict=True)):
            ax.axhline(0.0, color=MUTED, linewidth=0.7)
            for j, regime in enumerate(regimes):
                part = s[(s["tenor_months"] == t) & (s["regime"] == regime)].sort_values("start_months")
                if part.empty:
                    continue
                colour, marker = REGIME_STYLE[regime]
                x = np.array([pos[v] for v in part["start_months"]]) + (j - (len(regimes) - 1) / 2) * width
                mean = part["mean_error_bp"].to_numpy(dtype=float)
                ax.errorbar(x, mean, yerr=_half(part, mean), fmt=marker, color=colour,
                            markersize=3.2, capsize=2, elinewidth=0.9,
                            label={"all": "all days"}.get(regime, f"{regime} curve"))
            ax.set_xticks(range(len(starts)), [months_label(v) for v in starts], fontsize=7)
            ax.set_title(f"{months_label(t)} tenor", fontsize=8.5)
            ax.set_xlabel("Forward start")
            if i == 0:
                ax.set_ylabel("Mean error (bp)")
        handles, labels = axes[0].get_legend_handles_labels()
        axes[-1].legend(handles, labels, loc="upper left", bbox_to_anchor=(1.0, 1.0), title="On the as-of date")
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = ("Mean of forward minus realised rate over the outcomes of each regime (the curve inverted or "
               "normal at the first inversion pair on the day the forward was made); bars: 95 % intervals from the "
               "Newey-West standard error and the overlap-aware fixed-b critical value (1.96 without overlap, "
               "wider as the forecasts overlap more; none where the sample holds too few periods). Inverted "
               "periods are short: their intervals are wide and rest on few independent outcomes.")
    return Chart(svg, title, caption)
