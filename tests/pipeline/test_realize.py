"""Realisation: forwards matched with the zero rate observed on (or just after) their target date.

Sources of the checks: the contract's realisation rule (target date = start date; first observation
within ``tolerance_days`` business days; otherwise pending, never interpolated), recomputed here by
plain Python loops over ``datetime.date`` (independent of the numpy implementation), and exact
arithmetic on flat synthetic curves.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from pipeline.dates import BusinessCalendar, add_months, as_days
from pipeline.realize import (
    OUTCOME_COLUMNS,
    due_forwards,
    due_target_window,
    forward_status,
    pending_count,
    realize,
)

CAL = BusinessCalendar.of(("Sat", "Sun"), ["2031-12-25", "2031-12-26", "2032-01-01"])


# ---------------------------------------------------------------- plain-Python reference
def _py_business_day(d: dt.date, cal: BusinessCalendar) -> bool:
    names = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
    hol = {np.datetime64(h, "D").astype(dt.date) for h in cal.holidays}
    return names[d.weekday()] not in cal.weekend and d not in hol


def _py_deadline(target: dt.date, tol: int, cal: BusinessCalendar) -> dt.date:
    """Roll the target forward to a business day, then step ``tol`` business days."""
    d = target
    while not _py_business_day(d, cal):
        d += dt.timedelta(days=1)
    steps = 0
    while steps < tol:
        d += dt.timedelta(days=1)
        if _py_business_day(d, cal):
            steps += 1
    return d


def _py_realize(forwards: pd.DataFrame, zeros: pd.DataFrame, observed, tol: int, cal) -> dict:
    """Outcome per forward index by plain loops: {index: (observed_on, realized, spot)}."""
    obs = sorted(pd.Timestamp(d).date() for d in observed)
    zero = {(pd.Timestamp(r.as_of).date(), int(r.tenor_months)): float(r.zero_rate)
            for r in zeros.itertuples()}
    out = {}
    for i, f in enumerate(forwards.itertuples()):
        target = pd.Timestamp(f.start_date).date()
        deadline = _py_deadline(target, tol, cal)
        hit = next((d for d in obs if target <= d <= deadline), None)
        if hit is None:
            continue
        out[i] = (hit, zero[(hit, int(f.tenor_months))], zero[(pd.Timestamp(f.as_of).date(), int(f.tenor_months))])
    return out


def _surface(as_of_days: np.ndarray, starts, tenors, rate_of, cal=CAL) -> pd.DataFrame:
    """Forwards frame by hand: one row per (as-of, start, tenor); start_date per the contract."""
    a = np.repeat(as_of_days, len(starts) * len(tenors))
    s = np.tile(np.repeat(np.asarray(starts), len(tenors)), as_of_days.size)
    t = np.tile(np.asarray(tenors), as_of_days.size * len(starts))
    start_date = cal.roll(add_months(a, s))
    end_date = cal.roll(add_months(a, s + t))
    return pd.DataFrame({
        "as_of": a, "start_months": s, "tenor_months": t, "start_date": start_date,
        "end_date": end_date, "forward_rate": rate_of(a, s, t),
    })


def _zeros(days: np.ndarray, tenors, rate_of) -> pd.DataFrame:
    d = np.repeat(days, len(tenors))
    t = np.tile(np.asarray(tenors), days.size)
    return pd.DataFrame({"as_of": d, "tenor_months": t, "zero_rate": rate_of(d, t)})


# ---------------------------------------------------------------- flat curves
def test_flat_curves_error_is_difference_of_levels():
    """Flat curves whose level changes every day (contract / issue 5 'what must hold').

    On a flat continuously-compounded curve every zero rate is the level, and every forward
    computed from its discount factors (plain formula f = (ln D1 - ln D2) / (t2 - t1), ACT/365F)
    is the level too, so each error must be the difference of the two days' levels.
    """
    days = CAL.business_days("2030-01-01", "2033-12-31")
    levels = 0.01 + 0.0001 * np.arange(days.size) + 0.002 * np.sin(np.arange(days.size))  # moves every day

    def lv(x):
        x = as_days(np.asarray(x))
        i = np.searchsorted(days, x)
        assert (days[i] == x).all()
        return levels[i]

    def forward_from_discounts(a, s, t):
        t1 = (CAL.roll(add_months(a, s)) - a).astype(np.int64) / 365.0
        t2 = (CAL.roll(add_months(a, s + t)) - a).astype(np.int64) / 365.0
        d1, d2 = np.exp(-lv(a) * t1), np.exp(-lv(a) * t2)
        return (np.log(d1) - np.log(d2)) / (t2 - t1)

    starts, tenors = [0, 1, 3, 12], [3, 12]
    fwd = _surface(days, starts, tenors, forward_from_discounts)
    zeros = _zeros(days, tenors, lambda d, t: lv(d))
    # every forward equals its as-of level (to rounding of exp/log)
    np.testing.assert_allclose(fwd["forward_rate"], lv(fwd["as_of"].to_numpy()), rtol=0, atol=1e-14)

    out = realize(fwd, zeros, days, CAL, tolerance_days=3)
    assert list(out.columns) == list(OUTCOME_COLUMNS)
    # every target is a business day and every business day is observed: exact target match
    assert (out["observed_on"] == out["target_date"]).all()
    want = (lv(out["as_of"].to_numpy()) - lv(out["observed_on"].to_numpy())) * 1e4
    np.testing.assert_allclose(out["error_bp"], want, rtol=0, atol=1e-9)
    # the no-change error uses the zero on the as-of date, which is the level exactly
    np.testing.assert_array_equal(out["rw_error_bp"], want)
    np.testing.assert_array_equal(out["realized_rate"], lv(out["observed_on"].to_numpy()))
    # start 0: the target is the as-of date itself and nothing changed
    zero_start = out["start_months"] == 0
    assert (out.loc[zero_start, "rw_error_bp"] == 0).all()
    # realised exactly those whose target is on or before the last day
    assert len(out) == int((fwd["start_date"] <= days[-1]).sum())


# ---------------------------------------------------------------- tolerance rule
def _single(as_of: str, start: str) -> pd.DataFrame:
    return pd.DataFrame({
        "as_of": [np.datetime64(as_of)], "start_months": [3], "tenor_months": [12],
        "start_date": [np.datetime64(start)], "end_date": [np.datetime64(start) + 365],
        "forward_rate": [0.05],
    })


# Days around Christmas 2031 (Thu 25 and Fri 26 are holidays); the curve was not observed on
# Mon 22 Dec, and not at all from Mon 29 Dec to Fri 2 Jan; observations resume Mon 5 Jan 2032.
OBSERVED = np.array(["2031-12-18", "2031-12-19", "2031-12-23", "2031-12-24", "2032-01-05", "2032-01-06"],
                    dtype="datetime64[D]")


@pytest.mark.parametrize(
    ("target", "tol", "observed_on"),
    [
        ("2031-12-19", 3, "2031-12-19"),  # observed on the target itself
        ("2031-12-22", 0, None),  # not observed, no tolerance: pending
        ("2031-12-22", 1, "2031-12-23"),  # next business day is within tolerance
        ("2031-12-25", 0, None),  # holiday: rolls to Mon 29 Dec, unobserved
        ("2031-12-24", 3, "2031-12-24"),
        ("2031-12-29", 3, None),  # 29 Dec + 3 bd = 2 Jan (1 Jan holiday): gap beyond tolerance
        ("2031-12-29", 4, "2032-01-05"),  # one more day reaches Mon 5 Jan
        ("2031-12-27", 4, "2032-01-05"),  # Saturday target: rolled to 29 Dec first
        ("2032-01-06", 2, "2032-01-06"),
        ("2032-01-07", 2, None),  # after the last observation: awaiting
    ],
    ids=["on-target", "gap-tol0", "next-day", "holiday-tol0", "christmas-eve", "gap-beyond", "gap-within",
         "weekend-target", "last-day", "future"],
)
def test_tolerance_rule(target, tol, observed_on):
    """Contract: first curve observed within tolerance business days after the target, else pending."""
    fwd = _single("2031-09-18", target)
    days = np.concatenate([OBSERVED, [np.datetime64("2031-09-18")]])
    zeros = _zeros(np.sort(days), [12], lambda d, t: 0.04 + (d - np.datetime64("2031-01-01")).astype(int) * 1e-5)
    out = realize(fwd, zeros, np.sort(days), CAL, tol)
    ref = _py_realize(fwd, zeros, days, tol, CAL)  # plain-Python recomputation
    if observed_on is None:
        assert out.empty and not ref
    else:
        assert len(out) == 1 and ref[0][0] == dt.date.fromisoformat(observed_on)
        assert out["observed_on"].iloc[0] == pd.Timestamp(observed_on)
        assert out["target_date"].iloc[0] == pd.Timestamp(target)  # target kept, not the observation day
        assert out["realized_rate"].iloc[0] == ref[0][1]
        assert out["error_bp"].iloc[0] == pytest.approx((0.05 - ref[0][1]) * 1e4, abs=1e-12)


@pytest.mark.parametrize(
    ("target", "tol", "status"),
    [
        ("2031-12-19", 3, "realisable"),
        ("2031-12-22", 0, "gap"),
        ("2031-12-29", 3, "gap"),
        ("2032-01-05", 3, "realisable"),
        ("2032-01-07", 0, "awaiting"),
        ("2032-01-06", 0, "realisable"),
        ("2032-01-05", 0, "realisable"),
    ],
    ids=["observed", "gap-tol0", "gap-holidays", "late-observed", "future", "last-day", "resumed"],
)
def test_status_of_unrealised(target, tol, status):
    """Pending split: window beyond the last observed day = awaiting, else gap (module docstring)."""
    fwd = _single("2031-09-18", target)
    assert forward_status(fwd, OBSERVED, CAL, tol)[0] == status


def test_status_window_past_last_day_is_awaiting():
    """A window that ends after the last observed day may still realise: awaiting, not gap."""
    fwd = _single("2031-09-18", "2032-01-07")  # deadline 2032-01-09 with tol 2
    assert forward_status(fwd, OBSERVED, CAL, 2)[0] == "awaiting"
    # once the curve is known up to 9 Jan without observation there, it is a gap
    assert forward_status(fwd, OBSERVED, CAL, 2, last_day="2032-01-09")[0] == "gap"


# ---------------------------------------------------------------- random cases vs plain Python
@pytest.mark.parametrize("seed", [1, 2, 3], ids=["seed1", "seed2", "seed3"])
@pytest.mark.parametrize("tol", [0, 2, 5], ids=["tol0", "tol2", "tol5"])
def test_matches_plain_python(seed, tol):
    """Random gaps and rates: identical rows and values to the loop-based reference."""
    rng = np.random.default_rng(seed)
    days = CAL.business_days("2031-06-02", "2032-03-31")
    observed = days[rng.random(days.size) > 0.25]  # a quarter of the days never observed
    as_of = observed[: observed.size // 2]
    tenors = [1, 6]
    zeros = _zeros(observed, tenors, lambda d, t: 0.03 + rng.normal(0, 0.01, d.size))
    fwd = _surface(as_of, [0, 1, 2, 3], tenors, lambda a, s, t: 0.03 + 0.001 * s + rng.normal(0, 1e-3, a.size))
    fwd = fwd.sample(frac=1.0, random_state=seed).reset_index(drop=True)  # order must not matter
    out = realize(fwd, zeros, observed, CAL, tol)
    ref = _py_realize(fwd, zeros, observed, tol, CAL)
    assert len(out) == len(ref) > 0
    want = pd.DataFrame(
        [(i, *v) for i, v in sorted(ref.items())], columns=["i", "observed_on", "realized", "spot"]
    )
    np.testing.assert_array_equal(out["observed_on"].dt.date.to_numpy(), want["observed_on"].to_numpy())
    np.testing.assert_array_equal(out["realized_rate"], want["realized"])
    np.testing.assert_array_equal(out["spot_rate"], want["spot"])
    np.testing.assert_array_equal(out["forward_rate"], fwd["forward_rate"].to_numpy()[want["i"]])
    np.testing.assert_allclose(out["error_bp"], (out["forward_rate"] - want["realized"]) * 1e4, atol=1e-12)
    np.testing.assert_allclose(out["rw_error_bp"], (want["spot"] - want["realized"]) * 1e4, atol=1e-12)
    # pending counts add up, and 'awaiting' is exactly the windows reaching past the last day
    counts = pending_count(fwd, observed, CAL, tol)
    assert counts["pending"] == len(fwd) - len(out) == counts["awaiting"] + counts["gap"]
    last = observed[-1].astype(dt.date)
    py_awaiting = sum(
        1 for i, f in enumerate(fwd.itertuples())
        if i not in ref and _py_deadline(pd.Timestamp(f.start_date).date(), tol, CAL) > last
    )
    assert counts["awaiting"] == py_awaiting


def test_does_not_mutate_inputs():
    days = CAL.business_days("2031-06-02", "2031-12-31")
    fwd = _surface(days[:50], [1], [3], lambda a, s, t: np.full(a.size, 0.02))
    zeros = _zeros(days, [3], lambda d, t: np.full(d.size, 0.021))
    observed = days[::2].copy()
    before = (fwd.copy(deep=True), zeros.copy(deep=True), observed.copy())
    realize(fwd, zeros, observed, CAL, 1)
    due_forwards(fwd, observed[-3:], CAL, 1, observed)
    pd.testing.assert_frame_equal(fwd, before[0])
    pd.testing.assert_frame_equal(zeros, before[1])
    np.testing.assert_array_equal(observed, before[2])


@pytest.mark.parametrize("missing", ["observation", "as-of"], ids=["obs-day", "as-of-day"])
def test_missing_zero_is_an_error(missing):
    """A needed zero rate absent from the zeros frame is a caller error, never a silent NaN."""
    days = CAL.business_days("2031-06-02", "2031-12-31")
    fwd = _single(str(days[0]), str(days[30]))
    drop = days[30] if missing == "observation" else days[0]
    zeros = _zeros(days[days != drop], [12], lambda d, t: np.full(d.size, 0.03))
    with pytest.raises(ValueError, match=f"{missing} date"):
        realize(fwd, zeros, days, CAL, 0)


def test_carries_curve_column():
    days = CAL.business_days("2031-06-02", "2031-12-31")
    fwd = _single(str(days[0]), str(days[30])).assign(curve="govt")
    zeros = _zeros(days, [12], lambda d, t: np.full(d.size, 0.03))
    out = realize(fwd, zeros, days, CAL, 0)
    assert list(out.columns) == ["curve", *OUTCOME_COLUMNS] and out["curve"].iloc[0] == "govt"


# ---------------------------------------------------------------- incremental selection
@pytest.mark.parametrize("tol", [0, 1, 3], ids=["tol0", "tol1", "tol3"])
def test_incremental_equals_batch(tol):
    """Days arriving one at a time, each realising only its due forwards, give the batch result."""
    rng = np.random.default_rng(7)
    days = CAL.business_days("2031-09-01", "2032-02-27")
    observed = days[rng.random(days.size) > 0.2]
    zeros = _zeros(observed, [3, 12], lambda d, t: 0.03 + rng.normal(0, 0.002, d.size))
    fwd = _surface(observed[:60], [0, 1, 2], [3, 12], lambda a, s, t: np.full(a.size, 0.031))
    batch = realize(fwd, zeros, observed, CAL, tol)
    pieces = []
    for k in range(observed.size):  # test-side loop over arriving days; the code under test is vectorised
        new, seen = observed[k : k + 1], observed[: k + 1]
        due = due_forwards(fwd, new, CAL, tol, observed_days=seen)
        pieces.append(realize(due, zeros, seen, CAL, tol))
    inc = pd.concat(pieces)
    key = ["as_of", "start_months", "tenor_months"]
    assert not inc.duplicated(key).any()  # each forward realised once
    pd.testing.assert_frame_equal(
        inc.sort_values(key).reset_index(drop=True), batch.sort_values(key).reset_index(drop=True)
    )
    assert (inc["observed_on"] <= observed[-1]).all()


def test_due_forwards_plain_python():
    """due_forwards without observed_days: every forward whose window contains a new day."""
    days = CAL.business_days("2031-11-03", "2032-01-30")
    fwd = _surface(days[:40], [1], [3], lambda a, s, t: np.full(a.size, 0.02))
    new = np.array(["2031-12-24", "2032-01-05"], dtype="datetime64[D]")
    got = due_forwards(fwd, new, CAL, 3)
    want = [
        i for i, f in enumerate(fwd.itertuples())
        if any(pd.Timestamp(f.start_date).date() <= n.astype(dt.date)
               <= _py_deadline(pd.Timestamp(f.start_date).date(), 3, CAL) for n in new)
    ]
    assert got.index.tolist() == want and want
    lo, hi = due_target_window(new, CAL, 3)
    assert (got["start_date"] >= lo).all() and (got["start_date"] <= hi).all()
    # with history: a forward already realised on 23 Dec is not due again on 24 Dec
    seen = CAL.business_days("2031-11-03", "2032-01-05")
    redo = due_forwards(fwd, new, CAL, 3, observed_days=seen)
    assert set(redo.index) < set(got.index)
    assert set(redo["start_date"].dt.date) <= {dt.date(2031, 12, 24), dt.date(2032, 1, 5),
                                                 dt.date(2032, 1, 1), dt.date(2031, 12, 25),
                                                 dt.date(2031, 12, 26), dt.date(2031, 12, 27),
                                                 dt.date(2031, 12, 28), dt.date(2032, 1, 2)}
