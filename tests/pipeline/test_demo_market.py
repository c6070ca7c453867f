"""The invented demo market: determinism, the files and their planted defects, the model's shape,
par-yield repricing and the known term premium.

Files are read back with the ``csv`` module and ``pyarrow`` directly (not through the project's
readers), par bonds are repriced on QuantLib's own schedule generation, and the premium is measured
with a statsmodels Newey-West mean.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import io
import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import QuantLib as ql
import statsmodels.api as sm

from pipeline import demo as dm
from pipeline.config import load_config, parse_config
from pipeline.dates import BusinessCalendar, maturity_dates
from tests.quantlib_ref import ql_calendar

# --- fixtures -------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def manifest(tmp_path_factory: pytest.TempPathFactory) -> dm.DemoManifest:
    return dm.write_demo_inbox(tmp_path_factory.mktemp("inbox"))


@pytest.fixture(scope="module")
def market(manifest: dm.DemoManifest) -> dm.DemoMarket:
    return manifest.market


def _pct_text(x: float) -> str:
    return f"{round(x * 100.0, 4):.4f}"


def _read_govt(path: Path) -> list[tuple[int, list[str]]]:
    """(line number, fields) for every line after the header, via the csv module."""
    with path.open(newline="", encoding="ascii") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["date", *dm.GOVT_TENORS], path.name
    return [(n, r) for n, r in enumerate(rows[1:], start=2)]


def _iso_date(text: str) -> dt.date | None:
    try:
        return dt.date.fromisoformat(text) if re.fullmatch(r"\d{4}-\d{2}-\d{2}", text) else None
    except ValueError:
        return None


def _line(manifest: dm.DemoManifest, d: dm.Defect) -> list[str]:
    rows = dict(_read_govt(manifest.directory / d.file))
    return rows[d.line]


# --- determinism and delivery ---------------------------------------------------------------------


def test_same_seed_same_bytes_and_another_seed_differs(manifest: dm.DemoManifest,
                                                       tmp_path: Path) -> None:
    again = dm.write_demo_inbox(tmp_path, seed=manifest.seed)
    assert [p.name for p in again.files] == [p.name for p in manifest.files]
    for a, b in zip(manifest.files, again.files, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name
    assert again.defects == manifest.defects
    other, _ = dm.render_feed(dm.generate_market(seed=manifest.seed + 1))
    assert other["govt_2010-01.csv"] != (manifest.directory / "govt_2010-01.csv").read_bytes()


def test_manifest_lists_exactly_the_files_written(manifest: dm.DemoManifest) -> None:
    on_disk = sorted(p.name for p in manifest.directory.iterdir())
    assert on_disk == [p.name for p in manifest.files]
    months = pd.period_range("1996-01", "2025-12", freq="M").strftime("%Y-%m")
    assert [p.name for p in manifest.files_for("swap")] == [f"swap_{m}.parquet" for m in months]
    govt = [p.name for p in manifest.files_for("govt")]
    assert govt == sorted([f"govt_{m}.csv" for m in months] + [manifest.restatement_file.name])
    assert manifest.curves == ("govt", "swap")
    assert manifest.premium is dm.expected_forward_error_bp
    assert manifest.seed == dm.DEFAULT_SEED


# --- calendar -------------------------------------------------------------------------------------


def test_business_days_are_weekdays_minus_the_fixed_holidays(market: dm.DemoMarket) -> None:
    # independent source: pandas' custom business-day calendar over the same holidays
    holidays = [f"{y}-{md}" for y in range(1996, 2026) for md, _ in dm.HOLIDAYS]
    expected = pd.bdate_range("1996-01-01", "2025-12-31", freq="C", holidays=holidays)
    got = pd.DatetimeIndex(market.days)
    assert got.equals(pd.DatetimeIndex(expected.values.astype("datetime64[D]")))
    assert str(market.days[0]) == "1996-01-02"  # 1 January is New Year's Day
    assert str(market.days[-1]) == "2025-12-31"
    assert 7_600 < market.days.size < 7_900


# --- every difference between the files and the clean market is a recorded defect -----------------


def test_every_difference_from_the_clean_market_is_a_recorded_defect(manifest: dm.DemoManifest) -> None:
    clean = manifest.clean["govt"]
    expected = {d.strftime("%Y-%m-%d"): [_pct_text(v) for v in row]
                for d, row in zip(clean.index, clean.to_numpy(), strict=True)}
    seen: dict[str, int] = {}
    cells, extra_lines, garbled = set(), set(), set()
    for path in manifest.files_for("govt"):
        if path == manifest.restatement_file:
            continue
        for n, row in _read_govt(path):
            day = _iso_date(row[0])
            if day is None or len(row) != len(dm.GOVT_TENORS) + 1:
                garbled.add((path.name, n))
                continue
            key = day.isoformat()
            assert key in expected, f"{path.name}:{n} has a date that is not a business day"
            seen[key] = seen.get(key, 0) + 1
            if seen[key] > 1:
                extra_lines.add((path.name, n))
            cells |= {(path.name, n, t) for t, got, want in zip(dm.GOVT_TENORS, row[1:], expected[key],
                                                                  strict=True) if got != want}
    missing = {k for k in expected if k not in seen}

    d = manifest.defects
    assert missing == {x.date.isoformat() for x in d if x.kind == "missing_day"}
    assert garbled == {(x.file, x.line) for x in d if x.kind == "garbled_line"}
    assert extra_lines == {(x.file, x.line) for x in d if x.kind in ("duplicate_row", "conflicting_duplicate")}
    stale = manifest.defects_of("stale_curve")
    want = {(x.file, x.line, x.tenor) for x in d if x.tenor and x.kind != "restatement"}
    want |= {(x.file, x.line, t) for x in stale for t in dm.GOVT_TENORS}
    assert cells == want


def test_each_kind_of_defect_is_planted_once(manifest: dm.DemoManifest) -> None:
    kinds = [d.kind for d in manifest.defects]
    for kind in ("missing_day", "wrong_units", "duplicate_row", "garbled_line", "stale_curve",
                 "missing_tenor", "conflicting_duplicate", "out_of_range"):
        assert kinds.count(kind) == 1, kind
    assert kinds.count("restated_value") == kinds.count("restatement") >= 3
    days = {d.date for d in manifest.defects if d.kind not in ("restatement",)}
    assert len(days) == 9, "defects must fall on different days so that each check sees one cause"


# --- each defect as recorded ----------------------------------------------------------------------


def test_missing_day_is_a_business_day_absent_from_govt_but_present_in_swap(
        manifest: dm.DemoManifest, market: dm.DemoMarket) -> None:
    (d,) = manifest.defects_of("missing_day")
    assert np.datetime64(d.date) in market.days
    dates = {r[0] for p in manifest.files_for("govt") for _, r in _read_govt(p)}
    assert d.date.isoformat() not in dates
    swap = pq.read_table(manifest.directory / f"swap_{d.date:%Y-%m}.parquet")
    assert d.date in set(swap.column("date").to_pylist())


def test_wrong_units_cell_is_ten_times_the_true_value_and_still_looks_like_a_rate(
        manifest: dm.DemoManifest) -> None:
    (d,) = manifest.defects_of("wrong_units")
    row = _line(manifest, d)
    cell = float(row[1 + dm.GOVT_TENORS.index(d.tenor)])
    assert row[0] == d.date.isoformat()
    assert cell == d.written_value
    assert d.true_value == float(_pct_text(manifest.clean["govt"].loc[str(d.date), d.tenor]))
    assert cell == pytest.approx(10 * d.true_value, abs=1e-3)
    assert 5.0 < cell < 40.0  # inside a -5 %..40 % plausibility band: only a jump check sees it


def test_out_of_range_cell_is_a_hundred_times_the_true_value(manifest: dm.DemoManifest) -> None:
    (d,) = manifest.defects_of("out_of_range")
    cell = float(_line(manifest, d)[1 + dm.GOVT_TENORS.index(d.tenor)])
    assert cell == d.written_value == pytest.approx(100 * d.true_value, abs=1e-3)
    assert cell > 100.0


def test_duplicate_row_repeats_the_previous_line_verbatim(manifest: dm.DemoManifest) -> None:
    (d,) = manifest.defects_of("duplicate_row")
    lines = (manifest.directory / d.file).read_text().splitlines()
    assert lines[d.line - 1] == lines[d.line - 2] == d.written_value
    assert lines[d.line - 1].startswith(d.date.isoformat() + ",")


def test_conflicting_duplicate_repeats_a_day_with_one_tenor_changed(manifest: dm.DemoManifest) -> None:
    (d,) = manifest.defects_of("conflicting_duplicate")
    rows = [(n, r) for n, r in _read_govt(manifest.directory / d.file) if r[0] == d.date.isoformat()]
    assert [n for n, _ in rows][-1] == d.line and len(rows) == 2
    (_, first), (_, second) = rows
    differ = [t for t, a, b in zip(dm.GOVT_TENORS, first[1:], second[1:], strict=True) if a != b]
    assert differ == [d.tenor]
    j = 1 + dm.GOVT_TENORS.index(d.tenor)
    assert (float(first[j]), float(second[j])) == (d.true_value, d.written_value)


def test_garbled_line_does_not_parse(manifest: dm.DemoManifest) -> None:
    (d,) = manifest.defects_of("garbled_line")
    text = (manifest.directory / d.file).read_text().splitlines()[d.line - 1]
    assert text == d.written_value
    fields = text.split(",")
    assert _iso_date(fields[0]) is None
    assert "abc" in fields and len(fields) < len(dm.GOVT_TENORS) + 1


def test_stale_day_repeats_the_previous_business_day(manifest: dm.DemoManifest,
                                                     market: dm.DemoMarket) -> None:
    (d,) = manifest.defects_of("stale_curve")
    rows = _read_govt(manifest.directory / d.file)
    at = [i for i, (n, _) in enumerate(rows) if n == d.line][0]
    today, before = rows[at][1], rows[at - 1][1]
    prev_day = market.calendar.add_business_days(np.datetime64(d.date), -1)
    assert before[0] == str(prev_day) and today[0] == d.date.isoformat()
    assert today[1:] == before[1:]
    clean = manifest.clean["govt"]
    assert not np.allclose(clean.loc[str(d.date)], clean.loc[str(prev_day)])


def test_missing_tenor_is_an_empty_cell(manifest: dm.DemoManifest) -> None:
    (d,) = manifest.defects_of("missing_tenor")
    row = _line(manifest, d)
    assert row[0] == d.date.isoformat() and row[1 + dm.GOVT_TENORS.index(d.tenor)] == ""
    assert sum(c == "" for c in row) == 1
    assert d.true_value == float(_pct_text(manifest.clean["govt"].loc[str(d.date), d.tenor]))


def test_restatement_corrects_the_first_publication(manifest: dm.DemoManifest) -> None:
    first = manifest.defects_of("restated_value")
    restated = manifest.defects_of("restatement")
    day = first[0].date
    name = manifest.restatement_file.name
    published = dt.date.fromisoformat(re.fullmatch(r"govt_restatement_(\d{4}-\d{2}-\d{2})\.csv", name)[1])
    assert published > (pd.Timestamp(day) + pd.offsets.MonthEnd(0)).date()
    (n, row), = _read_govt(manifest.restatement_file)
    assert n == 2 and row[0] == day.isoformat()
    clean = manifest.clean["govt"].loc[str(day)]
    assert row[1:] == [_pct_text(v) for v in clean]  # the restatement carries the true curve
    original = _line(manifest, first[0])
    changed = [t for t, a, b in zip(dm.GOVT_TENORS, original[1:], row[1:], strict=True) if a != b]
    assert sorted(changed) == sorted(d.tenor for d in first) and len(changed) >= 3
    for d in first:
        j = 1 + dm.GOVT_TENORS.index(d.tenor)
        assert float(original[j]) == d.written_value != d.true_value == float(row[j])
    assert {(d.file, d.line, d.tenor) for d in restated} == {(name, 2, d.tenor) for d in first}


# --- file formats ---------------------------------------------------------------------------------


def test_govt_files_are_wide_percent_with_four_decimals(manifest: dm.DemoManifest) -> None:
    number = re.compile(r"-?\d+\.\d{4}")
    lines = 0
    for path in manifest.files_for("govt"):
        raw = path.read_bytes()
        assert raw.endswith(b"\n") and b"\r" not in raw
        for n, row in _read_govt(path):
            if _iso_date(row[0]) is None:
                continue
            lines += 1
            assert all(number.fullmatch(c) for c in row[1:] if c), f"{path.name}:{n}"
    # one day missing, a verbatim and a conflicting repeat, and the restatement's one line
    assert lines == manifest.market.days.size - 1 + 2 + 1


def test_swap_files_are_long_parquet_with_decimal_rates(manifest: dm.DemoManifest) -> None:
    tables = [pq.read_table(p) for p in manifest.files_for("swap")]
    assert all(t.schema == pa.schema([("date", pa.date32()), ("tenor", pa.string()),
                                      ("rate", pa.float64()), ("curve", pa.string())]) for t in tables)
    frame = pa.concat_tables(tables).to_pandas()
    assert set(frame["curve"]) == {"swap"}
    wide = frame.pivot(index="date", columns="tenor", values="rate")[list(dm.SWAP_TENORS)]
    clean = manifest.clean["swap"]
    assert [str(x) for x in wide.index] == [str(x.date()) for x in clean.index]
    np.testing.assert_allclose(wide.to_numpy(), clean.to_numpy(), rtol=0, atol=5e-9)
    for p in manifest.files_for("swap"):  # each month holds its own days only
        dates = pq.read_table(p, columns=["date"]).column("date").to_pylist()
        assert {f"{d:%Y-%m}" for d in dates} == {p.stem.removeprefix("swap_")}


# --- the model's shape ----------------------------------------------------------------------------


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(first, length) of each run of True, by plain pandas grouping."""
    s = pd.Series(mask)
    group = (s != s.shift()).cumsum()
    out = s.groupby(group).agg(["first", "size"])
    starts = s.groupby(group).apply(lambda x: x.index[0])
    return [(int(i), int(n)) for i, (f, n) in zip(starts, out.to_numpy(), strict=True) if f]


