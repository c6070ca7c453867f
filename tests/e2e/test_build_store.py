"""Building through the store: zero curves and forward surfaces as `afterward build` leaves them.

Independent references: QuantLib 1.4x (ZeroCurve with Linear interpolation of continuous zero rates,
DiscountCurve with LogLinear discount factors, BespokeCalendar with ModifiedFollowing month
arithmetic, Actual365Fixed) built from what the store holds; plain ACT/365F arithmetic; and the rule
that a zero-quoted curve's zero rate at a quoted tenor is the quote itself.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql

from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from tests.e2e.stores import Project, clone_project, make_project, write_wide_csv
from tests.quantlib_ref import ql_calendar, ql_date

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y"]
HOLIDAYS = ["2031-12-25", "2031-12-26", "2032-01-01", "2032-03-01", "2032-04-30", "2037-01-01"]
STARTS = ["0M", "3M", "6M", "1Y", "2Y"]
FWD_TENORS = ["3M", "6M", "1Y", "2Y"]  # the longest forward ends at 4Y, inside the last node


def _toml(interpolation: str = "linear_zero") -> str:
    q = ", ".join(f'"{t}"' for t in TENORS)
    return f"""
[store]
path = "store.duckdb"

[curves.zc]
files = "zc_*.csv"
quote = "zero"
compounding = "annual"
day_count = "ACT/365F"
units = "percent"
interpolation = "{interpolation}"
tenors = [{q}]
calendar.weekend = ["Sat", "Sun"]
calendar.holidays = [{", ".join(f'"{h}"' for h in HOLIDAYS)}]
forward.starts = [{", ".join(f'"{s}"' for s in STARTS)}]
forward.tenors = [{", ".join(f'"{t}"' for t in FWD_TENORS)}]
checks.jump_bp = 500
"""


def _days(first: str, last: str) -> np.ndarray:
    span = np.arange(np.datetime64(first), np.datetime64(last) + 1)
    return span[np.is_busday(span, holidays=HOLIDAYS)]


def _rates(n: int, seed: int) -> np.ndarray:
    """Upward-sloping curves in percent with a random daily wiggle (positive, never flat)."""
    rng = np.random.default_rng(seed)
    base = np.array([3.10, 3.22, 3.35, 3.50, 3.71, 3.86, 4.05])
    level = np.cumsum(rng.normal(0, 0.03, n))[:, None]
    slope = np.cumsum(rng.normal(0, 0.01, n))[:, None] * np.linspace(-1, 1, len(base))[None, :]
    return np.round(base[None, :] + level + slope, 4)


DAYS = _days("2031-12-01", "2032-03-31")
RATES = _rates(len(DAYS), 7)
LATER = _days("2032-04-01", "2032-04-09")
LATER_RATES = _rates(len(DAYS) + len(LATER), 7)[len(DAYS):]


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> Project:
    p = make_project(tmp_path_factory.mktemp("build"), _toml())
    for month in ("2031-12", "2032-01", "2032-02", "2032-03"):
        sel = DAYS.astype("datetime64[M]") == np.datetime64(month)
        write_wide_csv(p.root / f"zc_{month}.csv", DAYS[sel], TENORS, RATES[sel], "%.4f")
    load_files(p.cfg, sorted(p.root.glob("zc_*.csv")))
    run_checks(p.cfg)
    summary = run_build(p.cfg)
    assert summary.curves["zc"]["days_built"] == len(DAYS)
    return p


_ql_date = ql_date
QL_CAL = ql_calendar("e2e-build", holidays=HOLIDAYS)
DC = ql.Actual365Fixed()


def test_zero_rates_at_quoted_tenors_are_the_quotes(built):
    """A zero-quoted curve reprices its inputs: stored zero_rate = quote; plain ACT/365F year
    fractions; discount factors (1 + r)^-t (annual compounding)."""
    z = built.sql("SELECT z.*, q.rate, q.maturity_date AS quote_maturity FROM zero_rates z JOIN quotes q "
                  "USING (curve, as_of, tenor)")
    assert len(z) == len(DAYS) * len(TENORS)
    np.testing.assert_allclose(z["zero_rate"], z["rate"], rtol=0, atol=1e-12)
    assert (z["maturity_date"] == z["quote_maturity"]).all()
    days = (pd.to_datetime(z["maturity_date"]) - pd.to_datetime(z["as_of"])).dt.days
    np.testing.assert_allclose(z["year_fraction"], days / 365.0, rtol=0, atol=1e-15)
    np.testing.assert_allclose(z["discount_factor"], (1 + z["rate"]) ** -z["year_fraction"], rtol=1e-13)
    np.testing.assert_allclose(z["zero_rate_cc"], np.log1p(z["rate"]), rtol=0, atol=1e-13)
    # data test next to the views: 0 < D <= 1 for positive rates
    assert built.sql("SELECT * FROM zero_rates WHERE NOT (discount_factor > 0 AND discount_factor <= 1)").empty


def test_forwards_equal_quantlib_zero_curve_of_the_stored_zero_rates(built):
    """linear_zero: every stored forward equals QuantLib's ZeroCurve (Linear on continuous zero
    rates, flat before the first node) of the stored zero rates, to 1e-10; its dates equal
    QuantLib's ModifiedFollowing month arithmetic on the same holidays."""
    z = built.sql("SELECT as_of, maturity_date, zero_rate_cc FROM zero_rates ORDER BY as_of, maturity_date")
    f = built.sql("SELECT * FROM forwards ORDER BY as_of, start_months, tenor_months")
    assert len(f) == len(DAYS) * len(STARTS) * len(FWD_TENORS)
    worst = 0.0
    for as_of, nodes in z.groupby("as_of"):
        ref = _ql_date(as_of)
        dates = [ref] + [_ql_date(d) for d in nodes["maturity_date"]]
        rates = [float(nodes["zero_rate_cc"].iloc[0]), *map(float, nodes["zero_rate_cc"])]
        curve = ql.ZeroCurve(dates, rates, DC, QL_CAL, ql.Linear(), ql.Continuous)
        for r in f[f["as_of"] == as_of].itertuples():
            start = QL_CAL.advance(ref, ql.Period(int(r.start_months), ql.Months), ql.ModifiedFollowing, False)
            end = QL_CAL.advance(ref, ql.Period(int(r.start_months + r.tenor_months), ql.Months),
                                 ql.ModifiedFollowing, False)
            assert (_ql_date(r.start_date), _ql_date(r.end_date)) == (start, end)
            qf = curve.forwardRate(start, end, DC, ql.Compounded, ql.Annual).rate()
            qc = curve.forwardRate(start, end, DC, ql.Continuous, ql.NoFrequency).rate()
            worst = max(worst, abs(r.forward_rate - qf), abs(r.forward_rate_cc - qc))
    assert worst < 1e-10, worst


