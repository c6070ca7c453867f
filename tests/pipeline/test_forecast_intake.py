"""The pure forecast-file reader and intake (pipeline/forecast_intake.py), and the demo's desk view.

The rules checked are the project's own (the forecast-contender issue; the quotes' reader and intake
conventions); no outside source is involved. The desk view's statistics are checked against plain
numpy least squares on the frame it returns.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from pipeline.config import load_config
from pipeline.demo.desk_view import INFORMED_SHARE, NOISE_BP, desk_view_csv, desk_view_forecasts
from pipeline.forecast_intake import prepare_forecasts, read_forecast_file
from tests.conftest import SMALL_CONFIG


@pytest.fixture
def cfg(tmp_path):
    (tmp_path / "afterward.toml").write_text(SMALL_CONFIG, encoding="utf-8")
    return load_config(tmp_path / "afterward.toml")


def _csv(lines: list[str], header: str = "as_of,start,tenor,rate,curve") -> bytes:
    return (header + "\n" + "\n".join(lines) + "\n").encode()


def _intake(data: bytes, cfg, curve=None, units=None, name="f.csv"):  # noqa: ANN001, ANN202
    return prepare_forecasts(read_forecast_file(data, name), cfg, curve, units)


def test_every_line_with_a_rate_is_accepted_or_rejected_once(cfg):
    lines = [
        "2031-01-02,1Y,1Y,4.1,govt",        # accepted
        "2031-01-02,0M,3M,4.0,govt",        # accepted: a start of 0M is today's rate
        "2031-01-02,1Y,1Y,,govt",           # no rate: no forecast, no row
        "2031-01-02,1Y,1Y,N/A,govt",        # a missing marker: likewise
        "2031-13-02,1Y,1Y,4.1,govt",        # unparseable date
        "2031-01-02,later,1Y,4.1,govt",     # unparseable start
        "2031-01-02,1Y,0M,4.1,govt",        # a tenor of zero is no tenor
        "2031-01-02,1W,1Y,4.1,govt",        # a start in weeks is not whole months
        "2031-01-02,1Y,1Y,4.1x,govt",       # unparseable rate
        "2031-01-02,1Y,1Y,4.1,govt,extra",  # more fields than the header
        "2031-01-02,2Y,1Y,4e5,govt",        # out of range
        "2031-01-02,2Y,1Y,0.041,swap",      # accepted (swap is in decimals)
        "2031-01-02,2Y,1Y,0.041,moon",      # unknown curve
    ]
    it = _intake(_csv(lines), cfg)
    assert it.rows_read == len(lines) - 2
    assert sorted(it.rows["line"].tolist()) == [2, 3, 13]
    assert it.rejected["line"].tolist() == [6, 7, 8, 9, 10, 11, 12, 14]
    assert it.rejected["check_name"].tolist() == ["unparseable", "unparseable", "unparseable", "out_of_range",
                                                  "unparseable", "unparseable", "out_of_range", "unknown_curve"]
    assert all("\n" not in r and r for r in it.rejected["reason"])
    assert it.curves == ("govt", "swap")
    rates = dict(zip(it.rows["line"], it.rows["forecast_rate"], strict=True))
    assert rates == pytest.approx({2: 0.041, 3: 0.040, 13: 0.041})


def test_duplicates_keep_an_identical_repeat_once_and_no_conflicting_value(cfg):
    lines = ["2031-01-02,1Y,1Y,4.1", "2031-01-02,12M,1Y,4.1", "2031-01-02,2Y,1Y,4.2", "2031-01-02,24M,12M,4.3"]
    it = _intake(_csv(lines, "as_of,start,tenor,rate"), cfg, curve="govt")
    assert it.rows["line"].tolist() == [2]
    by_line = dict(zip(it.rejected["line"], it.rejected["reason"], strict=True))
    assert by_line[3] == "duplicate: repeats line 2 with the same value"
    assert by_line[4] == by_line[5]
    assert "conflicting values (percent)" in by_line[4] and "4.2 on line 4, 4.3 on line 5" in by_line[4]
    assert set(it.rejected["check_name"]) == {"duplicate"}


def test_the_out_of_range_reason_quotes_the_file_in_its_own_units(cfg):
    it = _intake(_csv(["2031-01-02,1Y,1Y,4e5"], "as_of,start,tenor,rate"), cfg, curve="govt")
    assert it.rejected["reason"].tolist() == [
        "out of range: rate 400000 (percent) outside the plausible band -5 % to 40 % (start 1Y, tenor 1Y)"]
    bp = _intake(_csv(["2031-01-02,1Y,1Y,4e5"], "as_of,start,tenor,rate"), cfg, curve="govt", units="bp")
    assert bp.rejected["reason"].str.contains(r"\(bp\) outside the plausible band -500 bp to 4,000 bp").all()


def test_units_come_from_each_rows_curve_unless_given(cfg):
    data = _csv(["2031-01-02,1Y,1Y,4.1,govt", "2031-01-02,1Y,1Y,0.041,swap"])
    own = _intake(data, cfg)
    assert own.rows["forecast_rate"].tolist() == pytest.approx([0.041, 0.041])
    given = _intake(_csv(["2031-01-02,1Y,1Y,410,govt", "2031-01-02,1Y,1Y,410,swap"]), cfg, units="bp")
    assert given.rows["forecast_rate"].tolist() == pytest.approx([0.041, 0.041])


def test_a_curve_cell_wins_over_curve_and_a_blank_one_takes_it(cfg):
    it = _intake(_csv(["2031-01-02,1Y,1Y,0.04,swap", "2031-01-02,1Y,1Y,4.0,"]), cfg, curve="govt")
    assert sorted(zip(it.rows["curve"], it.rows["forecast_rate"], strict=True)) == [("govt", 0.04), ("swap", 0.04)]
    none = _intake(_csv(["2031-01-02,1Y,1Y,4.0,"]), cfg)
    assert none.rejected["reason"].tolist() == ["no curve: the row names none and no --curve was given"]


def test_csv_parquet_and_xlsx_give_the_same_rows(cfg, tmp_path):
    frame = pd.DataFrame({"as_of": ["2031-01-02", "2031-01-03", "2031-01-03"], "start": ["1Y", "6M", "0M"],
                          "tenor": ["1Y", "2Y", "3M"], "rate": [4.1, 4.25, 3.9]})
    csv = frame.to_csv(index=False).encode()
    pq = io.BytesIO()
    frame.assign(as_of=pd.to_datetime(frame["as_of"])).to_parquet(pq, index=False)
    xlsx = tmp_path / "f.xlsx"
    frame.to_excel(xlsx, index=False)
    got = [_intake(data, cfg, curve="govt", name=name).rows.drop(columns=["line"])
           for data, name in ((csv, "f.csv"), (pq.getvalue(), "f.parquet"), (xlsx.read_bytes(), "f.xlsx"))]
    assert len(got[0]) == 3
    pd.testing.assert_frame_equal(got[0], got[1])
    pd.testing.assert_frame_equal(got[0], got[2])


@pytest.mark.parametrize(("data", "says"), [
    pytest.param(b"", "empty file", id="empty"),
    pytest.param(b"as_of,tenor,rate\n2031-01-02,1Y,4\n", "missing: start", id="no-start"),
    pytest.param(b"as_of,start,tenor,rate,source\n2031-01-02,1Y,1Y,4,x\n", "unexpected column 'source'", id="extra"),
    pytest.param(b"start,tenor,rate\n1Y,1Y,4\n", "exactly one date column", id="no-date"),
])
def test_a_file_that_is_no_forecast_file_is_refused_with_its_reason(data, says):
    read = read_forecast_file(data, "f.csv")
    assert read.error is not None and says in read.error and "\n" not in read.error
    assert read.rows_read == 0


def _forwards(n_days: int = 2_000, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    days = np.datetime64("2001-01-03") + 7 * np.arange(n_days)
    cells = [(0, 12), (12, 12), (24, 60)]
    parts = []
    for s, t in cells:
        fwd = 0.04 + 0.01 * rng.standard_normal(n_days)
        realised = fwd + 0.01 * rng.standard_normal(n_days)   # surprises of 100 bp
        realised[-50:] = np.nan                                 # the last weeks still pending
        parts.append(pd.DataFrame({"curve": "govt", "as_of": days, "start_months": s, "tenor_months": t,
                                   "forward_rate": fwd, "realized_rate": realised}))
    return pd.concat(parts, ignore_index=True)


def test_the_desk_view_is_partly_informed_noisy_and_seeded():
    f = _forwards()
    view = desk_view_forecasts(f)
    again = desk_view_forecasts(f.sample(frac=1.0, random_state=1))    # row order does not matter
    pd.testing.assert_frame_equal(view, again)
    assert desk_view_csv(view) == desk_view_csv(again)
    assert not desk_view_forecasts(f, seed=7)["rate"].equals(view["rate"])
    merged = view.merge(f, on=["curve", "as_of", "start_months", "tenor_months"], validate="one_to_one")
    gap = (merged["rate"] - merged["forward_rate"]).to_numpy()
    surprise = (merged["realized_rate"] - merged["forward_rate"]).to_numpy()
    done = np.isfinite(surprise)
    # least squares of the desk's move from the forward on the surprise: the informed share
    x = np.c_[np.ones(done.sum()), surprise[done]]
    slope = np.linalg.lstsq(x, gap[done], rcond=None)[0][1]
    assert slope == pytest.approx(INFORMED_SHARE, abs=0.02)
    # a year ahead the noise alone has NOISE_BP standard deviation (pending rows: the forward plus noise)
    year = (merged["start_months"] == 12).to_numpy()
    resid = gap[year & done] - INFORMED_SHARE * surprise[year & done]
    assert np.std(resid) * 1e4 == pytest.approx(NOISE_BP, rel=0.15)
    assert np.abs(gap[year & ~done]).max() * 1e4 < 6 * NOISE_BP


def test_the_desk_view_file_reads_back_whole(cfg):
    view = desk_view_forecasts(_forwards(200))
    it = _intake(desk_view_csv(view), cfg)
    assert len(it.rejected) == 0 and len(it.rows) == len(view)
    back = it.rows.sort_values(["start_months", "tenor_months", "as_of"], ignore_index=True)
    assert back["forecast_rate"].to_numpy() == pytest.approx(view["rate"].to_numpy(), abs=5e-7)   # 4 decimals of %