@pytest.mark.parametrize("short", ["3M", "2Y"], ids=["3M-10Y", "2Y-10Y"])
def test_tightening_inverts_the_curve_for_months(market: dm.DemoMarket, short: str) -> None:
    g = market.quotes["govt"]
    ep = market.episode
    runs = _runs((g[short] > g["10Y"]).to_numpy())
    in_episode = [(market.days[i], n) for i, n in runs
                  if ep.tightening_start <= market.days[i] <= ep.easing_end]
    assert max(n for _, n in in_episode) >= 60, "at least ~3 months of 3M (2Y) above 10Y"
    longest = max(runs, key=lambda r: r[1])
    assert ep.tightening_start <= market.days[longest[0]] <= ep.easing_start
    # the short end really was pushed up: the 3M rate rose by more than 2 % within the burst
    rise = g["3M"].loc[str(ep.tightening_end):].iloc[0] - g["3M"].loc[:str(ep.tightening_start)].iloc[-1]
    assert rise > 0.02


@pytest.mark.parametrize("curve", ["govt", "swap"])
def test_rates_are_plausible_and_move_smoothly(market: dm.DemoMarket, curve: str) -> None:
    q = market.quotes[curve].to_numpy()
    assert q.min() > 0.005 and q.max() < 0.11
    assert np.mean((q > 0.01) & (q < 0.09)) > 0.99
    # clean day-on-day moves stay below the demo's jump threshold (75 bp), so the jump check fires
    # on the planted defects only
    assert np.abs(np.diff(q, axis=0)).max() * 1e4 < 75.0
    assert 0.0002 < np.std(np.diff(q, axis=0)) < 0.001  # a daily standard deviation of 2-10 bp


