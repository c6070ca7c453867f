"""Realisation and the audit through the store, on a synthetic history of flat curves.

Every curve is flat across tenors at a level that changes every day (annual compounding, ACT/365F),
so by construction every forward equals its as-of day's level and every outcome's error is the
difference of two levels: ``(level(as_of) - level(observed_on)) * 1e4`` bp. The reference is that
arithmetic and numpy's business-day functions (np.busday_offset with the same holidays) for the
tolerance window of the contract; nothing of the project's own realisation code is reused.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from pipeline.audit import SUMMARY_COLUMNS, summarize
from tests.e2e.stores import (
    FLAT_HOLIDAYS,
    FLAT_TENORS,
    KEY,
    as_days,
    clone_project,
    expected_observation,
    write_wide_csv,
)
from warehouse.loads import utc_now

TOLERANCE = 3  # realize.tolerance_days in FLAT_TOML


@pytest.fixture(scope="module")
def flat(flat_store):
    p, levels = flat_store
    fwd = p.sql("SELECT * FROM forwards ORDER BY as_of, start_months, tenor_months")
    for c in ("as_of", "start_date", "end_date"):
        fwd[c] = as_days(fwd[c])
    observed = levels.index.to_numpy().astype("datetime64[D]")
    return p, levels, fwd, expected_observation(fwd, observed, FLAT_HOLIDAYS, TOLERANCE)


def _level(levels: pd.Series, days) -> np.ndarray:
    return levels.reindex(pd.DatetimeIndex(as_days(days).astype("datetime64[ns]"))).to_numpy()


def test_no_day_is_held_and_every_day_is_built(flat):
    p, levels, fwd, _ = flat
    assert p.sql("SELECT * FROM held_days").empty
    assert p.value("SELECT count(*) FROM built_day WHERE scenario = 'official'") == len(levels)
    assert len(fwd) == len(levels) * 9


def test_every_forward_equals_its_days_level(flat):
    p, levels, fwd, _ = flat
    lvl = _level(levels, fwd["as_of"])
    assert np.abs(fwd["forward_rate"].to_numpy() - lvl).max() < 1e-13
    assert np.abs(fwd["forward_rate_cc"].to_numpy() - np.log1p(lvl)).max() < 1e-13


def test_every_error_is_the_difference_of_two_levels(flat):
    p, levels, _, _ = flat
    o = p.sql("SELECT * FROM outcomes")
    assert len(o) > 0
    a, b = _level(levels, o["as_of"]), _level(levels, o["observed_on"])
    np.testing.assert_allclose(o["error_bp"], (a - b) * 1e4, rtol=0, atol=1e-9)
    np.testing.assert_allclose(o["rw_error_bp"], (a - b) * 1e4, rtol=0, atol=1e-9)
    np.testing.assert_allclose(o["realized_rate"], b, rtol=0, atol=1e-13)
    np.testing.assert_allclose(o["spot_rate"], a, rtol=0, atol=1e-13)


def test_outcomes_use_the_first_observation_within_the_tolerance(flat):
    p, _, _, expected = flat
    o = p.sql("SELECT as_of, start_months, tenor_months, target_date, observed_on FROM outcomes")
    for c in ("as_of", "target_date", "observed_on"):
        o[c] = as_days(o[c])
    realised = expected[expected["kind"] == "realised"]
    m = realised.merge(o, on=KEY, how="outer", suffixes=("", "_got"), indicator=True)
    assert (m["_merge"] == "both").all(), m[m["_merge"] != "both"].head()
    assert (m["target_date"] == m["target_date_got"]).all()
    assert (m["observed_on"] == m["observed_on_got"]).all()
    # some targets fell on a missing day and were realised on a later observation
    assert (m["observed_on"] > m["target_date"]).any()


def test_targets_not_yet_observed_or_in_a_gap_are_pending(flat):
    p, _, _, expected = flat
    pending = p.sql("SELECT as_of, start_months, tenor_months, target_date FROM pending_forwards")
    pending["as_of"] = as_days(pending["as_of"])
    want = expected[expected["kind"] != "realised"]
    assert set(want["kind"]) == {"gap", "awaiting"}  # both kinds occur in this history
    assert sorted(map(tuple, pending[KEY].to_numpy().tolist())) == sorted(map(tuple, want[KEY].to_numpy().tolist()))
    gap = want[want["kind"] == "gap"]
    # never interpolated in time: the gap's targets stay pending though days on both sides were observed
    assert ((gap["target_date"] >= np.datetime64("2030-09-09")) & (gap["target_date"] <= np.datetime64("2030-09-18"))
            ).all()


def test_realize_again_changes_nothing(flat, tmp_path):
    p = clone_project(flat[0], tmp_path / "again")
    before = p.sql("SELECT * FROM outcome ORDER BY ALL")
    s = run_realize(p.cfg)
    assert s.curves["flat"]["realized"] == 0 and s.curves["flat"]["re_derived"] == 0
    assert p.sql("SELECT * FROM outcome ORDER BY ALL").equals(before)


def _outcomes_known_at(p, ts) -> pd.DataFrame:
    """The outcome record as it stood at ``ts``, in the shape the audit takes (no inversion pair)."""
    o = p.sql("SELECT * FROM outcome WHERE realized_at <= ? AND (superseded_at IS NULL OR superseded_at > ?) "
              "ORDER BY start_months, tenor_months, as_of", [ts, ts])
    for c in ("as_of", "target_date", "observed_on"):
        o[c] = as_days(o[c])
    o["inverted"] = pd.array([pd.NA] * len(o), dtype="boolean")
    return o


def _audit(p) -> pd.DataFrame:
    return p.sql("SELECT * FROM audit_result ORDER BY start_months, tenor_months, regime")


def test_restating_a_realised_day_re_derives_its_outcomes_and_keeps_the_old(flat, tmp_path):
    p = clone_project(flat[0], tmp_path / "restated")
    levels = flat[1]
    day = np.datetime64("2030-06-14")  # a Friday, observed, the target of many forwards
    assert day in levels.index.to_numpy().astype("datetime64[D]")
    before = p.sql("SELECT * FROM outcomes")
    touched = before[(as_days(before["as_of"]) == day) | (as_days(before["observed_on"]) == day)]
    assert (as_days(touched["observed_on"]) == day).any() and (as_days(touched["as_of"]) == day).any()
    audit_before = _audit(p)
    stood = utc_now()

    new_level = float(levels.loc[pd.Timestamp(day)]) + 0.0005
    f = write_wide_csv(p.root / "flat_restated_2030-06-14.csv", [day], FLAT_TENORS,
                       np.full((1, len(FLAT_TENORS)), new_level), "%.10f")
    [out] = load_files(p.cfg, [f])
    assert out.rows_revised == len(FLAT_TENORS)
    run_checks(p.cfg)
    assert run_build(p.cfg).curves["flat"]["days_built"] == 1
    s = run_realize(p.cfg)
    assert s.curves["flat"]["re_derived"] == len(touched)
    assert s.curves["flat"]["realized"] == len(touched)

    # the old versions are kept, stamped superseded, with their old values
    old = p.sql("SELECT * FROM outcome WHERE superseded_at IS NOT NULL")
    assert len(old) == len(touched)
    pd.testing.assert_frame_equal(
        old.sort_values(KEY)[list(touched.columns)].reset_index(drop=True),
        touched.sort_values(KEY).reset_index(drop=True))
    # the new ones rest on the restated level
    lv = levels.copy()
    lv.loc[pd.Timestamp(day)] = new_level
    now = p.sql("SELECT * FROM outcomes")
    assert len(now) == len(before)
    a, b = _level(lv, now["as_of"]), _level(lv, now["observed_on"])
    np.testing.assert_allclose(now["error_bp"], (a - b) * 1e4, rtol=0, atol=1e-9)

    # the audit moves, and the audit as it stood before is reproduced from the kept record
    run_audit(p.cfg)
    audit_after = _audit(p)
    # (the mean barely moves: the day's +5 bp enters one error of a horizon as the as-of level and
    # leaves another as the realised one; the dispersion does move)
    assert not np.allclose(audit_after["rmse_bp"], audit_before["rmse_bp"], rtol=0, atol=1e-9)
    again = summarize(_outcomes_known_at(p, stood))
    cols = [c for c in SUMMARY_COLUMNS if c not in ("first_as_of", "last_as_of")]
    got = again[cols].sort_values(["start_months", "tenor_months", "regime"]).reset_index(drop=True)
    want = audit_before[cols].reset_index(drop=True)
    assert len(got) == len(want)
    for c in cols:
        if c in ("curve", "regime"):
            assert list(got[c]) == list(want[c])
        else:
            np.testing.assert_allclose(got[c].astype(float), want[c].astype(float), rtol=1e-12, atol=1e-12,
                                       err_msg=c)
    # and the quotes as they were known then still show the first publication
    q = p.value("SELECT rate FROM quotes_as_of(?) WHERE as_of = ? AND tenor = '1Y'", [stood, str(day)])
    assert q == pytest.approx(float(levels.loc[pd.Timestamp(day)]), abs=1e-15)


def test_a_day_restated_into_a_reject_is_withdrawn_and_its_outcomes_move(flat, tmp_path):
    """A restatement that makes a realised day fail a reject check (a 3 % jump) takes the day out of
    build; outcomes observed on it move to the next observed day, and its own forwards leave the
    surface and the running record (superseded, kept)."""
    p = clone_project(flat[0], tmp_path / "withdrawn")
    levels = flat[1]
    day = np.datetime64("2030-06-14")
    nxt = np.datetime64("2030-06-17")
    before = p.sql("SELECT * FROM outcomes")
    own = before[as_days(before["as_of"]) == day]
    on_day = before[(as_days(before["observed_on"]) == day) & (as_days(before["as_of"]) != day)]
    assert len(on_day) and len(own)
    f = write_wide_csv(p.root / "flat_bad_2030-06-14.csv", [day], FLAT_TENORS,
                       np.full((1, len(FLAT_TENORS)), float(levels.loc[pd.Timestamp(day)]) + 0.03), "%.10f")
    load_files(p.cfg, [f])
    run_checks(p.cfg)
    assert p.value("SELECT count(*) FROM held_days WHERE as_of = ?", [str(day)]) == 1
    s = run_build(p.cfg)
    assert s.curves["flat"]["withdrawn"] == 1
    assert p.value("SELECT count(*) FROM forwards WHERE as_of = ?", [str(day)]) == 0
    run_realize(p.cfg)
    after = p.sql("SELECT * FROM outcomes")
    assert (as_days(after["observed_on"]) != day).all()
    assert (as_days(after["as_of"]) != day).all()
    moved = after.merge(on_day[KEY], on=KEY)
    assert len(moved) == len(on_day) and (as_days(moved["observed_on"]) == nxt).all()
    np.testing.assert_allclose(moved["realized_rate"], float(levels.loc[pd.Timestamp(nxt)]), rtol=0, atol=1e-13)
    kept = p.value("SELECT count(*) FROM outcome WHERE superseded_at IS NOT NULL")
    assert kept == len(on_day) + len(own)


def test_a_late_day_nearer_the_target_re_derives_and_realises_gap_forwards(flat, tmp_path):
    """A day of the gap loaded late: outcomes that had to use the first day after the gap move to it
    (the first observation on or after the target), and forwards pending in the gap are realised;
    the realize summary's pending count equals the pending_forwards view."""
    p = clone_project(flat[0], tmp_path / "late")
    levels = flat[1].copy()
    late = np.datetime64("2030-09-17")
    levels.loc[pd.Timestamp(late)] = 0.0301
    levels = levels.sort_index()
    f = write_wide_csv(p.root / "flat_late_2030-09-17.csv", [late], FLAT_TENORS,
                       np.full((1, len(FLAT_TENORS)), 0.0301), "%.10f")
    load_files(p.cfg, [f])
    run_checks(p.cfg)
    assert run_build(p.cfg).curves["flat"]["days_built"] == 1
    s = run_realize(p.cfg).curves["flat"]
    fwd = p.sql("SELECT * FROM forwards")
    fwd["as_of"] = as_days(fwd["as_of"])
    expected = expected_observation(fwd, levels.index.to_numpy().astype("datetime64[D]"), FLAT_HOLIDAYS, TOLERANCE)
    o = p.sql("SELECT as_of, start_months, tenor_months, observed_on FROM outcomes")
    o["as_of"], o["observed_on"] = as_days(o["as_of"]), as_days(o["observed_on"])
    want = expected[expected["kind"] == "realised"]
    m = want.merge(o, on=KEY, how="outer", suffixes=("", "_got"), indicator=True)
    assert (m["_merge"] == "both").all()
    assert (m["observed_on"] == m["observed_on_got"]).all()
    assert (m["observed_on"] == late).sum() > 0
    assert s["re_derived"] > 0 and s["pending"] == p.value("SELECT count(*) FROM pending_forwards")
    assert s["pending"] == int((expected["kind"] != "realised").sum())


