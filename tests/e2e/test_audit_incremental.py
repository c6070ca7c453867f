"""The daily incremental audit refresh against a full recompute, on a real store.

A small project (one zero curve, an inversion pair, daily files) is carried through load, check,
build, realize and the full audit; then days arrive one file at a time and after each the real steps
run and :func:`flows.audit_step.refresh_audit_incremental` folds in the new outcomes. After every
refresh the stored ``audit_result`` and ``term_premium_result`` rows are compared with the reference:
:func:`pipeline.audit.summarize` and :func:`pipeline.audit.term_premium` over the curve's current
outcomes as the store holds them (1e-9 relative). The sequence covers plain days, a regime change
(the curve inverts), a gap past the realisation tolerance followed by the late file of a day inside
it (outcomes realised out of order: their cells are recomputed), a restatement of a realised day
(outcomes superseded: the whole curve is recomputed), and a state stored in an older layout (without
the lag band of sql/008, or of another state format: the whole curve is recomputed).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from flows.audit_step import read_outcomes, refresh_audit_incremental, run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from pipeline.audit import SUMMARY_COLUMNS, summarize, term_premium
from tests.e2e.stores import make_project, run_all_steps, write_wide_csv
from warehouse.connect import reader
from warehouse.frames import read_frame

TENORS = ["1M", "3M", "1Y", "2Y", "5Y"]
WINDOW = 30
TOML = f"""
[store]
path = "store.duckdb"