def test_swap_quotes_are_annual_act360_of_the_swap_zero_curve(market: dm.DemoMarket) -> None:
    # (1 + r)^(-d/360) must equal exp(-z d/365) at every node (days d from as-of to maturity)
    d = (market.maturities["swap"] - market.days[:, None]).astype(float)
    lhs = (1.0 + market.quotes["swap"].to_numpy()) ** (-d / 360.0)
    rhs = np.exp(-market.zero_cc["swap"].to_numpy() * d / 365.0)
    np.testing.assert_allclose(lhs, rhs, rtol=1e-13)
    spread = market.zero_cc["swap"]["5Y"] - market.zero_cc["govt"]["5Y"]
    assert 0.0 < spread.mean() < 0.01


# --- par yields -----------------------------------------------------------------------------------

# Hull, "Options, Futures, and Other Derivatives": continuous zeros at 0.5, 1, 1.5, 2 years and the
# 2-year semiannual par yield (tests/REFERENCES.md #7, #8)
HULL = [
    pytest.param((5.0, 5.8, 6.4, 6.8), 6.873, 5e-4, id="hull-table-4.2-memory-recomputed"),
    pytest.param((5.0, 6.0, 6.5, 7.0), 7.0741, 5e-5, id="hull-par-yield-seen"),
]


