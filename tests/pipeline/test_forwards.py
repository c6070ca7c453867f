"""Zero-rate tables and forward surfaces: textbook forwards, the forward rules, and the frames' shape.

References: Hull's forward-rate tables and test-bank example (tests/REFERENCES.md #1-#4, seen; #1's
table layout from memory), the rule F = (r2 T2 - r1 T1) / (T2 - T1) and its discrete form
(1+R2)^T2 / (1+R1)^T1 = (1+F)^(T2-T1), QuantLib for a forward surface on a real calendar, and a plain
pandas recomputation of each forward from its two discount factors.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql

from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.dates import BusinessCalendar, maturity_dates
from pipeline.forwards import forward_surface, zero_rate_table
from pipeline.tenors import parse_tenor
from tests.quantlib_ref import ql_date

# 30/360 with no weekend makes the tenors exact multiples of a year, as in the textbook tables
EXACT = BusinessCalendar.of([])
AS_OF = np.array(["2031-01-15"], dtype="datetime64[D]")

HULL = [
    # (source, tenors, continuous zeros in %, forward start months, tenor months, published forwards %)
    ("tests/REFERENCES.md #1: Hull table 4.5 (8th ed.)", ["1Y", "2Y", "3Y", "4Y", "5Y"], [3.0, 4.0, 4.6, 5.0, 5.3],
     [12, 24, 36, 48], 12, [5.0, 5.8, 6.2, 6.5]),
    ("tests/REFERENCES.md #2: Hull problem 4.23 (11th ed.)", ["1Y", "2Y", "3Y", "4Y", "5Y"], [2.0, 3.0, 3.7, 4.2, 4.5],
     [12, 24, 36, 48], 12, [4.0, 5.1, 5.7, 5.7]),
    ("tests/REFERENCES.md #3: Hull quarterly problem", ["3M", "6M", "9M", "1Y", "15M", "18M"],
     [8.0, 8.2, 8.4, 8.5, 8.6, 8.7], [3, 6, 9, 12, 15], 3, [8.4, 8.8, 8.8, 9.0, 9.2]),
    ("tests/REFERENCES.md #4: Hull test bank", ["2Y", "3Y"], [6.0, 6.5], [24], 12, [7.5]),
]


@pytest.mark.parametrize("method", ["linear_zero", "log_linear_discount", "monotone_convex", "cubic_zero"],
                         ids=["linear_zero", "log_linear", "monotone_convex", "cubic_zero"])
@pytest.mark.parametrize(("source", "tenors", "zeros", "starts", "months", "published"), HULL,
                         ids=["hull-4.5", "hull-4.23", "hull-quarterly", "hull-test-bank"])
def test_textbook_forwards_from_zero_tables(source, tenors, zeros, starts, months, published, method):
    # forwards between nodes depend only on the node discount factors, whatever the method
    cfg = CurveConfig(name="h", quote="zero", compounding="continuous", day_count="30/360", calendar=EXACT)
    c = build_curves(AS_OF, tenors, np.array([zeros]) / 100, cfg, method=method)
    surface = forward_surface(c, cfg, starts=[f"{s}M" for s in starts], tenors=[f"{months}M"])
    got = surface["forward_rate_cc"].to_numpy() * 100
    # the rule (r2 T2 - r1 T1) / (T2 - T1) gives the published values exactly (to rounding)
    for s, exp, act in zip(starts, published, got, strict=True):
        assert abs(act - exp) < 1e-10, f"{source}, start {s}M: expected {exp}, actual {act}, diff {act - exp}"


def test_discrete_compounding_form_of_the_forward_rule():
    # source: tests/REFERENCES.md #4 values, discrete form (1+R2)^T2 / (1+R1)^T1 = (1+F)^(T2-T1)
    cfg = CurveConfig(name="h", quote="zero", compounding="annual", day_count="30/360", calendar=EXACT)
    c = build_curves(AS_OF, ["2Y", "3Y"], np.array([[0.06, 0.065]]), cfg, method="linear_zero")
    zeros = zero_rate_table(c, ["2Y", "3Y"], cfg)["zero_rate"].to_numpy()
    np.testing.assert_allclose(zeros, [0.06, 0.065], rtol=0, atol=1e-15)
    f = forward_surface(c, cfg, starts=["2Y"], tenors=["1Y"])["forward_rate"].iloc[0]
    expected = (1.065**3 / 1.06**2) - 1.0
    assert abs(f - expected) < 1e-14, f"expected {expected}, actual {f}, diff {f - expected}"


CAL = BusinessCalendar.of(["Sat", "Sun"], ["2032-12-27", "2033-01-31", "2036-06-30"])
TENORS = ["1M", "3M", "6M", "1Y", "2Y", "5Y", "10Y", "30Y"]
DAYS = np.array(["2031-12-31", "2032-01-30", "2032-06-29"], dtype="datetime64[D]")
QUOTES = np.array([
    [0.031, 0.032, 0.034, 0.036, 0.039, 0.043, 0.046, 0.048],
    [0.030, 0.031, np.nan, 0.035, 0.038, 0.042, 0.045, 0.047],
    [0.052, 0.050, 0.048, 0.045, 0.041, 0.039, 0.040, 0.041],
])


def _cfg(comp="semiannual", dc="ACT/ACT"):
    return CurveConfig(
        name="f", quote="zero", compounding=comp, day_count=dc, calendar=CAL,
        forward_starts=tuple(parse_tenor(x, allow_zero=True) for x in ["0M", "3M", "1Y", "5Y", "10Y"]),
        forward_tenors=tuple(parse_tenor(x) for x in ["3M", "1Y", "10Y"]),
    )


def test_forward_surface_frame_and_dates():
    cfg = _cfg()
    c = build_curves(DAYS, TENORS, QUOTES, cfg, method="monotone_convex")
    fs = forward_surface(c, cfg)
    assert list(fs.columns) == ["as_of", "start_months", "tenor_months", "start_date", "end_date",
                                "forward_rate", "forward_rate_cc"]
    assert len(fs) == 3 * 5 * 3
    assert not fs.duplicated(["as_of", "start_months", "tenor_months"]).any()
    # CONTRACT: start_date = roll(t + S months), end_date = roll(t + (S+M) months)
    for row in fs.sample(20, random_state=1).itertuples():
        day = np.datetime64(row.as_of, "D")
        exp_start = maturity_dates(day, parse_tenor(f"{row.start_months}M", allow_zero=True), CAL)
        exp_end = maturity_dates(day, parse_tenor(f"{row.start_months + row.tenor_months}M"), CAL)
        assert np.datetime64(row.start_date, "D") == exp_start and np.datetime64(row.end_date, "D") == exp_end


def test_each_forward_is_the_ratio_of_its_discount_factors():
    # plain pandas recomputation: D(start)/D(end) from the zero table of the same curve
    cfg = _cfg("quarterly", "ACT/365F")
    c = build_curves(DAYS, TENORS, QUOTES, cfg, method="linear_zero")
    fs = forward_surface(c, cfg)
    t1 = (fs["start_date"] - fs["as_of"]).dt.days.to_numpy() / 365.0
    t2 = (fs["end_date"] - fs["as_of"]).dt.days.to_numpy() / 365.0
    day_idx = pd.Index(DAYS.astype("datetime64[s]")).get_indexer(fs["as_of"])
    rows_t1 = np.zeros((len(DAYS), len(fs)))
    rows_t2 = np.zeros((len(DAYS), len(fs)))
    rows_t1[day_idx, np.arange(len(fs))] = t1
    rows_t2[day_idx, np.arange(len(fs))] = t2
    d1 = c.discount(rows_t1)[day_idx, np.arange(len(fs))]
    d2 = c.discount(rows_t2)[day_idx, np.arange(len(fs))]
    tau = t2 - t1
    expected = 4 * ((d1 / d2) ** (1 / (4 * tau)) - 1)
    np.testing.assert_allclose(fs["forward_rate"].to_numpy(), expected, rtol=0, atol=1e-13)
    np.testing.assert_allclose(fs["forward_rate_cc"].to_numpy(), np.log(d1 / d2) / tau, rtol=0, atol=1e-13)


_ql = ql_date


def test_forward_surface_matches_quantlib_zero_curve():
    # source: QuantLib ZeroCurve (Linear, Continuous) + forwardRate(d1, d2, dc, Compounded, Semiannual)
    cfg = _cfg("semiannual", "ACT/ACT")
    ccfg = CurveConfig(name="f", quote="zero", compounding="continuous", day_count="ACT/ACT", calendar=CAL)
    c = build_curves(DAYS, TENORS, QUOTES, ccfg, method="linear_zero")
    fs = forward_surface(c, cfg)
    qcal = ql.BespokeCalendar("forwards-test")
    qcal.addWeekend(ql.Saturday)
    qcal.addWeekend(ql.Sunday)
    for h in CAL.holidays:
        qcal.addHoliday(_ql(h))
    dc = ql.ActualActual(ql.ActualActual.ISDA)
    for i, day in enumerate(DAYS):
        ref = _ql(day)
        have = ~np.isnan(QUOTES[i])
        dates = [qcal.advance(ref, ql.Period(parse_tenor(t).months, ql.Months), ql.ModifiedFollowing)
                 for t, h in zip(TENORS, have, strict=True) if h]
        rates = list(QUOTES[i][have])
        curve = ql.ZeroCurve([ref] + dates, [rates[0]] + rates, dc, qcal, ql.Linear(), ql.Continuous)
        curve.enableExtrapolation()
        for row in fs[fs["as_of"] == pd.Timestamp(day)].itertuples():
            a, b = _ql(np.datetime64(row.start_date, "D")), _ql(np.datetime64(row.end_date, "D"))
            expected = curve.forwardRate(a, b, dc, ql.Compounded, ql.Semiannual).rate()
            assert abs(row.forward_rate - expected) < 1e-10, (
                f"{day} {row.start_months}x{row.tenor_months}: expected {expected}, actual {row.forward_rate}, "
                f"diff {row.forward_rate - expected}")


def test_zero_rate_table_frame():
    cfg = _cfg("annual", "ACT/365F")
    tenors = ["ON", "1W"] + TENORS
    q = np.column_stack([QUOTES[:, :1], QUOTES[:, :1], QUOTES])
    c = build_curves(DAYS, tenors, q, cfg, method="log_linear_discount")
    zt = zero_rate_table(c, tenors, cfg)
    assert list(zt.columns) == ["as_of", "tenor", "tenor_months", "maturity_date", "year_fraction", "zero_rate",
                                "zero_rate_cc", "discount_factor"]
    assert str(zt["tenor_months"].dtype) == "Int64"
    assert zt["tenor_months"].isna().sum() == 2 * len(DAYS)
    assert zt["tenor"].tolist()[:4] == ["ON", "1W", "1M", "3M"]
    have = ~np.isnan(q)
    np.testing.assert_allclose(zt["zero_rate"].to_numpy()[have.reshape(-1)], q[have], rtol=0, atol=1e-14)
    # discount factor and zero rate agree under the curve's compounding and day count
    implied = (1 + zt["zero_rate"]) ** (-zt["year_fraction"])
    np.testing.assert_allclose(zt["discount_factor"], implied, rtol=0, atol=1e-15)


def test_days_not_built_are_left_out():
    cfg = _cfg()
    q = QUOTES.copy()
    q[1, 1:] = np.nan
    c = build_curves(DAYS, TENORS, q, cfg, method="linear_zero")
    fs = forward_surface(c, cfg)
    zt = zero_rate_table(c, TENORS, cfg)
    assert set(fs["as_of"]) == set(zt["as_of"]) == {pd.Timestamp(DAYS[0]), pd.Timestamp(DAYS[2])}
