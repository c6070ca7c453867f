"""The report renderer on small hand-made frames: formatting, thinning, SVG clean-up, the page.

References: plain pandas (period grouping for the thinning), hashlib (the input fingerprint), the
standard library's HTML and XML parsers (well-formed markup), and figures written out by hand.
"""

from __future__ import annotations

import base64
import hashlib
import html
import io
import re
import xml.etree.ElementTree as ET
from datetime import UTC, date, datetime
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from pipeline.audit.fixed_b import critical_value
from pipeline.report import SECTIONS, CurveReport, ReportData, charts, choose_pairs, input_fingerprint, render_report
from pipeline.report.fmt import (
    MISSING,
    fmt_bp,
    fmt_count,
    fmt_date,
    fmt_pct,
    fmt_pvalue,
    fmt_timestamp,
    months_label,
)
from pipeline.report.series import choose_period, period_keys, period_start, thin_frame, thin_index
from pipeline.report.svg import chart_style, figure_svg, new_figure

NOW = datetime(2031, 7, 1, 9, 30, 0, tzinfo=UTC)


# ---- formatting -----------------------------------------------------------------------------------

@pytest.mark.parametrize(("value", "kwargs", "expected"), [
    (18.436245, {}, "18.4"),
    (18.436245, {"signed": True}, "+18.4"),
    (-7.25, {"signed": True}, "-7.2"),          # -7.25 is stored as -7.2499999...: rounds to -7.2
    (-0.04, {"signed": True}, "0.0"),           # no "-0.0"
    (1234.56, {}, "1,234.6"),
    (3.0, {"unit": True}, "3.0 bp"),
    (float("nan"), {}, MISSING),
    (None, {"unit": True}, MISSING),
], ids=["plain", "signed", "negative", "negative-zero", "thousands", "unit", "nan", "none"])
def test_fmt_bp(value: object, kwargs: dict, expected: str) -> None:
    assert fmt_bp(value, **kwargs) == expected


@pytest.mark.parametrize(("func", "value", "expected"), [
    (fmt_pct, 0.0525, "5.25 %"),
    (fmt_pct, -0.001, "-0.10 %"),
    (fmt_pvalue, 0.0004, "< 0.001"),
    (fmt_pvalue, 0.71234, "0.712"),
    (fmt_count, 7737, "7,737"),
    (fmt_count, pd.NA, MISSING),
    (fmt_date, np.datetime64("2032-02-29"), "2032-02-29"),
    (fmt_date, pd.Timestamp("2031-01-31 17:45"), "2031-01-31"),
    (fmt_date, date(2031, 12, 24), "2031-12-24"),
    (fmt_date, pd.NaT, MISSING),
    (fmt_timestamp, datetime(2031, 1, 2, 3, 4, 5, tzinfo=UTC), "2031-01-02 03:04:05 UTC"),
    (fmt_timestamp, pd.Timestamp("2031-01-02 03:04:05"), "2031-01-02 03:04:05"),
    (months_label, 0, "0M"),
    (months_label, 6, "6M"),
    (months_label, 18, "18M"),
    (months_label, 24, "2Y"),
], ids=["pct", "pct-negative", "p-tiny", "p", "count", "count-missing", "date-np", "date-ts", "date-py", "date-nat",
        "ts-utc", "ts-naive", "m0", "m6", "m18", "m24"])
def test_formatters(func, value: object, expected: str) -> None:  # noqa: ANN001
    assert func(value) == expected


# ---- thinning ------------------------------------------------------------------------------------

def _business_days(first: str, last: str) -> np.ndarray:
    return pd.bdate_range(first, last).to_numpy().astype("datetime64[D]")


@pytest.mark.parametrize(("period", "pandas_freq"), [("week", "W-SUN"), ("month", "M"), ("quarter", "Q"),
                                                      ("year", "Y")], ids=["week", "month", "quarter", "year"])
