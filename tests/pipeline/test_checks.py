"""Curve-level checks in pipeline.checks.

References: explicit calendars and dates written out in the tests (missing days), plain-pandas
recomputations of the same rule (inversion episodes, duplicates, stale runs), and common trade practice
for what a data check should catch (units errors, stale feeds).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline import checks
from pipeline.config import DEFAULT_SEVERITY, CurveConfig
from pipeline.dates import BusinessCalendar
from pipeline.tenors import parse_tenor

LABELS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "15Y", "20Y", "30Y"]


def make_cfg(**kw) -> CurveConfig:
    base = dict(
        name="govt", quote="par", tenors=tuple(parse_tenor(t) for t in LABELS),
        inversion_pairs=((parse_tenor("3M"), parse_tenor("10Y")), (parse_tenor("2Y"), parse_tenor("10Y"))),
    )
    base.update(kw)
    return CurveConfig(**base)


def d(text: str) -> np.datetime64:
    return np.datetime64(text, "D")


def days_of(*texts: str) -> np.ndarray:
    return np.array(texts, dtype="datetime64[D]")


def random_walk_history(n_days: int = 1500, seed: int = 7, start: str = "2020-01-01") -> tuple[np.ndarray, np.ndarray]:
    """A realistic-looking par curve history: level, slope and curvature random walks with fat-tailed
    (Student t, 4 dof) daily shocks of a few bp, plus 0.5 bp of quote noise; rates quoted to 4 decimals
    of a percent as a feed would. Returns (business days, (D, 12) decimals)."""
    rng = np.random.default_rng(seed)
    cal = BusinessCalendar()
    days = cal.business_days(d(start), d(start) + np.timedelta64(2 * n_days, "D"))[:n_days]
    years = np.array([parse_tenor(t).approx_days / 365.25 for t in LABELS])
    load_slope = (1 - np.exp(-years / 2)) / (years / 2)
    load_curv = load_slope - np.exp(-years / 2)
    shocks = rng.standard_t(4, size=(n_days, 3)) * np.array([4e-4, 3e-4, 2e-4]) / np.sqrt(2)
    f = np.cumsum(shocks, axis=0) + np.array([0.045, -0.02, 0.01])
    r = f[:, [0]] + f[:, [1]] * load_slope + f[:, [2]] * load_curv
    r = r + rng.normal(0, 0.5e-4, r.shape)
    return days, np.round(r * 100, 4) / 100


def keyset(frame: pd.DataFrame) -> set[tuple[np.datetime64, object]]:
    return {(np.datetime64(a, "D"), t) for a, t in zip(frame["as_of"], frame["tenor"], strict=True)}


# --- findings frame -------------------------------------------------------------------------------

def test_empty_panel_gives_empty_findings_with_columns():
    cfg = make_cfg()
    out = checks.curve_checks(np.array([], dtype="datetime64[D]"), LABELS, np.empty((0, 12)), cfg)
    assert list(out.columns) == list(checks.FINDING_COLUMNS)
    assert len(out) == 0
    ep = checks.inversion_episodes(np.array([], dtype="datetime64[D]"), LABELS, np.empty((0, 12)), cfg)
    assert list(ep.columns) == list(checks.EPISODE_COLUMNS) and len(ep) == 0


def test_a_row_without_a_date_is_ignored_not_a_crash():
    days, r = random_walk_history(30)
    days = days.copy()
    days[5] = np.datetime64("NaT")
    out = checks.curve_checks(days, LABELS, r, make_cfg())
    assert not out["as_of"].isna().any()
    assert (out["check_name"] == "missing_day").sum() == 1  # the day the NaT replaced


def test_inputs_are_not_mutated_and_findings_have_contract_values():
    days, r = random_walk_history(300)
    r[50, 3] *= 10
    r[80, :] = r[79, :]
    r[90, 5] = np.nan
    before_days, before_r = days.copy(), r.copy()
    out = checks.curve_checks(days, LABELS, r, make_cfg())
    np.testing.assert_array_equal(days, before_days)
    np.testing.assert_array_equal(r, before_r)
    assert set(out["check_name"]) <= set(DEFAULT_SEVERITY)
    assert set(out["severity"]) <= {"reject", "warn", "info"}
    assert out["as_of"].dtype.kind == "M"
    assert not out["detail"].str.contains("\n").any()


# --- missing days ---------------------------------------------------------------------------------

# Explicit calendar: weekend Sat/Sun, holidays Thu 25 Dec, Fri 26 Dec 2031 and Thu 1 Jan 2032.
HOLIDAYS = ["2031-12-25", "2031-12-26", "2032-01-01"]
# Every business day from Mon 15 Dec 2031 to Fri 9 Jan 2032, written out by hand (no weekend, no
# holiday); three of them are dropped from the file below.
ALL_BUSINESS = [
    "2031-12-15", "2031-12-16", "2031-12-17", "2031-12-18", "2031-12-19",
    "2031-12-22", "2031-12-23", "2031-12-24",
    "2031-12-29", "2031-12-30", "2031-12-31",
    "2032-01-02",
    "2032-01-05", "2032-01-06", "2032-01-07", "2032-01-08", "2032-01-09",
]
DROPPED = ["2031-12-24", "2031-12-29", "2032-01-02"]


@pytest.mark.parametrize("order", ["sorted", "shuffled"], ids=["sorted", "shuffled"])
def test_missing_days_around_holidays_are_exactly_the_dropped_days(order):
    cal = BusinessCalendar.of(["Sat", "Sun"], HOLIDAYS)
    cfg = make_cfg(calendar=cal)
    observed = [x for x in ALL_BUSINESS if x not in DROPPED]
    # a weekend day observed by mistake must not create or hide findings
    observed.append("2031-12-20")
    obs = days_of(*observed)
    if order == "shuffled":
        obs = np.random.default_rng(0).permutation(obs)
    out = checks.missing_days(obs, cfg)
    assert sorted(np.datetime_as_string(out["as_of"].to_numpy().astype("datetime64[D]"))) == DROPPED
    assert (out["check_name"] == "missing_day").all()
    assert (out["severity"] == DEFAULT_SEVERITY["missing_day"]).all()
    assert out["tenor"].isna().all()
    by_day = dict(zip(np.datetime_as_string(out["as_of"].to_numpy().astype("datetime64[D]")), out["detail"],
                      strict=True))
    # the business day after 24 Dec is 29 Dec (25/26 holidays, 27/28 weekend): one two-day gap
    assert "gap of 2 business days from 2031-12-24 to 2031-12-29" in by_day["2031-12-24"]
    assert "gap of 2 business days from 2031-12-24 to 2031-12-29" in by_day["2031-12-29"]
    assert "gap of 1 business day from 2032-01-02 to 2032-01-02" in by_day["2032-01-02"]


def test_missing_days_with_a_friday_saturday_weekend():
    # weekend Fri/Sat: Sundays are business days, Fridays are not
    cal = BusinessCalendar.of(["Fri", "Sat"], [])
    cfg = make_cfg(calendar=cal)
    # Sun 4 Jan 2032 .. Thu 15 Jan 2032, business days written out; Sun 11 Jan missing
    observed = days_of("2032-01-04", "2032-01-05", "2032-01-06", "2032-01-07", "2032-01-08",
                       "2032-01-12", "2032-01-13", "2032-01-14", "2032-01-15")
    out = checks.missing_days(observed, cfg)
    assert list(out["as_of"].to_numpy().astype("datetime64[D]")) == [d("2032-01-11")]


def test_missing_days_monthly_uses_last_business_day_of_each_month():
    # 31 Dec 2031 a holiday -> December's month-end is Tue 30 Dec; 31 Jan 2032 is a Saturday -> Fri 30 Jan;
    # 29 Feb 2032 is a Sunday -> Fri 27 Feb. March and May missing from the file.
    cal = BusinessCalendar.of(["Sat", "Sun"], ["2031-12-31"])
    cfg = make_cfg(calendar=cal, frequency="monthly")
    observed = days_of("2031-11-28", "2031-12-30", "2032-01-30", "2032-02-27", "2032-04-30", "2032-06-30")
    out = checks.missing_days(observed, cfg)
    assert list(out["as_of"].to_numpy().astype("datetime64[D]")) == [d("2032-03-31"), d("2032-05-31")]
    assert "gap of 1 month-end" in out["detail"].iloc[0]


def test_missing_days_incremental_judges_the_gap_after_the_previous_range():
    cal = BusinessCalendar.of(["Sat", "Sun"], HOLIDAYS)
    cfg = make_cfg(calendar=cal)
    prev = days_of("2031-12-22", "2031-12-23")
    new = days_of("2031-12-30", "2031-12-31")
    out = checks.missing_days(new, cfg, previous=prev)
    got = list(out["as_of"].to_numpy().astype("datetime64[D]"))
    assert got == [d("2031-12-24"), d("2031-12-29")]
    assert len(checks.missing_days(new, cfg)) == 0  # without previous nothing before 30 Dec is judged


# --- missing tenors, stale curves -----------------------------------------------------------------

def test_missing_tenor_one_finding_per_absent_quote_and_per_unlisted_tenor():
    days, r = random_walk_history(40)
    r = r.copy()
    r[10, LABELS.index("7Y")] = np.nan
    r[12, LABELS.index("1M")] = np.nan
    cols = [t for t in LABELS if t != "20Y"]  # 20Y never quoted in this file
    r2 = r[:, [LABELS.index(t) for t in cols]]
    out = checks.missing_tenors(days, cols, r2, make_cfg())
    expect = {(days[10], "7Y"), (days[12], "1M")} | {(x, "20Y") for x in days}
    assert keyset(out) == expect
    assert out["detail"].str.startswith("no quote for expected tenor").all()


def test_stale_whole_curve_is_found_on_the_repeated_day_only():
    days, r = random_walk_history(60)
    r = r.copy()
    r[30] = r[29]  # the feed repeated day 29
    r[31] = r[30]
    r[45, 4] = np.nan  # NaN pattern repeated too: still stale
    r[46] = r[45]
    out = checks.stale_curves(days, LABELS, r, make_cfg())
    whole = out[out["tenor"].isna()]
    assert set(whole["as_of"].to_numpy().astype("datetime64[D]")) == {days[30], days[31], days[46]}
    assert "identical to the curve of " + str(days[29]) in whole["detail"].iloc[0]


@pytest.mark.parametrize("stale_days", [2, 5, 8], ids=["n2", "n5", "n8"])
def test_stale_single_tenor_matches_plain_pandas_runs(stale_days):
    days, r = random_walk_history(200, seed=3)
    r = r.copy()
    j = LABELS.index("5Y")
    r[100:112, j] = r[99, j]  # stuck for 13 observed days (99..111)
    cfg = make_cfg(stale_days=stale_days)
    out = checks.stale_curves(days, LABELS, r, cfg)
    single = out[out["tenor"].notna()]
    # plain pandas: the day is reported when the value equals each of the previous stale_days-1 values
    frame = pd.DataFrame(r, index=days, columns=LABELS)
    same = frame.eq(frame.shift(1))
    expected = set()
    for col in LABELS:
        s = same[col]
        run = s.astype(int).groupby((~s).cumsum()).cumsum()
        hits = run.index[run >= stale_days - 1]
        expected |= {(np.datetime64(h, "D"), col) for h in hits}
    # neighbours move every day in this history, so the neighbour condition holds wherever the run does
    assert keyset(single) == expected
    assert (days[111], "5Y") in keyset(single)
    row = single[(single["tenor"] == "5Y")].iloc[-1]
    assert f"on 13 observed days since {days[99]}" in row["detail"]


def test_stale_single_tenor_needs_a_moving_neighbour():
    days = BusinessCalendar().business_days(d("2031-03-03"), d("2031-03-31"))
    r = np.tile(np.linspace(0.01, 0.05, 12), (len(days), 1))
    r[:, :6] += np.arange(len(days))[:, None] * 1e-4  # the short end moves, the long end does not
    out = checks.stale_curves(days, LABELS, r, make_cfg(stale_days=3))
    # 5Y..30Y are stuck; only 5Y has a neighbour that moves (3Y), the others sit between stuck tenors
    assert set(out["tenor"].dropna()) == {"5Y"}


# --- jumps and units errors -----------------------------------------------------------------------

@pytest.mark.parametrize("gaps", [0.0, 0.02], ids=["complete", "quotes-missing"])
def test_no_false_jumps_on_a_clean_history(gaps):
    days, r = random_walk_history(2500, seed=11)
    # a tenor quoted again after a gap has moved over two days: its neighbours must be judged over
    # the same two days, or every gap looks like an outlier
    r = np.where(np.random.default_rng(1).random(r.shape) < gaps, np.nan, r)
    out = checks.jumps(days, LABELS, r, make_cfg())
    # with 4-bp daily shocks a 75-bp move or an 8-MAD relative move is not expected in clean data;
    # allow a handful from the fat tails
    assert len(out) <= 3, out


UNITS_CASES = [
    # (id, tenor, factor, jump_bp): factor applied to one quote on one day
    ("x10-5Y", "5Y", 10.0, 75.0),
    ("x10-30Y-end", "30Y", 10.0, 75.0),
    ("x10-20Y-next-to-end", "20Y", 10.0, 1e9),
    ("div100-1M-end", "1M", 0.01, 75.0),
    ("div100-10Y", "10Y", 0.01, 75.0),
    ("x10-5Y-outlier-only", "5Y", 10.0, 1e9),
    ("div100-2Y-outlier-only", "2Y", 0.01, 1e9),
]


@pytest.mark.parametrize(("tenor", "factor", "jump_bp"), [c[1:] for c in UNITS_CASES],
                         ids=[c[0] for c in UNITS_CASES])
def test_units_error_is_caught_on_exactly_that_day_and_tenor(tenor, factor, jump_bp):
    # common trade practice: a quote typed in the wrong unit (4.5 for 0.45, 0.045 for 4.5) must be caught
    days, r = random_walk_history(1500, seed=5)
    bad = r.copy()
    k, j = 700, LABELS.index(tenor)
    bad[k, j] = r[k, j] * factor
    cfg = make_cfg(jump_bp=jump_bp)
    out = checks.jumps(days, LABELS, bad, cfg)
    clean = checks.jumps(days, LABELS, r, cfg)
    new = out.merge(clean, how="left", indicator=True)
    new = new[new["_merge"] == "left_only"].drop(columns="_merge")
    serious = new[new["severity"] != "info"]
    assert keyset(serious) == {(days[k], tenor)}
    assert (serious["severity"] == DEFAULT_SEVERITY["jump"]).all()
    assert "MADs against its neighbouring tenors" in serious["detail"].iloc[0]
    if jump_bp < 1e6:
        assert f"(beyond {jump_bp:g} bp)" in serious["detail"].iloc[0]
    # the move back the next day is reported at info, not as a second jump
    info = new[new["severity"] == "info"]
    assert keyset(info) == {(days[k + 1], tenor)}
    assert "the move back from the outlier of " + str(days[k]) in info["detail"].iloc[0]


def test_small_single_tenor_spike_below_jump_bp_is_an_outlier():
    days, r = random_walk_history(1500, seed=9)
    bad = r.copy()
    bad[400, LABELS.index("7Y")] += 0.0040  # 40 bp, below jump_bp = 75
    out = checks.jumps(days, LABELS, bad, make_cfg())
    serious = out[out["severity"] != "info"]
    assert (days[400], "7Y") in keyset(serious)
    assert (days[401], "7Y") not in keyset(serious)


def test_a_genuine_parallel_shift_is_a_jump_on_every_tenor_but_not_an_outlier():
    days, r = random_walk_history(600, seed=2)
    shifted = r.copy()
    shifted[300:] += 0.0100  # +100 bp across the curve, and it stays
    out = checks.jumps(days, LABELS, shifted, make_cfg())
    on_day = out[out["as_of"].to_numpy().astype("datetime64[D]") == days[300]]
    assert set(on_day["tenor"]) == set(LABELS)
    assert (on_day["severity"] == DEFAULT_SEVERITY["jump"]).all()
    assert not on_day["detail"].str.contains("MADs").any()
    assert not (out["as_of"].to_numpy().astype("datetime64[D]") == days[301]).any()


def test_two_units_errors_in_a_row_are_two_bad_days():
    # bad, back, bad again: neither bad day may be excused as a "move back"
    days, r = random_walk_history(800, seed=4)
    bad = r.copy()
    j = LABELS.index("3Y")
    bad[500, j] *= 10
    bad[502, j] *= 10
    out = checks.jumps(days, LABELS, bad, make_cfg())
    col = out[out["tenor"] == "3Y"]
    sev = dict(zip(col["as_of"].to_numpy().astype("datetime64[D]"), col["severity"], strict=True))
    assert sev[days[500]] == "reject" and sev[days[502]] == "reject"
    assert sev[days[501]] == "info" and sev[days[503]] == "info"


def test_jump_after_a_missing_quote_compares_with_the_last_quote():
    days, r = random_walk_history(400, seed=8)
    bad = r.copy()
    j = LABELS.index("2Y")
    bad[200, j] = np.nan
    bad[201, j] *= 10
    out = checks.jumps(days, LABELS, bad, make_cfg())
    row = out[(out["tenor"] == "2Y") & (out["severity"] != "info")]
    assert keyset(row) == {(days[201], "2Y")}
    assert f"on {days[199]}" in row["detail"].iloc[0]


def test_discount_factor_curve_judges_moves_in_implied_rates():
    days, r = random_walk_history(600, seed=6)
    years = np.array([parse_tenor(t).approx_days / 365.25 for t in LABELS])
    dfs = np.exp(-r * years)
    dfs[300, LABELS.index("10Y")] = dfs[300, LABELS.index("10Y")] ** 10  # rate x10
    out = checks.jumps(days, LABELS, dfs, make_cfg(quote="discount"))
    serious = out[out["severity"] != "info"]
    assert keyset(serious) == {(days[300], "10Y")}
    assert "implied zero rate" in serious["detail"].iloc[0]


def pandas_jump_rule(days, r, jump_bp, outlier_mads):
    """Independent computation of the jump rule of ``checks.jumps``' docstring, in plain pandas, for a
    history with every quote present: the day-on-day move (``diff``), the move against the neighbouring
    tenors (one on each side; at an end of the curve the nearest two on the one side), combined as the
    smaller excess when both agree in sign and 0 when they disagree, scored in raw MADs (floored at
    1 bp) from its median over the history; flagged when beyond ``jump_bp`` or ``outlier_mads``.
    Returns ``{(day, tenor): severity}``, ``info`` for the move back from an outlier (the next move,
    flagged too, opposite in sign, going back at least half-way; in a chain every second one)."""
    frame = pd.DataFrame(r, index=pd.DatetimeIndex(days), columns=LABELS)
    move = frame.diff()
    n = len(LABELS)
    rel = pd.DataFrame(index=frame.index, columns=LABELS, dtype=float)
    for j, col in enumerate(LABELS):
        if j == 0:
            sides = (LABELS[1], LABELS[2])
        elif j == n - 1:
            sides = (LABELS[n - 2], LABELS[n - 3])
        else:
            sides = (LABELS[j - 1], LABELS[j + 1])
        a = move[col] - move[sides[0]]
        b = move[col] - move[sides[1]]
        smaller = a.where(a.abs() <= b.abs(), b)
        rel[col] = smaller.where(np.sign(a) == np.sign(b), 0.0).where(move[col].notna())
    med = rel.median()
    mad = (rel - med).abs().median().clip(lower=1e-4)
    outlier = (rel - med).abs().div(mad) > outlier_mads
    flagged = (move.abs() * 1e4 > jump_bp) | outlier
    back_cand = (flagged & flagged.shift(1, fill_value=False)
                 & (np.sign(move) == -np.sign(move.shift(1)))
                 & ((frame - (frame.shift(1) - move.shift(1))).abs() <= 0.5 * move.shift(1).abs()))
    out = {}
    for col in LABELS:
        c = back_cand[col]
        run = c.astype(int).groupby((~c).cumsum()).cumsum()
        for day in flagged.index[flagged[col]]:
            out[(np.datetime64(day, "D"), col)] = "info" if run[day] % 2 == 1 else DEFAULT_SEVERITY["jump"]
    return out


@pytest.mark.parametrize(("jump_bp", "outlier_mads"), [(75.0, 8.0), (1e9, 8.0), (30.0, 5.0), (1e9, 3.0)],
                         ids=["defaults", "outliers-only", "tighter", "many-outliers"])
def test_jump_and_outlier_flags_equal_a_plain_pandas_recomputation(jump_bp, outlier_mads):
    days, r = random_walk_history(1500, seed=5)
    # fat-tailed (Student t, 3 dof) quote noise of about 2 bp a tenor: the MAD of the relative moves
    # is then above its 1-bp floor and the thresholds cut through the bulk of the moves, so the
    # comparison sees many borderline days, not only the planted ones
    noise = np.random.default_rng(21).standard_t(3, size=r.shape) * 2e-4
    bad = np.round(r + noise, 6)
    bad[700, LABELS.index("5Y")] *= 10                 # units slip, interior tenor
    bad[300, LABELS.index("1M")] /= 100                # units slip at the short end
    bad[1100, LABELS.index("30Y")] *= 10               # at the long end
    bad[400, LABELS.index("7Y")] += 0.0040             # a 40 bp spike on one tenor
    bad[500, LABELS.index("3Y")] *= 10                 # bad, back, bad again, back
    bad[502, LABELS.index("3Y")] *= 10
    bad[900:] += 0.0100                                # a real parallel shift that stays
    bad[[901, 1201], LABELS.index("2Y")] += 0.0300      # two spikes far apart: their moves back are info
    cfg = make_cfg(jump_bp=jump_bp, outlier_mads=outlier_mads)
    out = checks.jumps(days, LABELS, bad, cfg)
    got = {(np.datetime64(a, "D"), t): sev for a, t, sev in zip(out["as_of"], out["tenor"], out["severity"],
                                                                strict=True)}
    want = pandas_jump_rule(days, bad, jump_bp, outlier_mads)
    assert len(got) == len(out)  # one finding per (day, tenor)
    assert got == want
    assert len(got) >= 20
    # the planted days are among them, so the comparison is not of two empty sets
    for k, tenor in ((700, "5Y"), (300, "1M"), (1100, "30Y"), (500, "3Y"), (502, "3Y"), (901, "2Y")):
        assert got[(days[k], tenor)] == DEFAULT_SEVERITY["jump"]
    assert got[(days[701], "5Y")] == "info" and got[(days[902], "2Y")] == "info"


# --- incremental ----------------------------------------------------------------------------------

def test_incremental_run_with_previous_matches_the_full_run_on_its_range():
    days, r = random_walk_history(900, seed=12)
    bad = r.copy()
    bad[600, 4] *= 10
    bad[599, 2] *= 10  # an outlier the day before the split: its move back lands in the new range
    bad[650] = bad[649]
    bad[700:712, 7] = bad[699, 7]
    keep = np.ones(len(days), dtype=bool)
    keep[[580, 620, 621]] = False
    days, bad = days[keep], bad[keep]
    cfg = make_cfg()
    full = checks.curve_checks(days, LABELS, bad, cfg)
    split = 599  # the compressed row of original day 600: the range starts on a units error
    part = checks.curve_checks(days[split:], LABELS, bad[split:], cfg, previous=(days[:split], bad[:split]))
    lo = days[split - 1] + np.timedelta64(1, "D")
    assert {"missing_day", "stale_curve", "jump"} <= set(part["check_name"])
    ref = full[full["as_of"].to_numpy().astype("datetime64[D]") >= lo].reset_index(drop=True)
    pd.testing.assert_frame_equal(part.reset_index(drop=True), ref)


# --- inversions -----------------------------------------------------------------------------------

def pandas_episodes(days, r, short, long):
    """Independent computation: plain pandas groupby on runs of inverted judged days."""
    frame = pd.DataFrame({"day": days, "spread": r[:, LABELS.index(long)] - r[:, LABELS.index(short)]})
    frame = frame.dropna()
    inv = frame["spread"] < 0
    run = (inv != inv.shift()).cumsum()
    g = frame[inv].groupby(run[inv])
    out = pd.DataFrame({
        "short_tenor": short, "long_tenor": long,
        "first_day": g["day"].first(), "last_day": g["day"].last(),
        "days": g.size(), "deepest_bp": g["spread"].min() * 1e4,
    })
    return out.reset_index(drop=True)


@pytest.mark.parametrize("seed", [0, 1, 2], ids=["seed0", "seed1", "seed2"])
def test_inversion_episodes_agree_with_plain_pandas(seed):
    rng = np.random.default_rng(seed)
    all_days = BusinessCalendar().business_days(d("2031-01-01"), d("2033-12-31"))
    days = np.sort(rng.choice(all_days, size=600, replace=False))  # missing business days in between
    r = 0.03 + np.cumsum(rng.normal(0, 5e-4, (600, 12)), axis=0)
    r[rng.random(r.shape) < 0.05] = np.nan  # missing quotes: a day not judged for that pair
    cfg = make_cfg()
    got = checks.inversion_episodes(days, LABELS, r, cfg)
    ref = pd.concat([pandas_episodes(days, r, "2Y", "10Y"), pandas_episodes(days, r, "3M", "10Y")],
                    ignore_index=True)
    ref["first_day"] = ref["first_day"].astype("datetime64[s]")
    ref["last_day"] = ref["last_day"].astype("datetime64[s]")
    ref = ref.sort_values(["short_tenor", "long_tenor", "first_day"], ignore_index=True)
    assert len(got) > 5
    pd.testing.assert_frame_equal(got, ref, check_dtype=False)
    # findings: one per inverted judged day, and the days add up to the episodes' lengths
    found = checks.inversions(days, LABELS, r, cfg)
    assert len(found) == got["days"].sum()
    assert set(found["tenor"]) == {"3M/10Y", "2Y/10Y"}


def test_inversion_detail_gives_spread_in_bp_and_missing_day_does_not_break_an_episode():
    # Mon 5 May .. Tue 13 May 2031; Wed 7 May, a business day, has no curve at all, and on 8 May the
    # 10Y is not quoted (the pair is not judged): neither breaks the run of 5, 6 and 9 May; the judged,
    # not inverted 12 May does
    days = days_of("2031-05-05", "2031-05-06", "2031-05-08", "2031-05-09", "2031-05-12", "2031-05-13")
    assert np.is_busday(d("2031-05-07")) and d("2031-05-07") not in days
    r = np.full((6, 12), 0.04)
    j3m, j10 = LABELS.index("3M"), LABELS.index("10Y")
    r[:, j3m] = [0.0450, 0.0460, 0.0455, 0.0440, 0.0380, 0.0470]
    r[:, j10] = [0.0420, 0.0400, 0.0410, 0.0410, 0.0400, 0.0420]
    r[2, j10] = np.nan  # 8 May not judged
    cfg = make_cfg(inversion_pairs=((parse_tenor("3M"), parse_tenor("10Y")),))
    ep = checks.inversion_episodes(days, LABELS, r, cfg)
    assert ep[["first_day", "last_day", "days"]].astype(str).values.tolist() == [
        ["2031-05-05", "2031-05-09", "3"], ["2031-05-13", "2031-05-13", "1"]]
    assert ep["deepest_bp"].tolist() == pytest.approx([-60.0, -50.0])
    # the plain-pandas runs of this module agree
    ref = pandas_episodes(days, r, "3M", "10Y")
    assert ref[["days"]].values.ravel().tolist() == [3, 1]
    found = checks.inversions(days, LABELS, r, cfg)
    assert found["detail"].iloc[1] == "10Y 0.04 below 3M 0.046: spread -60.0 bp"


# --- shape of built curves ------------------------------------------------------------------------

def test_curve_shape_checks_one_finding_per_day_with_location():
    t = np.tile(np.linspace(0.0, 30.0, 121), (3, 1))
    z = np.stack([0.03 + 0.01 * (1 - np.exp(-t[0] / 3))] * 3)
    p = np.exp(-z * t)
    p[1, 40:43] = p[1, 39] * np.array([1.001, 1.0015, 1.0012])  # rises after t = 9.75
    out = checks.curve_shape_checks(days_of("2031-01-02", "2031-01-03", "2031-01-06"), t, p, make_cfg())
    assert len(out) == 2
    assert set(out["check_name"]) == {"non_monotone_discount", "negative_forward"}
    assert (out["as_of"].to_numpy().astype("datetime64[D]") == d("2031-01-03")).all()
    nm = out[out["check_name"] == "non_monotone_discount"]["detail"].iloc[0]
    assert "at t=9.75y to" in nm and "2 grid point(s)" in nm
    nf = out[out["check_name"] == "negative_forward"]["detail"].iloc[0]
    # the most negative one-period forward: ln(1/1.001) / 0.25
    assert f"{np.log(1 / 1.001) / 0.25:.6g}" in nf and "[9.75y, 10y]" in nf


def test_negative_rates_raise_discount_factors_but_are_no_negative_forward():
    t = np.tile(np.linspace(0.25, 10.0, 40), (1, 1))
    p = np.exp(0.005 * t)  # -0.5 % flat
    out = checks.curve_shape_checks(days_of("2031-01-02"), t, p, make_cfg())
    assert list(out["check_name"]) == ["non_monotone_discount"]


# --- duplicates -----------------------------------------------------------------------------------

def test_duplicates_with_different_values_only():
    rows = pd.DataFrame({
        "line": [2, 3, 4, 5, 6, 7, 8],
        "as_of": pd.to_datetime(["2031-01-02"] * 4 + ["2031-01-03"] * 2 + [None]),
        "tenor": ["3M", "3M", "1Y", "1Y", "3M", "3M", "3M"],
        "rate": [0.0425, 0.0430, 0.05, 0.05, 0.04, 0.041, 0.05],
        "raw": ["x"] * 7,
    })
    out = checks.duplicate_findings(rows, make_cfg())
    # plain pandas: (day, tenor) groups with more than one distinct rate
    clean = rows.dropna(subset=["as_of"])
    ref = clean.groupby(["as_of", "tenor"])["rate"].nunique()
    ref = {(np.datetime64(a, "D"), t) for (a, t), n in ref.items() if n > 1}
    assert keyset(out) == ref == {(d("2031-01-02"), "3M"), (d("2031-01-03"), "3M")}
    assert out["detail"].iloc[0] == "2 rows for 3M on 2031-01-02 with different rates: 0.0425 (line 2), 0.043 (line 3)"
    assert (out["severity"] == DEFAULT_SEVERITY["duplicate"]).all()


def test_identical_duplicates_are_not_findings_and_severity_comes_from_config():
    rows = pd.DataFrame({"line": [2, 3], "as_of": pd.to_datetime(["2031-01-02"] * 2), "tenor": ["3M", "3M"],
                         "rate": [0.0425, 0.0425], "raw": ["a", "b"]})
    assert len(checks.duplicate_findings(rows)) == 0
    rows.loc[1, "rate"] = 0.05
    sev = dict(DEFAULT_SEVERITY, duplicate="reject")
    out = checks.duplicate_findings(rows, make_cfg(severity=sev))
    assert out["severity"].tolist() == ["reject"]


def test_severity_is_taken_from_config_per_check():
    days, r = random_walk_history(100)
    r = r.copy()
    r[50, 2] *= 10
    # an inversion of 3M/10Y on days 70-72 (the 3M quote put 50 bp above the 10Y one), so the
    # inversion override has findings to act on
    r[70:73, LABELS.index("3M")] = r[70:73, LABELS.index("10Y")] + 0.0050
    sev = dict(DEFAULT_SEVERITY, jump="warn", inversion="reject")
    out = checks.curve_checks(days, LABELS, r, make_cfg(severity=sev))
    by = out.groupby("check_name")["severity"].agg(set)
    assert by["jump"] <= {"warn", "info"} and "warn" in by["jump"]
    inv = out[out["check_name"] == "inversion"]
    assert {(np.datetime64(a, "D"), t) for a, t in zip(inv["as_of"], inv["tenor"], strict=True)
            if t == "3M/10Y"} >= {(days[k], "3M/10Y") for k in (70, 71, 72)}
    assert set(inv["severity"]) == {"reject"}
    # the same history with the default severities: the inversions are reported at the default
    plain = checks.curve_checks(days, LABELS, r, make_cfg())
    assert DEFAULT_SEVERITY["inversion"] != "reject"
    assert set(plain[plain["check_name"] == "inversion"]["severity"]) == {DEFAULT_SEVERITY["inversion"]}
    assert len(plain[plain["check_name"] == "inversion"]) == len(inv)


def test_pairs_inverted_on_their_first_judged_day():
    # hand-made panel (reference: the rule in the docstring): 3M/10Y is not judged on day 0 (10Y missing) and
    # inverted on day 1, its first judged day; 2Y/10Y is judged on day 1 first and not inverted there
    days = np.array(["2031-01-02", "2031-01-03", "2031-01-06"], dtype="datetime64[D]")
    rates = np.full((3, len(LABELS)), 0.04)
    i3m, i2y, i10y = LABELS.index("3M"), LABELS.index("2Y"), LABELS.index("10Y")
    rates[0, i10y] = np.nan
    rates[1, i3m], rates[1, i2y], rates[1, i10y] = 0.05, 0.035, 0.045
    rates[2, i10y] = 0.03                                        # later inversions do not matter
    cfg = make_cfg()
    assert checks.pairs_inverted_first(days, LABELS, rates, cfg) == [("3M", "10Y")]
    # the same days seen from the last day only: both pairs inverted there
    assert checks.pairs_inverted_first(days[2:], LABELS, rates[2:], cfg) == [("3M", "10Y"), ("2Y", "10Y")]


def test_pair_spreads_are_long_minus_short_in_bp_and_agree_with_the_episodes():
    # the spreads the report charts are the ones the episodes are cut from: the most negative spread of
    # each episode is its deepest_bp; a day with either tenor missing has no spread for that pair
    days = days_of("2031-05-05", "2031-05-06", "2031-05-08", "2031-05-09", "2031-05-12", "2031-05-13")
    r = np.full((6, 12), 0.04)
    j3m, j10 = LABELS.index("3M"), LABELS.index("10Y")
    r[:, j3m] = [0.0450, 0.0460, 0.0455, 0.0440, 0.0380, 0.0470]
    r[:, j10] = [0.0420, 0.0400, 0.0410, 0.0410, 0.0400, 0.0420]
    r[2, j10] = np.nan
    cfg = make_cfg()  # 2Y/10Y and 3M/10Y
    sp = checks.pair_spreads(days, LABELS, r, cfg)
    three = sp[sp["short_tenor"] == "3M"]
    # 10Y - 3M by hand: -30, -60, (8 May missing), -30, +20, -50 bp
    assert three["spread_bp"].tolist() == pytest.approx([-30.0, -60.0, -30.0, 20.0, -50.0])
    assert three["as_of"].astype(str).str[:10].tolist() == ["2031-05-05", "2031-05-06", "2031-05-09",
                                                            "2031-05-12", "2031-05-13"]
    two = sp[sp["short_tenor"] == "2Y"]
    # 10Y - 2Y (the 2Y at 4 %) by hand: +20, 0, (8 May missing), +10, 0, +20 bp
    assert two["spread_bp"].tolist() == pytest.approx([20.0, 0.0, 10.0, 0.0, 20.0])
    ep = checks.inversion_episodes(days, LABELS, r, cfg)
    assert ep.loc[ep["short_tenor"] == "3M", "deepest_bp"].tolist() == pytest.approx([-60.0, -50.0])