# one row per forward whose start and end fall on quoted maturities (or on the as-of date itself,
# where D = 1), beside the continuous rate implied by the ratio of the two discount factors
ON_NODES = """
WITH d AS (
    SELECT curve, as_of, as_of AS maturity_date, 1.0 AS discount_factor FROM built_day WHERE scenario = 'official'
    UNION ALL SELECT curve, as_of, maturity_date, discount_factor FROM zero_rates
)
SELECT f.*, ln(ds.discount_factor / de.discount_factor) / (date_diff('day', f.start_date, f.end_date) / 365.0)
           AS from_ratio
FROM forwards f
JOIN d ds ON ds.curve = f.curve AND ds.as_of = f.as_of AND ds.maturity_date = f.start_date
JOIN d de ON de.curve = f.curve AND de.as_of = f.as_of AND de.maturity_date = f.end_date
"""
# the data test: rows that break the rule
BROKEN = f"""SELECT * FROM ({ON_NODES}) WHERE abs(forward_rate_cc - from_ratio) > 1e-12
                                       OR abs(exp(forward_rate_cc) - 1 - forward_rate) > 1e-12"""


def test_every_forward_is_the_ratio_of_its_discount_factors(built):
    """Data test in SQL (ACT/365F by hand): forwards between quoted maturities equal
    ln(D(start) / D(end)) / tau, and the annual rate is exp(cc) - 1 over the same tau."""
    assert built.sql(BROKEN).empty
    # S+M on a quoted tenor: 0+3M, 0+6M, 0+1Y, 0+2Y, 3M+3M, 6M+6M, 1Y+1Y, 1Y+2Y, 2Y+1Y
    assert len(built.sql(ON_NODES)) == len(DAYS) * 9