def test_thin_index_keeps_the_last_day_of_each_period_like_pandas(period: str, pandas_freq: str) -> None:
    rng = np.random.default_rng(7)
    days = np.sort(rng.choice(_business_days("2030-01-01", "2034-12-31"), size=700, replace=False))
    # reference: pandas periods (weeks ending Sunday = weeks starting Monday), last row of each
    idx = pd.DatetimeIndex(days)
    expected = pd.Series(np.arange(days.size)).groupby(idx.to_period(pandas_freq)).tail(1).to_numpy()
    assert np.array_equal(thin_index(days, period), expected)
    starts = period_start(period_keys(days, period), period)
    assert np.array_equal(starts, idx.to_period(pandas_freq).start_time.to_numpy().astype("datetime64[D]"))


def test_thin_frame_by_group_matches_pandas() -> None:
    days = _business_days("2030-01-01", "2030-12-31")
    frame = pd.DataFrame({"as_of": np.tile(days, 2), "tenor": np.repeat(["3M", "10Y"], days.size),
                          "rate": np.arange(2 * days.size, dtype=float)})
    shuffled = frame.sample(frac=1.0, random_state=3)
    got = thin_frame(shuffled, "as_of", "month", by=["tenor"])
    ref = (frame.assign(m=pd.DatetimeIndex(frame["as_of"]).to_period("M"))
           .sort_values(["tenor", "as_of"]).groupby(["tenor", "m"]).tail(1).drop(columns="m").reset_index(drop=True))
    pd.testing.assert_frame_equal(got, ref)
    assert len(shuffled) == 2 * days.size  # the input is left as it was


@pytest.mark.parametrize(("years", "max_points", "expected"), [(1, 1600, "day"), (30, 1600, "week"),
                                                               (30, 400, "month"), (30, 150, "quarter")],
                         ids=["1y-daily", "30y-weekly", "30y-monthly", "30y-quarterly"])
def test_choose_period(years: int, max_points: int, expected: str) -> None:
    days = _business_days("2000-01-01", f"{2000 + years - 1}-12-31")
    assert choose_period(days, max_points) == expected


@pytest.mark.parametrize(("starts", "tenors", "expected"), [
    ([0, 3, 6, 12, 24, 36, 60], [3, 12, 24, 60], ((6, 12), (24, 12), (60, 12))),
    ([0, 3, 12], [3, 12], ((3, 12), (12, 12))),
    ([0, 3], [3, 6], ((3, 6),)),           # 6M is the tenor closest to a year
    ([0], [3, 12], ()),
    ([6, 12], [], ()),
], ids=["demo", "short-config", "one-start", "only-spot", "no-tenors"])
def test_choose_pairs(starts: list[int], tenors: list[int], expected: tuple) -> None:
    assert choose_pairs(starts, tenors) == expected


def test_input_fingerprint_is_order_free_sha256_of_the_digests() -> None:
    digests = [hashlib.sha256(b).hexdigest() for b in (b"one", b"two", b"three")]
    expected = hashlib.sha256("\n".join(sorted(digests)).encode()).hexdigest()
    assert input_fingerprint(digests) == expected
    assert input_fingerprint(reversed(digests)) == expected


# ---- SVG fragments --------------------------------------------------------------------------------

def _tiny_svg(prefix: str) -> str:
    with chart_style():
        fig = new_figure(4, 2)
        ax = fig.add_subplot()
        ax.plot([0, 1, 2], [1, 3, 2], label="a line")
        ax.imshow(np.arange(6.0).reshape(2, 3), extent=(0, 2, 0, 1), aspect="auto", interpolation="none")
        ax.set_title("Tiny <chart> & co")
        ax.legend()
        return figure_svg(fig, prefix, "Tiny <chart> & co")


def test_figure_svg_is_an_inline_fragment_with_its_own_ids() -> None:
    a, b = _tiny_svg("ca"), _tiny_svg("cb")
    for svg, prefix in ((a, "ca"), (b, "cb")):
        assert svg.startswith("<svg") and svg.endswith("</svg>")
        for bad in ("<?xml", "<!DOCTYPE", "http://", "https://", "<metadata", "<script", "xmlns"):
            assert bad not in svg
        ids = re.findall(r'\bid="([^"]+)"', svg)
        assert ids and all(i.startswith(prefix + "-") for i in ids)
        refs = re.findall(r'url\(#([^)]+)\)', svg) + re.findall(r'href="#([^"]+)"', svg)
        assert refs and set(refs) <= set(ids)  # every reference points inside the same chart
        assert 'aria-label="Tiny &lt;chart&gt; &amp; co"' in svg
        assert 'width="100%"' in svg and "viewBox=" in svg
        # well-formed XML once the namespaces the HTML parser supplies are declared (standard library parser)
        ET.fromstring(svg.replace("<svg", '<svg xmlns="http://www.w3.org/2000/svg" '
                                  'xmlns:xlink="http://www.w3.org/1999/xlink"', 1))
    assert not set(re.findall(r'\bid="([^"]+)"', a)) & set(re.findall(r'\bid="([^"]+)"', b))
    assert _tiny_svg("ca") == a  # the same figure draws the same bytes


