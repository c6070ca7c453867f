"""The month-end panel: rates read at exact n/12-year times, the last built day of each month, gaps named.

Independent references: QuantLib 1.4x ``ZeroCurve`` (``Linear`` on continuous zero rates, the same
nodes on QuantLib's own calendar and day counter) for the rates; pandas ``groupby(...).tail(1)`` over
calendar months for which day is each month's row.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql

from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.dates import BusinessCalendar
from pipeline.tenors import parse_tenor
from pipeline.term_structure import (
    TERM_PANEL_COLUMNS,
    ModelInputError,
    longest_tenor_months,
    term_panel,
    term_panel_from_yields,
)
from tests.quantlib_ref import ql_calendar, ql_date

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y"]
HOLIDAYS = ["2032-01-01", "2032-02-27", "2032-03-31"]
CAL = BusinessCalendar.of(["Sat", "Sun"], HOLIDAYS)
QL_CAL = ql_calendar("panel-test", holidays=HOLIDAYS)


def _quotes(days: np.ndarray) -> np.ndarray:
    """Annual-compounding zero quotes (decimals) drifting day by day, upward sloping."""
    i = np.arange(days.size)[:, None]
    months = np.array([parse_tenor(t).months for t in TENORS])[None, :]
    return 0.03 + 0.004 * np.log1p(months / 3.0) + 2e-5 * i - 1e-6 * i * np.sqrt(months)


def _cfg() -> CurveConfig:
    return CurveConfig(name="p", quote="zero", compounding="annual", day_count="ACT/360", interpolation="linear_zero",
                       calendar=CAL, tenors=tuple(parse_tenor(t) for t in TENORS))


def test_rates_at_whole_months_match_quantlib_zero_curve():
    days = CAL.business_days("2032-01-02", "2032-04-30")
    q = _quotes(days)
    cs = build_curves(days, TENORS, q, _cfg())
    panel = term_panel(cs, longest_tenor_months(TENORS), max_months=120, curve="p")
    assert panel.max_months == 60  # N is capped at the longest quoted tenor (5Y)
    assert list(panel.as_of.astype(str)) == ["2032-01-30", "2032-02-26", "2032-03-30", "2032-04-30"]
    dc = ql.Actual360()
    for row, day in enumerate(panel.as_of):
        i = int(np.flatnonzero(days == day)[0])
        ref = ql_date(day)
        dates, rates = [], []
        for label, rate in zip(TENORS, q[i], strict=True):
            d = QL_CAL.advance(ref, ql.Period(parse_tenor(label).months, ql.Months), ql.ModifiedFollowing, False)
            tau = dc.yearFraction(ref, d)
            dates.append(d)
            rates.append(ql.InterestRate(rate, dc, ql.Compounded, ql.Annual)
                         .equivalentRate(ql.Continuous, ql.NoFrequency, tau).rate())
        # a node at the reference date with the first rate: flat zero rate before the first node
        curve = ql.ZeroCurve([ref] + dates, [rates[0]] + rates, dc, QL_CAL, ql.Linear(), ql.Continuous)
        curve.enableExtrapolation()
        expected = [curve.zeroRate(n / 12.0, ql.Continuous).rate() for n in range(1, 61)]
        np.testing.assert_allclose(panel.zero_cc[row], expected, rtol=0, atol=1e-12)


def _month_panel_inputs():
    days = CAL.business_days("2032-01-02", "2032-06-18")
    keep = (days.astype("datetime64[M]") != np.datetime64("2032-03"))  # March: no built day at all
    keep &= ~((days >= np.datetime64("2032-04-28")) & (days <= np.datetime64("2032-04-30")))  # April's end missing
    days = days[keep]
    q = _quotes(days)
    q[days == np.datetime64("2032-05-31")] = np.nan  # a day that cannot be built (no usable quote)
    return days, q


def test_each_month_is_its_last_built_day_and_gaps_are_named():
    days, q = _month_panel_inputs()
    cs = build_curves(days, TENORS, q, _cfg())
    assert not cs.ok[days == np.datetime64("2032-05-31")].any()
    panel = term_panel(cs, 60, max_months=24, curve="p")
    # pandas as the independent reader: the last built day of each calendar month
    built = pd.Series(days[cs.ok]).astype("datetime64[s]")
    expected = built.groupby(built.dt.to_period("M")).tail(1).to_numpy().astype("datetime64[D]")
    np.testing.assert_array_equal(panel.as_of, expected)
    assert list(panel.as_of.astype(str)) == ["2032-01-30", "2032-02-26", "2032-04-27", "2032-05-28", "2032-06-18"]
    assert panel.skipped_months == ("2032-03",)
    assert panel.open_month is None
    np.testing.assert_array_equal(panel.follows(), [True, False, True, True])
    # daily values keep every built day
    np.testing.assert_array_equal(panel.days, days[cs.ok])
    assert panel.zero_cc.shape == (5, 24) and panel.daily_zero_cc.shape == (int(cs.ok.sum()), 24)


def test_a_month_in_progress_waits_until_it_closes():
    days, q = _month_panel_inputs()
    cs = build_curves(days, TENORS, q, _cfg())
    panel = term_panel(cs, 60, max_months=24, curve="p", calendar=CAL)
    # 18 June is not June's last business day (30 June): June has not closed
    assert panel.open_month == "2032-06"
    assert list(panel.as_of.astype(str))[-1] == "2032-05-28"
    assert panel.days[-1] == np.datetime64("2032-06-18")  # its days still have daily values
    # a month whose last days are missing but which a later month follows has closed (April)
    assert np.datetime64("2032-04-27") in panel.as_of


def test_monthly_curve_keeps_every_observation():
    days = CAL.month_ends("2030-01-01", "2032-12-31")
    cs = build_curves(days, TENORS, _quotes(days), _cfg())
    panel = term_panel(cs, 60, curve="m", calendar=CAL)
    np.testing.assert_array_equal(panel.as_of, days)
    assert panel.skipped_months == () and panel.open_month is None


def test_frame_has_the_view_columns():
    days = CAL.month_ends("2032-01-01", "2032-03-31")
    y = np.linspace(0.01, 0.05, 3 * 4).reshape(3, 4)
    frame = term_panel_from_yields(days, y, "c").frame()
    assert tuple(frame.columns) == TERM_PANEL_COLUMNS
    assert len(frame) == 12
    np.testing.assert_array_equal(frame["maturity_months"], np.tile([1, 2, 3, 4], 3))
    np.testing.assert_array_equal(frame["zero_rate_cc"], y.reshape(-1))
    np.testing.assert_array_equal(frame["as_of"].to_numpy().astype("datetime64[D]"), np.repeat(days, 4))


@pytest.mark.parametrize("tenors, expected", [(["1W", "3M", "10Y"], 120), (["ON", "1W", "18M"], 18),
                                              (["2D", "1W"], 0)], ids=["years", "months", "days-only"])
def test_longest_tenor_months(tenors, expected):
    assert longest_tenor_months(tenors) == expected


def test_no_monthly_tenor_is_a_one_line_refusal():
    days = CAL.month_ends("2032-01-01", "2032-03-31")
    cs = build_curves(days, ["1W", "2W"], np.full((3, 2), 0.02),
                      CurveConfig(name="w", quote="zero", compounding="annual", calendar=CAL,
                                  interpolation="linear_zero"))
    with pytest.raises(ModelInputError, match="no tenor of a month or longer") as err:
        term_panel(cs, longest_tenor_months(["1W", "2W"]), curve="w")
    assert "\n" not in str(err.value)