def test_rebuild_after_a_method_change_records_the_new_method(built, tmp_path):
    p = clone_project(built, tmp_path / "rebuilt", _toml("cubic_zero"))
    before = p.sql("SELECT as_of, start_months, tenor_months, forward_rate FROM forwards")
    assert set(p.sql("SELECT DISTINCT method FROM built_day")["method"]) == {"linear_zero"}
    assert run_build(p.cfg).curves["zc"]["days_built"] == 0  # nothing new: no rebuild without --rebuild
    s = run_build(p.cfg, rebuild=True)
    assert s.curves["zc"]["days_built"] == len(DAYS) and s.curves["zc"]["method"] == "cubic_zero"
    assert set(p.sql("SELECT DISTINCT method FROM built_day WHERE scenario = 'official'")["method"]) == {"cubic_zero"}
    assert set(p.sql("SELECT DISTINCT method FROM forward_built WHERE scenario = 'official'")["method"]) == {
        "cubic_zero"}
    assert p.sql("SELECT DISTINCT code_version FROM built_day")["code_version"].str.startswith("afterward").all()
    after = p.sql("SELECT as_of, start_months, tenor_months, forward_rate FROM forwards")
    m = before.merge(after, on=["as_of", "start_months", "tenor_months"], suffixes=("_old", "_new"))
    assert len(m) == len(before)
    assert (m["forward_rate_old"] - m["forward_rate_new"]).abs().max() > 1e-6  # the method did change them
    # a spline through the nodes still reprices them
    z = p.sql("SELECT z.zero_rate, q.rate FROM zero_rates z JOIN quotes q USING (curve, as_of, tenor)")
    np.testing.assert_allclose(z["zero_rate"], z["rate"], rtol=0, atol=1e-12)


def test_what_if_method_writes_a_scenario_and_leaves_the_official_surface(built, tmp_path):
    p = clone_project(built, tmp_path / "whatif")
    official = p.sql("SELECT * FROM forward_built WHERE scenario = 'official' ORDER BY ALL")
    s = run_build(p.cfg, method="log_linear_discount")
    assert s.curves["zc"]["scenario"] == "what-if:log_linear_discount"
    assert s.curves["zc"]["days_built"] == len(DAYS)
    assert p.sql("SELECT * FROM forward_built WHERE scenario = 'official' ORDER BY ALL").equals(official)
    assert p.value("SELECT count(*) FROM forwards") == len(official)
    w = p.sql("SELECT * FROM forward_built WHERE scenario = 'what-if:log_linear_discount' ORDER BY as_of, "
              "start_months, tenor_months")
    assert len(w) == len(official) and set(w["method"]) == {"log_linear_discount"}
    # QuantLib reference for the what-if: DiscountCurve (LogLinear) through the stored discount factors
    z = p.sql("SELECT as_of, maturity_date, discount_factor FROM zero_rates ORDER BY as_of, maturity_date")
    worst = 0.0
    sample = sorted(set(z["as_of"]))[::9]
    for as_of in sample:
        nodes = z[z["as_of"] == as_of]
        ref = _ql_date(as_of)
        curve = ql.DiscountCurve([ref] + [_ql_date(d) for d in nodes["maturity_date"]],
                                 [1.0, *map(float, nodes["discount_factor"])], DC, QL_CAL)
        for r in w[w["as_of"] == as_of].itertuples():
            qf = curve.forwardRate(_ql_date(r.start_date), _ql_date(r.end_date), DC, ql.Compounded, ql.Annual).rate()
            worst = max(worst, abs(r.forward_rate - qf))
    assert worst < 1e-10, worst