# ---- the page -------------------------------------------------------------------------------------

class _Page(HTMLParser):
    """Collects h2 texts, figures, and checks that every non-void element is closed in order."""

    VOID = {"meta", "br", "img", "hr", "input", "link", "wbr", "col", "area", "base", "source"}

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.h2: list[str] = []
        self.figures: list[str] = []
        self._in_h2 = False

    def handle_starttag(self, tag: str, attrs: list) -> None:
        a = dict(attrs)
        if tag == "figure":
            self.figures.append(a.get("id", ""))
        if tag == "h2":
            self._in_h2 = True
            self.h2.append("")
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag: str, attrs: list) -> None:
        pass

    def handle_endtag(self, tag: str) -> None:
        if tag == "h2":
            self._in_h2 = False
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
            return
        self.stack.pop()

    def handle_data(self, data: str) -> None:
        if self._in_h2:
            self.h2[-1] += data


def _parse(page: str) -> _Page:
    p = _Page()
    p.feed(page)
    p.close()
    return p


def _curve(name: str = "alpha", days: int = 520) -> CurveReport:
    d = _business_days("2030-01-01", "2035-12-31")[:days]
    tenors = ("3M", "2Y", "10Y")
    rates = {"3M": 0.03 + 0.01 * np.sin(np.arange(d.size) / 60), "2Y": np.full(d.size, 0.035),
             "10Y": 0.04 - 0.015 * (np.arange(d.size) > 200) * (np.arange(d.size) < 260)}
    history = pd.DataFrame({"as_of": np.tile(d, 3), "tenor": np.repeat(tenors, d.size),
                            "rate": np.concatenate([rates[t] for t in tenors])})
    episodes = pd.DataFrame({"short_tenor": ["3M"], "long_tenor": ["10Y"], "first_day": [d[201]], "last_day": [d[259]],
                             "days": [59], "deepest_bp": [-120.04]})
    pairs = ((6, 12), (24, 12))
    rows = []
    for s, _ in pairs:
        k = s * 21
        target = d[k:]
        n = target.size
        rows.append(pd.DataFrame({"start_months": s, "tenor_months": 12, "as_of": d[:n], "target_date": target,
                                  "forward_rate": 0.035 + 0.0001 * s, "realized_rate": rates["3M"][k:],
                                  "spot_rate": rates["3M"][:n]}))
    outcomes = pd.concat(rows, ignore_index=True)
    outcomes["error_bp"] = (outcomes["forward_rate"] - outcomes["realized_rate"]) * 1e4
    outcomes["rw_error_bp"] = (outcomes["spot_rate"] - outcomes["realized_rate"]) * 1e4
    summary = pd.DataFrame({
        "curve": name, "start_months": [0, 6, 24, 6], "tenor_months": [12, 12, 12, 12],
        "regime": ["all", "all", "all", "inverted"], "n": [520, 394, 16, 40],
        "first_as_of": d[0], "last_as_of": d[-1],
        "mean_error_bp": [0.0, 18.436245, -42.75, 5.0], "hac_se_bp": [np.nan, 3.645911, 20.0, np.nan],
        "lags": [0, 125, 15, 10], "rmse_bp": [0.0, 49.7035, 70.01, 9.0], "rw_rmse_bp": [0.0, 49.2878, 60.0, 8.0],
        "rmse_ratio": [np.nan, 1.0084, 1.1668, 1.125], "dm_pvalue": [np.nan, 0.79, 0.0004, np.nan],
        "mz_beta": [np.nan, 0.97, 0.5, np.nan], "mz_pvalue": [np.nan, 0.0001, 0.2, np.nan],
        "fb_beta": [np.nan, 1.2, -0.3, np.nan], "hit_rate": [np.nan, 0.55, 0.5, np.nan],
        "verdict": ["spot", "forwards over-predicted <by> 18.4 bp", "forwards under-predicted 42.8 bp", "inv"],
        "window_from": pd.NaT, "window_to": pd.NaT, "data_version": pd.Timestamp("2031-06-30 18:00"),
        "computed_at": pd.Timestamp("2031-06-30 18:05"),
    })
    pd_days = d[250:]
    premium = pd.DataFrame({"start_months": np.repeat([6, 24], pd_days.size), "tenor_months": 12,
                            "as_of": np.tile(pd_days, 2), "window_days": 250,
                            "premium_bp": np.tile(np.linspace(-10, 30, pd_days.size), 2)})
    premium["lower_bp"] = premium["premium_bp"] - 15
    premium["upper_bp"] = premium["premium_bp"] + 15
    return CurveReport(
        name=name, conventions=(("Compounding", "annual"), ("Day count", "ACT/360")), tenors=tenors,
        history=history, history_label="zero rate (annual, ACT/360)", inversion_pair=("3M", "10Y"),
        episodes=episodes, pairs=pairs, outcomes=outcomes, summary=summary, premium=premium, premium_tenor=12,
        premium_window_days=250, first_day=d[0], last_day=d[-1], days_observed=d.size, pending=17,
        notes=("A note & a caveat.",), errors=outcomes[["as_of", "start_months", "tenor_months", "error_bp"]],
        spreads=pd.DataFrame({"as_of": d, "short_tenor": "3M", "long_tenor": "10Y",
                              "spread_bp": (rates["10Y"] - rates["3M"]) * 1e4}),
        all_pairs=(("3M", "10Y"),),
    )