@pytest.mark.parametrize(("zeros", "par_pct", "tol"), HULL)
def test_par_yield_formula_matches_the_textbook(zeros: tuple[float, ...], par_pct: float, tol: float) -> None:
    # a calendar without weekends or holidays and an as-of date mid-month: coupons fall exactly on
    # as-of + 6k months, so the discount function can use Hull's half-year grid
    cal = BusinessCalendar.of((), ())
    as_of = np.array(["2001-01-15"], dtype="datetime64[D]")

    def discount(dates: np.ndarray) -> np.ndarray:
        months = (dates.astype("datetime64[M]") - as_of.astype("datetime64[M]")[:, None]).astype(int)
        z = np.asarray(zeros)[months // 6 - 1] / 100.0
        return np.exp(-z * months / 12.0)

    got = dm.par_yields(as_of, "2Y", cal, discount)[0] * 100.0
    assert abs(got - par_pct) < tol, (got, par_pct)


def _ql_calendar() -> ql.Calendar:
    return ql_calendar("Orvane", holidays=dm.demo_holidays())


def _to_np(d: ql.Date) -> np.datetime64:
    return np.datetime64(d.ISO(), "D")


def _sample_rows(market: dm.DemoMarket) -> list[int]:
    days = pd.DatetimeIndex(market.days)
    picks = ["2000-02-29", "1996-08-30", "2001-08-31", "2004-01-30", "2012-02-29", "2015-06-30",
             "2020-11-30", "2025-12-31", "1999-07-15", "2008-05-06"]
    rows = [int(days.searchsorted(pd.Timestamp(p))) for p in picks]
    rows += list(np.random.default_rng(7).choice(days.size, 25, replace=False))
    return sorted(set(rows))


def test_par_yields_reprice_par_bonds_on_quantlib_schedules(market: dm.DemoMarket) -> None:
    # independent schedule: QuantLib backward generation from the unadjusted maturity, modified
    # following on a bespoke copy of the Orvane calendar; coupons per the contract (c/2 on regular
    # periods, c * ACT/365F year fraction on a short first one), discounted on the model's curve
    cal = _ql_calendar()
    par = market.quotes["govt"]
    worst = 0.0
    for i in _sample_rows(market):
        as_of = dt.date.fromisoformat(str(market.days[i]))
        qd = ql.Date(as_of.day, as_of.month, as_of.year)
        for tenor in dm.GOVT_TENORS:
            months = 12 * int(tenor[:-1]) if tenor.endswith("Y") else int(tenor[:-1])
            c = par.iloc[i][tenor]
            end = qd + ql.Period(months, ql.Months)
            if months <= 6:
                mat = _to_np(cal.adjust(end, ql.ModifiedFollowing))
                tau = (mat - market.days[i]).astype(int) / 365.0
                pv = (1 + c / 2) ** (-2 * tau) / _discount(market, i, [mat])[0]
            else:
                sched = ql.Schedule(qd, end, ql.Period(6, ql.Months), cal, ql.ModifiedFollowing,
                                    ql.ModifiedFollowing, ql.DateGeneration.Backward, False)
                pays = [_to_np(d) for d in list(sched)[1:]]
                acc = np.full(len(pays), 0.5)
                if not sched.isRegular(1):
                    acc[0] = (pays[0] - market.days[i]).astype(int) / 365.0
                df = _discount(market, i, pays)
                pv = c * float(np.sum(acc * df)) + df[-1]
            worst = max(worst, abs(pv - 1.0))
            assert abs(pv - 1.0) < 1e-12, (str(market.days[i]), tenor, pv - 1.0)
    assert worst < 1e-12


def _discount(market: dm.DemoMarket, i: int, dates: list[np.datetime64]) -> np.ndarray:
    """Discount factors on day ``i`` straight from the factor values (the NS closed form)."""
    p, f = market.params, market.model.factors
    tau = (np.array(dates, dtype="datetime64[D]") - market.days[i]).astype(int) / 365.0

    def b(k: float) -> np.ndarray:
        return (1 - np.exp(-k * tau)) / (k * tau)

    z = (p.mu_level + p.mu_slope + f.level[i] * b(p.k_level) + f.slope[i] * b(p.lam)
         + f.curv[i] * (b(p.lam) - np.exp(-p.lam * tau)) + p.tp_a * (1 - np.exp(-tau / p.tp_b)))
    return np.exp(-z * tau)


def test_zero_nodes_follow_the_nelson_siegel_closed_form(market: dm.DemoMarket) -> None:
    rows = _sample_rows(market)
    z = market.zero_cc["govt"].to_numpy()
    for i in rows:
        mats = list(market.maturities["govt"][i])
        tau = (np.array(mats) - market.days[i]).astype(int) / 365.0
        np.testing.assert_allclose(np.exp(-z[i] * tau), _discount(market, i, mats), rtol=1e-13)


# --- the known term premium -----------------------------------------------------------------------


def _mean_error_band(market: dm.DemoMarket, curve: str, start: str, tenor: str, end: str,
                     zeros: pd.DataFrame | None = None) -> tuple[float, float, np.ndarray]:
    """Mean and Newey-West s.e. (bp) of forward minus realised, on the model's own node rates.

    The forward runs from the ``start`` node to the ``end`` node; it is realised by the ``tenor``
    node on the first business day on or after the start date (statsmodels HAC, Bartlett,
    ``h - 1`` lags with ``h`` the median business days to the target).
    """
    zeros = market.zero_cc[curve] if zeros is None else zeros
    z = zeros.to_numpy()
    cols = list(zeros.columns)
    mats = market.maturities[curve]
    a, b, m = cols.index(start), cols.index(end), cols.index(tenor)
    t1 = (mats[:, a] - market.days).astype(int)
    t2 = (mats[:, b] - market.days).astype(int)
    fwd = (t2 * z[:, b] - t1 * z[:, a]) / (t2 - t1)
    k = np.searchsorted(market.days, mats[:, a])
    ok = k < market.days.size
    err = (fwd[ok] - z[k[ok], m]) * 1e4
    h = int(np.median(k[ok] - np.flatnonzero(ok)))
    fit = sm.OLS(err, np.ones(err.size)).fit(cov_type="HAC", cov_kwds={"maxlags": max(h - 1, 0)})
    return float(fit.params[0]), float(fit.bse[0]), err


NODE_FORWARDS = [
    pytest.param("govt", "3M", "3M", "6M", id="govt-3Mx3M"),
    pytest.param("govt", "6M", "6M", "1Y", id="govt-6Mx6M"),
    pytest.param("govt", "1Y", "1Y", "2Y", id="govt-1Yx1Y"),
    pytest.param("govt", "2Y", "1Y", "3Y", id="govt-2Yx1Y"),
    pytest.param("govt", "3Y", "2Y", "5Y", id="govt-3Yx2Y"),
    pytest.param("swap", "1Y", "1Y", "2Y", id="swap-1Yx1Y"),
    pytest.param("swap", "1Y", "3Y", "4Y", id="swap-1Yx3Y"),
]
_MONTHS = {"3M": 3, "6M": 6, "1Y": 12, "2Y": 24, "3Y": 36, "4Y": 48, "5Y": 60}


@pytest.mark.parametrize(("curve", "start", "tenor", "end"), NODE_FORWARDS)
def test_measured_mean_error_matches_the_known_premium(market: dm.DemoMarket, curve: str, start: str,
                                                       tenor: str, end: str) -> None:
    mean, se, _ = _mean_error_band(market, curve, start, tenor, end)
    # on the model's ACT/365F continuous rates; the function speaks the curve's own day count
    basis = 365.0 / 360.0 if curve == "swap" else 1.0
    want = dm.expected_forward_error_bp(_MONTHS[start], _MONTHS[tenor], curve=curve) * basis
    assert abs(mean - want) < 1.96 * se, (mean, se, want)
    assert want > 2.0 * se  # the premium is large enough for the audit to see it


EPISODE_FORWARDS = [
    pytest.param("3M", "3M", "6M", id="3Mx3M"),
    pytest.param("1Y", "1Y", "2Y", id="1Yx1Y"),
    pytest.param("3Y", "2Y", "5Y", id="3Yx2Y"),
    pytest.param("2Y", "5Y", "7Y", id="2Yx5Y"),
    pytest.param("5Y", "5Y", "10Y", id="5Yx5Y"),
]


@pytest.fixture(scope="module")
def calm(market: dm.DemoMarket) -> dm.DemoMarket:
    """The same seed without the tightening episode."""
    quiet = dataclasses.replace(market.episode, rise=0.0)
    return dm.generate_market(market.seed, dataclasses.replace(market.params, episode=quiet))


@pytest.mark.parametrize(("start", "tenor", "end"), EPISODE_FORWARDS)
def test_the_tightening_episode_adds_no_bias_to_the_mean_error(market: dm.DemoMarket, calm: dm.DemoMarket,
                                                              start: str, tenor: str, end: str) -> None:
    # the model is linear in its shocks: the same seed without the episode differs by the episode's
    # own response only, so the difference of the two mean errors is the bias the episode adds
    assert not np.allclose(calm.quotes["govt"], market.quotes["govt"])
    with_episode, _, err = _mean_error_band(market, "govt", start, tenor, end)
    without, _, err_calm = _mean_error_band(calm, "govt", start, tenor, end)
    assert abs(with_episode - without) < 0.25, (with_episode, without)
    assert np.abs(err - err_calm).max() > 50.0  # ... while single forecasts are far off


def test_without_a_premium_forwards_are_unbiased(market: dm.DemoMarket) -> None:
    flat = dataclasses.replace(market.params, tp_a=0.0, sp_a=0.0)
    m = dm.generate_market(market.seed, flat)
    for start, tenor, end in (("3M", "3M", "6M"), ("1Y", "1Y", "2Y"), ("2Y", "1Y", "3Y")):
        assert dm.expected_forward_error_bp(_MONTHS[start], _MONTHS[tenor], params=flat) == 0.0
        mean, se, _ = _mean_error_band(m, "govt", start, tenor, end)
        assert abs(mean) < 1.96 * se, (start, tenor, mean, se)


def test_premium_in_another_compounding_scales_to_first_order(market: dm.DemoMarket) -> None:
    # semiannual rates from the same node rates: m (e^{z/m} - 1); the error should scale by e^{r/2}
    semi = 2.0 * np.expm1(market.zero_cc["govt"] / 2.0)
    _, _, err_cc = _mean_error_band(market, "govt", "1Y", "1Y", "2Y")
    _, _, err_s = _mean_error_band(market, "govt", "1Y", "1Y", "2Y", zeros=semi)
    level = float(market.zero_cc["govt"]["1Y"].mean())
    ratio = dm.expected_forward_error_bp(12, 12, compounding="semiannual", level=level) / \
        dm.expected_forward_error_bp(12, 12)
    assert ratio == pytest.approx(math.exp(level / 2))
    assert err_s.mean() / err_cc.mean() == pytest.approx(ratio, rel=0.01)


@pytest.mark.parametrize(("start", "tenor"), [(0, 3), (0, 60), (3, 3), (12, 12), (60, 60)],
                         ids=["0Mx3M", "0Mx5Y", "3Mx3M", "1Yx1Y", "5Yx5Y"])
def test_premium_is_the_forward_premium_minus_the_spot_premium(start: int, tenor: int) -> None:
    # the premium of an instantaneous forward is d/du [u tp(u)]; integrating it numerically over the
    # forward's span and subtracting the realised zero's own premium must give the closed form
    s, m = start * 30.4375 / 365, tenor * 30.4375 / 365
    u = np.linspace(s, s + m, 20_001)
    inst = dm.term_premium(u) + u * (dm.DEFAULT_PARAMS.tp_a / dm.DEFAULT_PARAMS.tp_b) * np.exp(
        -u / dm.DEFAULT_PARAMS.tp_b)
    numeric = (np.trapezoid(inst, u) / m - float(dm.term_premium(m))) * 1e4
    assert dm.expected_forward_error_bp(start, tenor) == pytest.approx(numeric, abs=1e-6)
    if start == 0:
        assert dm.expected_forward_error_bp(start, tenor) == pytest.approx(0.0, abs=1e-9)
    else:
        assert 5.0 < dm.expected_forward_error_bp(start, tenor) < 150.0


def test_term_premium_is_small_at_the_short_end_and_about_140bp_at_10y() -> None:
    assert float(dm.term_premium(1 / 12)) * 1e4 < 5.0
    assert 100.0 < float(dm.term_premium(10.0)) * 1e4 < 150.0


# --- config ---------------------------------------------------------------------------------------


def test_config_parses_with_both_curves(tmp_path: Path, market: dm.DemoMarket) -> None:
    text = dm.demo_config_toml()
    (tmp_path / "afterward.toml").write_text(text, encoding="utf-8")
    cfg = load_config(tmp_path / "afterward.toml")
    assert cfg.store_path == tmp_path / "afterward.duckdb"
    assert cfg.inbox == tmp_path / "inbox" and cfg.loaded == tmp_path / "inbox" / "loaded"
    assert cfg.refused == tmp_path / "inbox" / "refused"
    govt, swap = cfg.curve("govt"), cfg.curve("swap")
    assert (govt.quote, govt.compounding, govt.day_count, govt.units, govt.interpolation) == (
        "par", "semiannual", "ACT/365F", "percent", "monotone_convex")
    assert (swap.quote, swap.compounding, swap.day_count, swap.units, swap.interpolation) == (
        "zero", "annual", "ACT/360", "decimal", "linear_zero")
    assert govt.tenor_labels == dm.GOVT_TENORS and swap.tenor_labels == dm.SWAP_TENORS
    assert govt.files == "govt_*.csv" and swap.files == "swap_*.parquet"
    for c in (govt, swap):
        assert [t.label for t in c.forward_starts] == ["0M", "3M", "6M", "1Y", "2Y", "3Y", "5Y"]
        assert [t.label for t in c.forward_tenors] == ["3M", "1Y", "2Y", "5Y"]
        assert c.tolerance_days == 3 and c.jump_bp == 75.0
        assert [(a.label, b.label) for a, b in c.inversion_pairs] == [("3M", "10Y"), ("2Y", "10Y")]
        # the configured calendar is the demo's calendar, out to the last 30-year maturity
        span = np.arange(np.datetime64("1996-01-01"), np.datetime64("2058-01-01"))
        assert np.array_equal(c.calendar.is_business_day(span), market.calendar.is_business_day(span))
    last = maturity_dates(market.days[-1:], "30Y", govt.calendar)[0]
    assert last <= np.datetime64(f"{dm.HOLIDAY_YEARS[1]}-12-31")
    # the same text through parse_config, with other paths
    other = dm.demo_config_toml(store="db/demo.duckdb", inbox="feed", loaded="feed/done", refused="feed/bad")
    cfg2 = parse_config(tomllib.loads(other), base=tmp_path)
    assert cfg2.store_path == tmp_path / "db" / "demo.duckdb" and cfg2.loaded == tmp_path / "feed" / "done"


def test_config_names_no_real_market() -> None:
    text = dm.demo_config_toml()
    assert "Orvane" in text
    for word in ("Treasury of the United", "Federal Reserve", "SOFR", "LIBOR", "EURIBOR", "USD", "EUR"):
        assert word not in text


# --- inputs are left alone --------------------------------------------------------------------------


def test_par_yields_do_not_mutate_their_inputs(market: dm.DemoMarket) -> None:
    days = market.days[:50].copy()
    before = days.copy()
    def flat(dates: np.ndarray) -> np.ndarray:
        return np.exp(-0.05 * (dates - days[:, None]).astype(int) / 365.0)

    out = dm.par_yields(days, "5Y", market.calendar, flat)
    assert np.array_equal(days, before)
    # a flat 5 % continuous curve: the semiannual par yield is close to 2 (e^{0.025} - 1)
    assert np.allclose(out, 2 * math.expm1(0.025), atol=2e-4)


def test_frames_are_aligned_and_complete(market: dm.DemoMarket) -> None:
    for curve, tenors in (("govt", dm.GOVT_TENORS), ("swap", dm.SWAP_TENORS)):
        for frame in (market.quotes[curve], market.zero_cc[curve]):
            assert list(frame.columns) == list(tenors)
            assert frame.index.name == "as_of" and len(frame) == market.days.size
            assert np.isfinite(frame.to_numpy()).all()
        assert market.maturities[curve].shape == (market.days.size, len(tenors))
    buf = io.StringIO()
    market.quotes["govt"].head(2).to_csv(buf)
    assert buf.getvalue().startswith("as_of,1M,3M")