def _current(p) -> pd.DataFrame:
    cols = ["as_of", "start_months", "tenor_months", "target_date", "observed_on", "forward_rate", "realized_rate",
            "spot_rate", "error_bp", "rw_error_bp"]
    return p.sql(f"SELECT {', '.join(cols)} FROM outcome WHERE superseded_at IS NULL ORDER BY ALL")


def test_incremental_realisation_equals_a_full_pass(flat, tmp_path):
    """A restated realised day, a late day loaded into the gap and a reject that withdraws a day, realised
    after each change by the daily (incremental) pass on one copy and by the full pass on another: the
    same current outcomes, the same count superseded, the same pending count. The full pass considers
    every forward without an outcome, so it is the reference for what the narrowed candidate set must find."""
    levels = flat[1]
    copies = {mode: clone_project(flat[0], tmp_path / mode) for mode in ("daily", "full")}
    changes = [
        ("flat_restated_2030-06-14.csv", np.datetime64("2030-06-14"), float(levels.loc["2030-06-14"]) + 0.0005),
        ("flat_late_2030-09-17.csv", np.datetime64("2030-09-17"), 0.0301),
        ("flat_bad_2030-03-15.csv", np.datetime64("2030-03-15"), float(levels.loc["2030-03-15"]) + 0.03),
    ]
    for name, day, level in changes:
        got = {}
        for mode, p in copies.items():
            f = write_wide_csv(p.root / name, [day], FLAT_TENORS, np.full((1, len(FLAT_TENORS)), level), "%.10f")
            load_files(p.cfg, [f])
            run_checks(p.cfg)
            run_build(p.cfg)
            s = run_realize(p.cfg, full=mode == "full").curves["flat"]
            got[mode] = (s["realized"], s["re_derived"], s["pending"])
        assert got["daily"] == got["full"], name
        assert got["daily"][0] > 0, name                      # each change realised something
        pd.testing.assert_frame_equal(_current(copies["daily"]), _current(copies["full"]))
        assert copies["daily"].value("SELECT count(*) FROM outcome WHERE superseded_at IS NOT NULL") == \
            copies["full"].value("SELECT count(*) FROM outcome WHERE superseded_at IS NOT NULL")
    assert got["daily"][2] == copies["daily"].value("SELECT count(*) FROM pending_forwards")