def _data(curves: tuple[CurveReport, ...]) -> ReportData:
    loads = pd.DataFrame({
        "load_id": [1, 2, 3], "file_name": ["alpha_2030.csv", "alpha_2031.csv", "broken.csv"],
        "sha256": [hashlib.sha256(b).hexdigest() for b in (b"a", b"b", b"c")], "curve": ["alpha", "alpha", None],
        "started_at": pd.to_datetime(["2031-01-05 10:00", "2031-02-05 10:00", "2031-02-06 10:00"]),
        "rows_read": [300, 220, 0], "rows_accepted": [299, 220, 0], "rows_revised": [0, 2, 0],
        "rows_rejected": [1, 0, 0], "status": ["loaded", "loaded", "refused"], "detail": [None, None, "not a CSV"],
    })
    findings = pd.DataFrame({"curve": "alpha", "as_of": pd.to_datetime(["2030-03-04", "2030-03-05", "2031-05-06"]),
                             "check_name": ["jump", "missing_day", "inversion"], "severity": ["reject", "warn", "info"],
                             "tenor": ["3M", None, None], "detail": ["moved 80 bp", "no curve observed", "3M > 10Y"]})
    rejected = pd.DataFrame({"load_id": [1, 1, 1], "file_name": "alpha_2030.csv", "line": [7, 7, 9],
                             "raw": ["2030-01-1?,1,2,3", "2030-01-1?,1,2,3", "=cmd()"],
                             "reason": ["unparseable", "unparseable", "duplicate"]})
    builds = pd.DataFrame({"curve": ["alpha"], "method": ["linear_zero"], "code_version": ["afterward 9.9"],
                           "days": [520], "first_day": [date(2030, 1, 1)], "last_day": [date(2031, 12, 31)]})
    return ReportData(generated_at=NOW, program_version="9.9", schema_version=5, curves=curves,
                      store_path="/data/store.duckdb", config_path="/data/afterward.toml", loads=loads,
                      builds=builds, findings=findings, held=findings[findings["severity"] == "reject"],
                      rejected_rows=rejected)


@pytest.fixture(scope="module")
def page() -> str:
    return render_report(_data((_curve(),)))


def test_page_has_every_section_in_order_and_balanced_markup(page: str) -> None:
    parsed = _parse(page)
    assert parsed.errors == [] and parsed.stack == []
    assert [re.sub(r"^\d+", "", h).strip() for h in parsed.h2] == [h for _, h in SECTIONS]
    assert parsed.figures == ["fig-findings", "fig-history-0", "fig-spreads-0", "fig-forwards-0", "fig-errors-0",
                              "fig-rmse-0", "fig-error-time-0", "fig-premium-0", "fig-premium-regime-0"]