def test_incremental_build_takes_only_new_and_restated_days(built, tmp_path):
    p = clone_project(built, tmp_path / "incremental")
    stamps = p.sql("SELECT as_of, built_at FROM built_day WHERE scenario = 'official'")
    write_wide_csv(p.root / "zc_2032-04.csv", LATER, TENORS, LATER_RATES, "%.4f")
    load_files(p.cfg, [p.root / "zc_2032-04.csv"])
    s = run_build(p.cfg)
    assert s.curves["zc"]["days_built"] == len(LATER)
    after = p.sql("SELECT as_of, built_at FROM built_day WHERE scenario = 'official'")
    old = after.merge(stamps, on="as_of", suffixes=("", "_before"))
    assert len(old) == len(DAYS) and (old["built_at"] == old["built_at_before"]).all()
    assert p.value("SELECT count(*) FROM forwards WHERE as_of >= DATE '2032-04-01'") == len(LATER) * len(STARTS) * len(
        FWD_TENORS)
    # a restated day is rebuilt, alone
    day = DAYS[10]
    row = RATES[10].copy()
    row[3] += 0.05
    write_wide_csv(p.root / "zc_restated.csv", [day], TENORS, row[None, :], "%.4f")
    load_files(p.cfg, [p.root / "zc_restated.csv"])
    s = run_build(p.cfg)
    assert s.curves["zc"]["days_built"] == 1
    z = p.value("SELECT zero_rate FROM zero_rates WHERE as_of = ? AND tenor = '1Y'", [str(day)])
    assert z == pytest.approx(row[3] / 100, abs=1e-12)


def test_a_curve_with_a_negative_forward_is_flagged_after_build(tmp_path):
    """negative_forward and non_monotone_discount cannot fire on the demo: a curve whose zero rates
    fall from 5 % at 1Y to 1 % at 2Y has, by the continuous rule (r2 T2 - r1 T1) / (T2 - T1),
    a forward of about -3 % between them while every rate is positive."""
    toml = _toml().replace('checks.jump_bp = 500', 'checks.jump_bp = 5000')
    p = make_project(tmp_path / "negfwd", toml)
    days = np.array(["2032-02-02", "2032-02-03"], dtype="datetime64[D]")
    rates = np.array([[3.0, 3.2, 3.4, 3.6, 3.8, 4.0, 4.2],
                      [4.0, 4.5, 4.8, 5.0, 1.0, 1.5, 2.0]])
    write_wide_csv(p.root / "zc_2032-02.csv", days, TENORS, rates, "%.4f")
    load_files(p.cfg, [p.root / "zc_2032-02.csv"])
    run_checks(p.cfg)
    s = run_build(p.cfg)
    assert s.curves["zc"]["days_built"] == 2  # the shape checks warn by default: the day is built
    f = p.sql("SELECT as_of, check_name, severity FROM findings WHERE check_name IN "
              "('negative_forward', 'non_monotone_discount') ORDER BY check_name")
    assert list(f["check_name"]) == ["negative_forward", "non_monotone_discount"]
    assert set(f["as_of"]) == {dt.date(2032, 2, 3)} and set(f["severity"]) == {"warn"}
    fw = p.value("SELECT forward_rate_cc FROM forwards WHERE as_of = DATE '2032-02-03' AND start_months = 12 "
                 "AND tenor_months = 12")
    assert fw < -0.02
