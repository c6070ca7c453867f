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
from matplotlib.colors import LogNorm
from matplotlib.patches import Patch

from pipeline.report.fmt import months_label
from pipeline.report.model import CurveReport
from pipeline.report.series import choose_period, period_keys, period_start, thin_frame
from pipeline.report.svg import INK, MUTED, OKABE_ITO, RULE, chart_style, figure_svg, new_figure
from pipeline.tenors import parse_tenor

__all__ = [
    "Chart",
    "contender_rmse_chart",
    "error_chart",
    "findings_chart",
    "forwards_chart",
    "history_chart",
    "model_premium_chart",
    "premium_chart",
    "rmse_chart",
]

WIDTH = 9.6  # inches; 72 pt each, scaled to the page width by the browser
LINE_POINTS = 1600  # a long line: one point per week for up to ~30 years
PANEL_POINTS = 500  # a small panel: one point per month for up to ~40 years
HEAT_COLUMNS = 1600
TENOR_COLOURS = [OKABE_ITO[k] for k in ("blue", "vermillion", "green", "purple", "orange", "sky", "black")]
FORWARD, REALISED, NO_CHANGE = OKABE_ITO["vermillion"], OKABE_ITO["black"], OKABE_ITO["sky"]
SHADE = OKABE_ITO["purple"]
PERIOD_WORD = {"day": "day", "week": "week", "month": "month", "quarter": "quarter", "year": "year"}


@dataclass(frozen=True)
class Chart:
    """A drawn chart: the ``<svg>`` element, its title (accessible name) and a caption for people."""

    svg: str
    title: str
    caption: str


def _days(values: object) -> np.ndarray:
    return np.asarray(pd.to_datetime(pd.Series(values)).to_numpy().astype("datetime64[D]"))


def _date_axis(ax, first: np.datetime64, last: np.datetime64) -> None:  # noqa: ANN001
    """Year ticks for long spans, ISO months for shorter ones, ISO days for a few weeks."""
    span = (last - first).astype("timedelta64[D]").astype(int)
    if span > 3 * 365:
        years = max(span / 365.25, 1.0)
        base = next(b for b in (1, 2, 5, 10, 20, 50) if years / b <= 12)
        ax.xaxis.set_major_locator(mdates.YearLocator(base))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y"))
    elif span > 62:
        months = max(span / 30.4, 1.0)
        step = next(s for s in (1, 2, 3, 6, 12) if months / s <= 10)
        ax.xaxis.set_major_locator(mdates.MonthLocator(interval=step))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y-%m"))
    else:
        ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=3, maxticks=8))
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
    title = f"Open findings by check and {period}"
    with chart_style():
        fig = new_figure(WIDTH, 1.25 + 0.27 * n_rows)
        ax = fig.add_subplot()
        cmap = colormaps["cividis_r"].copy()
        cmap.set_bad("#ffffff")
        masked = np.ma.masked_less(counts, 0.5)
        vmax = max(float(counts.max()), 10.0)  # at least a decade, so the log scale has readable ticks
        image = ax.imshow(masked, aspect="auto", interpolation="none", cmap=cmap, norm=LogNorm(1, vmax),
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
        if n_cols <= 40:
            norm = image.norm
            for r, c in zip(*np.nonzero(counts), strict=True):
                shade = norm(counts[r, c])
                ax.text(c, r, f"{int(counts[r, c]):,}", ha="center", va="center", fontsize=6.5,
                        color="#ffffff" if shade > 0.55 else INK)
        bar = fig.colorbar(image, ax=ax, pad=0.01, fraction=0.03)
        bar.set_label(f"Findings per {period} (log scale)")
        svg = figure_svg(fig, prefix, title)
    caption = (f"Each cell counts the open findings of one check on as-of dates in that {period}; "
               "a blank cell has none. Severity in brackets.")
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


def history_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """A heatmap of the curve (tenor x date, colour = rate in %) over a few tenors as lines, with the
    inversion episodes of ``curve.inversion_pair`` shaded in the lower panel."""
    h = curve.history
    if h.empty:
        return None
    tenors = [t for t in curve.tenors if t in set(h["tenor"].astype(str))] or sorted(set(h["tenor"].astype(str)))
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
        image = top.imshow(mat, aspect="auto", interpolation="none", cmap=cmap, origin="lower",
                           extent=(x0, x1, -0.5, len(tenors) - 0.5))
        top.grid(False)
        top.set_yticks(range(len(tenors)), tenors)
        top.set_ylabel("Tenor")
        top.set_title(title)
        bar = fig.colorbar(image, ax=top, pad=0.01, fraction=0.03)
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
    caption = (f"Upper panel: {_thinned_note(heat_period)}; grey cells: no curve. Lower panel: "
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


def error_chart(curve: CurveReport, prefix: str) -> Chart | None:
    """Mean error (forward minus realised, bp) by forward start, one series per tenor, with the HAC
    95 % interval ``mean +/- 1.96 * hac_se_bp`` (no bar where the HAC figure is undefined)."""
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
            se = part["hac_se_bp"].to_numpy(dtype=float) if "hac_se_bp" in part else np.full(mean.shape, np.nan)
            half = np.where(np.isfinite(se), 1.96 * se, 0.0)
            ax.errorbar(x, mean, yerr=half, fmt="o", color=colour, markersize=4, capsize=2.5, elinewidth=1.0,
                        label=f"{months_label(t)} forward")
        ax.set_xticks(range(len(starts)), [months_label(v) for v in starts])
        ax.set_xlabel("Forward start (how far ahead the forward begins)")
        ax.set_ylabel("Mean error, forward \u2212 realised (bp)")
        ax.set_title(title)
        ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), title="Tenor")
        svg = figure_svg(fig, prefix, title)
    caption = ("Points: mean of forward minus realised rate over all outcomes of that horizon; bars: mean "
               "\u00b1 1.96 Newey-West standard errors (lags for the overlap of the forecasts). Above zero: "
               "the forwards were higher than what happened.")
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
            band = ax.fill_between(x, part["lower_bp"].to_numpy(dtype=float), part["upper_bp"].to_numpy(dtype=float),
                                   color=OKABE_ITO["sky"], alpha=0.35, linewidth=0, label="95 % band (HAC)")
            (ln,) = ax.plot(x, part["premium_bp"].to_numpy(dtype=float), color=OKABE_ITO["blue"], linewidth=1.0,
                            label="premium")
            ax.set_title(f"{months_label(st)} ahead", fontsize=8.5)
            if i % cols == 0:
                ax.set_ylabel("Premium (bp)")
            if i >= len(starts) - cols:
                ax.set_xlabel("As-of date (end of window)")
            _date_axis(ax, first, last)
            ax.tick_params(axis="x", labelbottom=True)
            if i == 0:
                handles = [ln, band]
        fig.legend(handles=handles, loc="upper right", ncols=2, bbox_to_anchor=(1.0, 1.0))
        fig.suptitle(title, x=0.01, ha="left", color=INK)
        svg = figure_svg(fig, prefix, title)
    caption = (f"Each point is the mean of forward minus realised rate over the {curve.premium_window_days} "
               f"observation days ending at that date; {_thinned_note(period)}. A band clear of zero marks a "
               "premium distinguishable from no premium at 5 %.")
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