def test_page_loads_nothing_and_runs_nothing(page: str) -> None:
    low = page.lower()
    for bad in ("http://", "https://", "<script", "@import", "<link", "javascript:", " on" + "load="):
        assert bad not in low
    assert all(u.startswith("#") for u in re.findall(r"url\(([^)]*)\)", page))
    assert re.search(r'<meta http-equiv="Content-Security-Policy" content="default-src \'none\';', page)


def test_numbers_are_formatted_for_people(page: str) -> None:
    # mean 18.436245 bp, se 3.645911 bp, n = 394, 125 lags (overlap h = 126, a third of the sample):
    # interval 18.436245 -/+ c * 3.645911 with c the overlap-aware fixed-b 5 % value, about 5.08
    # there (by hand from the module's table), = -0.07 .. 36.94: the plain 1.96 would give 11.3 .. 25.6
    c = critical_value(394, 126)
    assert 5.0 < c < 5.2
    lo, hi = 18.436245 - c * 3.645911, 18.436245 + c * 3.645911
    assert f'<td class="n">+18.4</td><td class="n">{fmt_bp(lo, signed=True)} to {fmt_bp(hi, signed=True)}</td>' in page
    assert fmt_bp(lo, signed=True) == "-0.1" and fmt_bp(hi, signed=True) == "+36.9"
    # n = 16 with 15 lags: the overlap is the whole sample, no interval can be given
    assert f'<td class="n">-42.8</td><td class="n">{MISSING}</td>' in page
    assert '<td class="n">1.01</td><td class="n">0.790</td>' in page            # RMSE ratio, DM p
    assert '<td class="n">&lt; 0.001</td>' in page                               # DM p 0.0004
    assert '<td class="n">55 %</td>' in page                                     # hit rate
    assert "2030-03-04" in page and "2031-07-01 09:30:00 UTC" in page
    assert '<td class="n">-120.0</td>' in page                                   # deepest inversion, bp
    assert "forwards over-predicted &lt;by&gt; 18.4 bp" in page                  # verdicts are escaped text
    assert "A note &amp; a caveat." in page
    # start 0 is left out of the results: its verdict does not appear; the regime rows sit in <details>
    assert ">spot<" not in page and "inverted" in page


def test_provenance_block(page: str) -> None:
    digests = [hashlib.sha256(b).hexdigest() for b in (b"a", b"b")]  # the two loaded files, not the refused one
    assert hashlib.sha256("\n".join(sorted(digests)).encode()).hexdigest() in page
    assert "<strong>2</strong> loaded file(s), load ids 1 to 2" in page
    assert "broken.csv" in page and "refused: not a CSV" in page
    assert "<dt>Store schema version</dt><dd>5</dd>" in page and "afterward 9.9" in page
    # rejected rows of one input line are shown once with their count
    assert re.search(r'<td class="n">7</td><td>unparseable</td><td class="n">2</td>', page)


def test_rendering_is_deterministic(page: str) -> None:
    assert render_report(_data((_curve(),))) == page


def test_an_empty_store_still_gives_a_whole_page() -> None:
    bare = ReportData(generated_at=NOW, program_version="9.9", schema_version=5, curves=(CurveReport(name="beta"),))
    text = render_report(bare)
    parsed = _parse(text)
    assert parsed.errors == [] and [re.sub(r"^\d+", "", h).strip() for h in parsed.h2] == [h for _, h in SECTIONS]
    assert parsed.figures == []
    assert "No file has been loaded" in text and "No open findings." in text
    assert "No curve has been built" in text


