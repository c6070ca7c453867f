"""A money-market curve with the short end (ON, TN, SN, 1W), a spot lag and a title line, loaded and
built by the real steps into a real DuckDB file: `ORDER BY tenor_months` sorts tenors by maturity."""

from __future__ import annotations

import textwrap

import duckdb
import numpy as np
import pytest
import QuantLib as ql

from flows.build_step import run_build
from flows.load_step import load_files
from pipeline.config import load_config
from tests.quantlib_ref import np_date, ql_date

CONFIG = textwrap.dedent("""
    [store]
    path = "store.duckdb"

    [curves.mm]
    files = "mm_*.csv"
    quote = "simple"
    compounding = "continuous"
    day_count = "ACT/360"
    units = "percent"
    interpolation = "linear_zero"
    spot_days = 2
    tenors = ["ON", "TN", "SN", "1W", "1M", "1Y", "10Y"]
    read.skip_rows = 1
    forward.starts = ["0M", "1M"]
    forward.tenors = ["1M", "1Y"]
""")
# invented rates; the columns in file order are deliberately not in maturity order
FILE = ("Invented money-market fixings, percent\n"
        "date,10Y,1M,ON,1W,1Y,SN,TN\n"
        "2031-01-02,4.60,4.05,3.98,4.01,4.30,4.00,3.99\n"
        "2031-01-03,4.61,N/A,3.97,4.02,4.31,4.00,3.99\n")


@pytest.fixture(scope="module")
def store(tmp_path_factory):  # noqa: ANN201
    root = tmp_path_factory.mktemp("mm")
    (root / "afterward.toml").write_text(CONFIG, encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    f = root / "mm_2031-01.csv"
    f.write_text(FILE, encoding="utf-8")
    [out] = load_files(cfg, [f])
    assert (out.status, out.rows_read, out.rows_accepted, out.rows_rejected) == ("loaded", 13, 13, 0), out
    run_build(cfg)
    return cfg


def _q(cfg, sql: str) -> list[tuple]:  # noqa: ANN001
    with duckdb.connect(str(cfg.store_path), read_only=True) as con:
        return con.execute(sql).fetchall()


EXPECTED = ["ON", "TN", "SN", "1W", "1M", "1Y", "10Y"]


@pytest.mark.parametrize("view", ["quotes", "quote_history", "zero_rates"])
def test_order_by_tenor_months_sorts_by_maturity(store, view):
    got = [r[0] for r in _q(store, f"SELECT tenor FROM {view} WHERE as_of = DATE '2031-01-02' ORDER BY tenor_months")]
    assert got == EXPECTED
    # as text the labels sort otherwise (10Y before 1M): the column is what makes the order right
    assert [r[0] for r in _q(store, f"SELECT tenor FROM {view} WHERE as_of = DATE '2031-01-02' ORDER BY tenor")] != got


def test_tenor_months_values_and_column_order(store):
    rows = dict(_q(store, "SELECT tenor, tenor_months FROM quotes WHERE as_of = DATE '2031-01-02'"))
    # README: whole months for M/Y; nominal days / 30.4375 for the rest (by hand: 7 / 30.4375 = 0.229979...)
    assert rows["1M"] == 1.0 and rows["1Y"] == 12.0 and rows["10Y"] == 120.0
    assert rows["1W"] == pytest.approx(7 / 30.4375, abs=1e-15) and rows["ON"] == pytest.approx(1 / 30.4375, abs=1e-15)
    cols = [r[0] for r in _q(store, "DESCRIBE quotes")]
    assert cols == ["curve", "as_of", "tenor", "maturity_date", "rate", "recorded_at", "source_file", "tenor_months"]
    cols = [r[0] for r in _q(store, "DESCRIBE zero_rates")]
    assert cols == ["curve", "as_of", "tenor", "maturity_date", "year_fraction", "zero_rate", "zero_rate_cc",
                    "discount_factor", "tenor_months"]
    cols = [r[0] for r in _q(store, "DESCRIBE SELECT * FROM quotes_as_of(TIMESTAMP '2999-01-01')")]
    assert cols[-1] == "tenor_months" and cols[:-1] == ["curve", "as_of", "tenor", "maturity_date", "rate",
                                                        "recorded_at", "source_file"]
    n = _q(store, "SELECT count(*) FROM quotes_as_of(TIMESTAMP '2999-01-01') WHERE tenor_months IS NOT NULL")[0][0]
    assert n == 13


def test_a_missing_marker_is_no_row_and_the_title_line_was_skipped(store):
    assert _q(store, "SELECT count(*) FROM quotes WHERE as_of = DATE '2031-01-03' AND tenor = '1M'")[0][0] == 0
    assert _q(store, "SELECT count(*) FROM rejected_rows")[0][0] == 0


def test_stored_maturities_follow_the_spot_lag_as_quantlib(store):
    # source: QuantLib Calendar.advance on a weekends-only calendar: spot = as-of + 2 business days;
    # ON/TN from the as-of date, SN = spot + 1 business day, 1W/1M/1Y/10Y from spot, modified following
    cal = ql.WeekendsOnly()
    d = ql_date("2031-01-02")
    spot = cal.advance(d, 2, ql.Days)
    want = {"ON": cal.advance(d, 1, ql.Days), "TN": cal.advance(d, 2, ql.Days), "SN": cal.advance(spot, 1, ql.Days)}
    for label, period in (("1W", ql.Period(1, ql.Weeks)), ("1M", ql.Period(1, ql.Months)),
                          ("1Y", ql.Period(1, ql.Years)), ("10Y", ql.Period(10, ql.Years))):
        want[label] = cal.advance(spot, period, ql.ModifiedFollowing, False)
    for view in ("quotes", "zero_rates"):
        got = dict(_q(store, f"SELECT tenor, maturity_date FROM {view} WHERE as_of = DATE '2031-01-02'"))
        assert {k: np.datetime64(v, "D") for k, v in got.items()} == {k: np_date(v) for k, v in want.items()}, view
    # the curve's year fractions still run from the as-of date: ACT/360 days from 2 Jan
    yf = dict(_q(store, "SELECT tenor, year_fraction FROM zero_rates WHERE as_of = DATE '2031-01-02'"))
    assert yf["TN"] == pytest.approx(4 / 360, abs=1e-15)      # Thu 2 Jan -> Mon 6 Jan