[curves.zc]
files = "zc_*.csv"
quote = "zero"
compounding = "annual"
day_count = "ACT/365F"
units = "decimal"
interpolation = "linear_zero"
tenors = [{", ".join(f'"{t}"' for t in TENORS)}]
calendar.weekend = ["Sat", "Sun"]
forward.starts = ["0M", "1M", "3M"]
forward.tenors = ["3M", "1Y"]
realize.tolerance_days = 3
checks.jump_bp = 500
checks.inversion_pairs = [["3M", "5Y"]]
audit.premium_window_days = {WINDOW}
"""
RTOL = 1e-9


def _market() -> tuple[np.ndarray, np.ndarray]:
    """Business days of 2030 to mid-2031 and a curve per day (days x tenors, decimals).

    The slope goes negative in two episodes (the inverted regime), the second running into the
    days that arrive one at a time, so the regime changes within the appended days.
    """
    span = np.arange(np.datetime64("2030-01-01"), np.datetime64("2031-06-30") + 1)
    days = span[np.is_busday(span)]
    rng = np.random.default_rng(5)
    k = np.arange(days.size)
    level = 0.03 + np.cumsum(rng.normal(0, 3e-4, days.size))
    slope = np.where((k > 60) & (k < 100), -0.004, 0.008)
    slope = np.where(k >= days.size - 75, -0.003, slope)
    shape = np.array([0.0, 0.1, 0.3, 0.55, 1.0])
    return days, np.round(level[:, None] + slope[:, None] * shape[None, :], 8)


def _write(root, days, rates, name):  # noqa: ANN001, ANN202
    return write_wide_csv(root / f"zc_{name}.csv", days, TENORS, rates, "%.8f")


def _steps(cfg) -> None:  # noqa: ANN001
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)


def _reference(cfg) -> tuple[pd.DataFrame, pd.DataFrame]:  # noqa: ANN001
    from warehouse.connect import writer

    with writer(cfg.store_path) as con:
        o = read_outcomes(con, cfg, "zc")
    return summarize(o), term_premium(o, WINDOW)


def _stored(cfg) -> tuple[pd.DataFrame, pd.DataFrame]:  # noqa: ANN001
    with reader(cfg.store_path) as con:
        s = read_frame(con, "SELECT * FROM audit_result ORDER BY start_months, tenor_months, regime")
        p = read_frame(con, "SELECT * FROM term_premium_result ORDER BY start_months, tenor_months, as_of")
    return s, p


def _assert_same(cfg) -> None:  # noqa: ANN001
    ref_s, ref_p = _reference(cfg)
    got_s, got_p = _stored(cfg)
    ref_s = ref_s.sort_values(["start_months", "tenor_months", "regime"]).reset_index(drop=True)
    assert len(got_s) == len(ref_s)
    for c in SUMMARY_COLUMNS:
        a, b = got_s[c].to_numpy(), ref_s[c].to_numpy()
        if c in ("first_as_of", "last_as_of"):
            assert (pd.to_datetime(a) == pd.to_datetime(b)).all(), c
        elif c in ("curve", "regime", "start_months", "tenor_months", "n", "lags", "indicative"):
            assert (a == b).all(), c
        elif "pvalue" in c:
            # p-values far in the tail amplify the statistic's rounding (d log p = -W/2 dW / W):
            # compare their logarithms, which carry the statistic itself
            a, b = a.astype(float), b.astype(float)
            tiny = ~(b > 1e-300)  # NaN, or underflowed to 0
            assert ((a < 1e-300) == (b < 1e-300)).all() and (np.isnan(a) == np.isnan(b)).all(), c
            np.testing.assert_allclose(np.log(a[~tiny]), np.log(b[~tiny]), rtol=RTOL, atol=1e-12, err_msg=c)
        else:
            # zero errors (start 0: the forward is the spot) leave values that are exactly 0 on both sides
            np.testing.assert_allclose(a.astype(float), b.astype(float), rtol=RTOL, atol=1e-12, err_msg=c)
    ref_p = ref_p.sort_values(["start_months", "tenor_months", "as_of"]).reset_index(drop=True)
    assert len(got_p) == len(ref_p)
    assert (pd.to_datetime(got_p["as_of"]).to_numpy() == pd.to_datetime(ref_p["as_of"]).to_numpy()).all()
    np.testing.assert_allclose(got_p["premium_bp"], ref_p["premium_bp"], rtol=RTOL, atol=1e-12)
    # the band's half-width (fixed-b critical value x HAC se) relative; the bounds themselves can
    # cross zero; no band (NaN) on exactly the same rows
    half = (ref_p["upper_bp"] - ref_p["premium_bp"]).to_numpy()
    np.testing.assert_array_equal(np.isnan(got_p["upper_bp"].to_numpy(dtype=float)), np.isnan(half))
    np.testing.assert_allclose(got_p["upper_bp"] - got_p["premium_bp"], half, rtol=RTOL, atol=1e-12)
    np.testing.assert_allclose(got_p["lower_bp"], ref_p["lower_bp"], rtol=0,
                               atol=RTOL * (np.nanmax(np.abs(half), initial=0.0) + 1))


@pytest.fixture(scope="module")
def project(tmp_path_factory):  # noqa: ANN001, ANN201
    root = tmp_path_factory.mktemp("incremental")
    p = make_project(root, TOML)
    days, rates = _market()
    first_new = days.size - 14
    months = days[:first_new].astype("datetime64[M]")
    files = [_write(root, days[:first_new][months == m], rates[:first_new][months == m], str(m))
             for m in np.unique(months)]
    load_files(p.cfg, files)
    run_all_steps(p.cfg)  # the full audit, which stores the running state
    return p, days, rates, first_new


def _day(p, days, rates, i, name=None):  # noqa: ANN001, ANN202
    load_files(p.cfg, [_write(p.root, days[i : i + 1], rates[i : i + 1], name or str(days[i]))])
    _steps(p.cfg)
    return refresh_audit_incremental(p.cfg)["zc"]


def test_days_one_at_a_time_match_a_full_recompute(project):
    p, days, rates, first = project
    _assert_same(p.cfg)  # the full audit itself
    modes = []
    # plain days; the curve is inverted on all of them (the second episode began 61 days before)
    for i in range(first, first + 4):
        done = _day(p, days, rates, i)
        modes.append(done.mode)
        assert done.new_outcomes > 0
        # no cell recomputed: on the fourth day the 1M-start cells' Newey-West lag moves by one,
        # which the stored lag band absorbs (without the band those two cells were recomputed)
        assert done.recomputed == [], done
        _assert_same(p.cfg)
    assert modes == ["incremental"] * 4
    # nothing new: nothing changes
    again = refresh_audit_incremental(p.cfg)["zc"]
    assert again.mode == "unchanged"
    _assert_same(p.cfg)

    # a gap: four business days missing (past the 3-day tolerance), then the day after them
    gap = list(range(first + 4, first + 8))
    done = _day(p, days, rates, first + 8)
    assert done.mode == "incremental"
    _assert_same(p.cfg)
    # the late file of the gap's first day: forwards aimed at it are realised now, with as-of dates
    # before their cells' last one, so those cells are recomputed from their record
    done = _day(p, days, rates, gap[0], name=f"late_{days[gap[0]]}")
    assert done.mode == "incremental" and done.recomputed, done
    _assert_same(p.cfg)
    done = _day(p, days, rates, first + 9)
    assert done.mode == "incremental"
    _assert_same(p.cfg)

    # a restatement of a realised day: its outcomes are superseded, so the curve is recomputed
    with reader(p.cfg.store_path) as con:
        day = con.execute("SELECT max(observed_on) FROM outcome WHERE observed_on < ? AND as_of > ?",
                          [str(days[first - 30]), str(days[first - 200])]).fetchall()[0][0]
    i = int(np.flatnonzero(days == np.datetime64(day))[0])
    restated = rates[i : i + 1] + 0.0007
    load_files(p.cfg, [_write(p.root, days[i : i + 1], restated, f"restated_{day}")])
    _steps(p.cfg)
    done = refresh_audit_incremental(p.cfg)["zc"]
    assert done.mode == "full" and "superseded" in done.reason
    _assert_same(p.cfg)
    # and the days after it are incremental again
    done = _day(p, days, rates, first + 10)
    assert done.mode == "incremental"
    _assert_same(p.cfg)


def test_inverted_regime_has_rows_from_both_episodes(project):
    p, *_ = project
    s, _ = _stored(p.cfg)
    inv = s[(s["regime"] == "inverted") & (s["start_months"] == 3)]
    # the regime column came from the joined quotes for old rows and for the appended ones alike
    assert len(inv) == 2 and (inv["n"] > 40).all()


def test_a_windowed_audit_drops_the_state_and_the_next_refresh_is_full(project, tmp_path):
    from tests.e2e.stores import clone_project

    q = clone_project(project[0], tmp_path / "windowed", TOML)
    run_audit(q.cfg, first="2030-03-01", last="2030-12-31")
    with reader(q.cfg.store_path) as con:
        assert con.execute("SELECT count(*) FROM audit_state_cell").fetchall()[0][0] == 0
        assert con.execute("SELECT count(*) FROM audit_result WHERE window_from IS NOT NULL").fetchall()[0][0] > 0
    done = refresh_audit_incremental(q.cfg)["zc"]
    assert done.mode == "full" and done.reason == "no stored state"
    _assert_same(q.cfg)


@pytest.mark.parametrize("older", ["UPDATE audit_state_cell SET lag_band = NULL, lag_cross = NULL",
                                   "UPDATE audit_state_curve SET state_format = state_format - 1"],
                         ids=["no-lag-band", "older-format"])
def test_a_state_in_an_older_layout_is_rebuilt_in_full(project, tmp_path, older):
    """Cell rows stored before sql/008 (NULL lag band) or a state of an older format: the next refresh
    recomputes the curve, stores the band, and the refresh after it is incremental again."""
    from tests.e2e.stores import clone_project
    from warehouse.connect import writer

    p, days, rates, first = project
    q = clone_project(p, tmp_path / "older", TOML)
    with writer(q.cfg.store_path) as con:
        con.execute(older)
    done = refresh_audit_incremental(q.cfg)["zc"]
    assert done.mode == "full" and ("older layout" in done.reason or "format" in done.reason), done
    _assert_same(q.cfg)
    with reader(q.cfg.store_path) as con:
        assert con.execute("SELECT count(*) FROM audit_state_cell WHERE lag_band IS NULL OR lag_cross IS NULL "
                           "OR len(lag_cross) != 121 * len(lag_band)").fetchall()[0][0] == 0
    done = _day(q, days, rates, first + 11)
    assert done.mode == "incremental"
    _assert_same(q.cfg)