def test_long_history_is_thinned_to_weeks() -> None:
    days = _business_days("1996-01-01", "2025-12-31")
    tenors = tuple(f"{y}Y" for y in (1, 2, 3, 5, 7, 10, 15, 20, 30)) + ("1M", "3M", "6M", "1W", "2W")
    history = pd.DataFrame({"as_of": np.tile(days, len(tenors)), "tenor": np.repeat(tenors, days.size),
                            "rate": np.tile(np.linspace(0.01, 0.08, days.size), len(tenors))})
    chart = charts.history_chart(CurveReport(name="long", tenors=tenors, history=history), "t")
    assert chart is not None and "one point per week" in chart.caption
    assert len(chart.svg.encode()) < 600_000
    # the heatmap is one embedded PNG strip per tenor, a pixel per week (weeks as pandas counts them, W-SUN)
    pngs = re.findall(r'data:image/png;base64,([A-Za-z0-9+/=\s]+)"', chart.svg)
    assert len(pngs) == len(tenors) + 1  # the strips and the colour bar
    sizes = [Image.open(io.BytesIO(base64.b64decode(re.sub(r"\s", "", b)))).size for b in pngs]
    weeks = pd.DatetimeIndex(days).to_period("W-SUN").nunique()
    assert sizes.count((weeks, 1)) == len(tenors)


def test_the_contenders_section_draws_the_comparison_and_the_model_premium() -> None:
    """The comparison of the curve's own outcomes (pipeline.contenders.compare, held to arch and
    statsmodels in its own tests) drawn as the RMSE chart, the confidence-set table and the verdicts;
    the model premium as its own chart beside the ex-post one."""
    from dataclasses import replace

    from pipeline.contenders import builtin_contenders, compare

    base = _curve()
    o = base.outcomes.assign(curve=base.name, observed_on=base.outcomes["target_date"])
    rows = builtin_contenders(o, window=60, min_history=20)
    result = compare(rows, reps=200)
    months = pd.DataFrame({"as_of": np.repeat(pd.date_range("2031-01-31", periods=12, freq="ME"), 3),
                           "maturity_months": np.tile([24, 60, 120], 12),
                           "term_premium": np.tile([0.001, 0.004, 0.009], 12)})
    c = replace(base, contender_scores=result.scores, confidence_set=result.confidence_set,
                contender_verdicts=result.verdicts, compared=(pd.Timestamp("2031-07-01 06:00"), None, None),
                model_premium=months)
    page = render_report(_data((c,)))
    parsed = _parse(page)
    assert parsed.errors == [] and parsed.stack == []
    assert "fig-model-premium-0" in parsed.figures and "fig-contenders-0" in parsed.figures
    section = page[page.index('<section id="contenders">'):page.index('<section id="cautions">')]
    assert "over the whole record" in section
    for name in result.scores["contender"].unique():
        assert f">{name}<" in section
    for v in result.verdicts.loc[result.verdicts["start_months"] > 0, "verdict"]:
        assert html.escape(v, quote=False) in section
    # a cell with fewer than 10 non-overlapping periods carries the indicative mark
    assert result.scores["indicative"].any() and " *" in section
    empty = render_report(_data((_curve(),)))
    assert "No comparison stored yet" in empty


def _judged_summary() -> pd.DataFrame:
    """Four horizons with the fixed-b figures set by hand, one per judgement."""
    return pd.DataFrame({
        "curve": "alpha", "start_months": [0, 6, 12, 24, 60], "tenor_months": 12, "regime": "all",
        "n": [500, 400, 380, 300, 100], "mean_error_bp": [0.0, 12.0, -30.0, 4.0, 80.0],
        "hac_se_bp": [np.nan, 2.0, 5.0, 9.0, 30.0], "lags": [0, 125, 251, 503, 1259],
        "rmse_bp": [0.0, 40.0, 60.0, 70.0, 120.0], "rw_rmse_bp": [0.0, 45.0, 50.0, 71.0, 110.0],
        "rmse_ratio": [np.nan, 0.89, 1.2, 0.99, 1.09], "dm_stat": [np.nan, -2.5, 2.6, -0.4, np.nan],
        "dm_pvalue": [np.nan, 0.01, 0.01, 0.7, np.nan], "dm_pvalue_fixed_b": [np.nan, 0.03, 0.04, 0.8, np.nan],
        "hac_pvalue": [np.nan, 0.001, 0.02, 0.7, 0.2], "n_effective": [500.0, 3.2, 1.5, 0.6, 0.08],
        "indicative": [False, True, True, True, True], "mz_beta": np.nan, "mz_pvalue": np.nan, "fb_beta": np.nan,
        "hit_rate": np.nan, "verdict": "v", "first_as_of": pd.Timestamp("2030-01-01"),
        "last_as_of": pd.Timestamp("2031-01-01")})


def test_summary_judges_each_horizon_by_its_fixed_b_p_values() -> None:
    from pipeline.report.summary import confidence_counts, horizon_verdicts

    v = horizon_verdicts(_judged_summary())
    assert v["start_months"].tolist() == [6, 12, 24, 60]  # 0M (the spot rate itself) left out
    # DM < 0 with p < 5 %: better; DM > 0, p < 5 %: worse; p >= 5 %: even; no p: untested
    assert v["against"].tolist() == ["better", "worse", "even", "untested"]
    # the premium's sign counts only where the mean error's fixed-b p is below 5 %
    assert v["premium"].tolist() == ["positive", "negative", "unclear", "unclear"]
    mcs = pd.DataFrame({"start_months": [0, 6, 6, 12, 12], "tenor_months": 12,
                        "contender": ["forward", "forward", "no_change", "forward", "no_change"],
                        "mcs_p_value": [1.0, 1.0, 0.02, 0.3, 1.0], "included": [True, True, False, True, True]})
    counts, cells = confidence_counts(mcs)
    assert cells == 2 and counts.set_index("contender")["kept"].to_dict() == {"forward": 2, "no_change": 1}


def test_summary_comes_first_with_its_words_and_the_overlap_caution() -> None:
    from dataclasses import replace

    c = replace(_curve(), summary=_judged_summary())
    page = render_report(_data((c,)))
    parsed = _parse(page)
    assert parsed.errors == [] and parsed.stack == []
    part = page[page.index('<section id="summary">'):page.index('<section id="scope">')]
    assert page.index('<section id="summary">') < page.index('<section id="scope">')
    assert "better at 1 of 4 horizons (6M\u00d71Y)" in part and "worse at 1 (1Y\u00d71Y)" in part
    assert "no clear difference at 1" in part and "1 too short to test" in part
    assert "positive at 1, negative at 1 horizons" in part
    assert "from -30.0 bp (1Y\u00d71Y) to +80.0 bp (5Y\u00d71Y)" in part
    assert "Strength of evidence: weak." in part and "4 of 4 horizons have fewer than 10" in part
    assert "share most of their future" in part and "not investment advice" in part
    assert "Not computed yet (run 'afterward compare')" in part


def test_tenor_strips_sit_at_their_maturity() -> None:
    from pipeline.report.charts import _maturity_rows

    # 1Y, 2Y, 4Y, 8Y: equal steps of log10(2) on the axis; edges halfway, half a step beyond the ends
    # (by hand); approx_days / 365.25 is the year count the tenor parser gives
    centre, edges = _maturity_rows(["1Y", "2Y", "4Y", "8Y"])
    step = np.log10(2.0)
    assert np.allclose(np.diff(centre), step, atol=2e-3)
    assert np.allclose(edges[1:-1], (centre[1:] + centre[:-1]) / 2)
    assert np.isclose(centre[0] - edges[0], np.diff(centre)[0] / 2) and np.isclose(edges[-1] - centre[-1],
                                                                                   np.diff(centre)[-1] / 2)
    # 10Y to 30Y is drawn farther apart than 5Y to 7Y, unlike rows of equal height
    c2, _ = _maturity_rows(["5Y", "7Y", "10Y", "30Y"])
    assert c2[3] - c2[2] > 2 * (c2[1] - c2[0])


def _png_colours(svg: str) -> set[tuple[int, int, int]]:
    out: set[tuple[int, int, int]] = set()
    for b in re.findall(r'data:image/png;base64,([A-Za-z0-9+/=\s]+)"', svg):
        img = Image.open(io.BytesIO(base64.b64decode(re.sub(r"\s", "", b)))).convert("RGB")
        out |= {tuple(int(v) for v in px) for px in np.asarray(img).reshape(-1, 3)}
    return out


def test_findings_are_coloured_by_severity_and_counted_in_words() -> None:
    from pipeline.report.svg import OKABE_ITO

    f = pd.DataFrame({"curve": "alpha", "as_of": pd.to_datetime(["2030-03-04"] + ["2030-05-06"] * 45),
                      "check_name": ["jump"] + ["inversion"] * 45, "severity": ["reject"] + ["info"] * 45})
    chart = charts.findings_chart(f, ("jump", "inversion"), pd.Timestamp("2030-01-01"), pd.Timestamp("2030-12-31"),
                                  "fq")

    def rgb(h: str) -> tuple[int, int, int]:
        return tuple(int(h[i:i + 2], 16) for i in (1, 3, 5))
    # one reject and 45 infos: the reject's cell is the full reject colour, the infos' the info colour
    assert _png_colours(chart.svg) == {(255, 255, 255), rgb(OKABE_ITO["vermillion"]), rgb(OKABE_ITO["blue"])}
    assert "whatever the count" in chart.caption


@pytest.mark.parametrize(("first", "last", "width"), [("2022-01-03", "2023-09-29", 9.6 / 3 - 0.5),
                                                       ("2022-01-03", "2022-03-15", 9.6 / 3 - 0.5),
                                                       ("1996-01-02", "2025-12-31", 9.6 / 3 - 0.5),
                                                       ("2019-01-02", "2025-12-31", 8.6)],
                         ids=["21-months-panel", "10-weeks-panel", "30-years-panel", "7-years-wide"])
def test_date_labels_never_overlap(first: str, last: str, width: float) -> None:
    from pipeline.report.charts import _date_axis

    with chart_style():
        fig = new_figure(width + 0.6, 1.6)
        ax = fig.add_subplot()
        a, b = np.datetime64(first), np.datetime64(last)
        ax.plot([a, b], [0, 1])
        _date_axis(ax, a, b, width)
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        canvas = FigureCanvasAgg(fig)  # measures the text as the SVG's glyph outlines are drawn (same font)
        canvas.draw()
        renderer = canvas.get_renderer()
        boxes = sorted((t.get_window_extent(renderer) for t in ax.get_xticklabels() if t.get_text()
                        and ax.get_xlim()[0] <= t.get_position()[0] <= ax.get_xlim()[1]), key=lambda e: e.x0)
    assert len(boxes) >= 2
    assert all(lt.x1 < rt.x0 for lt, rt in zip(boxes, boxes[1:], strict=False)), [(e.x0, e.x1) for e in boxes]


def test_overrides_list_every_acceptance_and_what_if_build_and_a_sign_off_block() -> None:
    from dataclasses import replace

    acc = pd.DataFrame({"curve": ["alpha", "alpha"], "as_of": pd.to_datetime(["2030-03-04", "2030-06-07"]),
                        "accepted_by": ["r.ames", "k.lund"],
                        "accepted_at": pd.to_datetime(["2031-01-10 08:15", "2031-02-11 16:40"]),
                        "reason": ["source confirmed <by phone>", None], "in_force": [True, False],
                        "findings": ["jump (reject, 3M)", None]})
    whatif = pd.DataFrame({"curve": ["alpha"], "scenario": ["what-if:nss"], "method": ["nss"],
                           "code_version": ["afterward 9.9"], "days": [63], "first_day": [date(2030, 1, 2)],
                           "last_day": [date(2030, 3, 29)], "built_at": [pd.Timestamp("2031-03-01 12:00")]})
    page = render_report(replace(_data((_curve(),)), acceptances=acc, scenarios=whatif))
    parsed = _parse(page)
    assert parsed.errors == [] and parsed.stack == []
    part = page[page.index('<section id="overrides">'):page.index('<section id="cautions">')]
    assert re.search(r'<td>alpha</td><td class="n">2030-03-04</td><td>jump \(reject, 3M\)</td><td>r.ames</td>'
                     r'<td class="n">2031-01-10 08:15</td><td>source confirmed &lt;by phone&gt;</td><td>in force</td>',
                     part)
    assert "(no reason given)" in part and "lapsed: the day&#x27;s quotes changed since" in part
    assert "2 acceptance(s), 1 lapsed" in part
    assert "<td>what-if:nss</td><td>nss</td><td>afterward 9.9</td><td class=\"n\">63</td>" in part
    sign = page[page.index('<section id="signoff">'):]
    for role in ("Prepared by", "Reviewed by"):
        assert f'<th scope="row">{role}</th><td></td><td></td><td></td>' in sign
    assert "<th>Date</th>" in sign
    bare = render_report(_data((_curve(),)))
    assert "No day&#x27;s findings have been accepted" in bare and "No what-if build" in bare
