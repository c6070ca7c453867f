"""The incremental audit fold without a store: states built on part of a record, the rest folded in,
equal the whole-record audit (the reference: :func:`pipeline.audit.summarize` and
:func:`pipeline.audit.term_premium`, themselves checked against statsmodels in ``test_audit.py``).

The same equality runs through a real store in ``tests/e2e/test_audit_incremental.py``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.audit import SUMMARY_COLUMNS, summarize, term_premium
from pipeline.audit.refresh import build_states, fold, settle

WINDOW = 60
RTOL = 1e-9


def _record(n: int = 500, seed: int = 4) -> pd.DataFrame:
    """Invented outcomes of three cells of h-day forecasts, sorted by (start, tenor, as_of), the regime
    flipping in episodes; ``realized_at`` follows the target date, as realisation does."""
    rng = np.random.default_rng(seed)
    frames = []
    for k, (s, m, h) in enumerate([(0, 3, 40), (3, 12, 63), (12, 12, 250)]):
        t = np.arange(n + h)
        level = 0.03 + np.cumsum(rng.normal(0, 2e-4, n + h))
        as_of = np.datetime64("2030-01-01") + np.arange(n)
        forward = level[:n] + (4 + 3 * k) / 1e4 + rng.normal(0, 1e-4, n)
        frames.append(pd.DataFrame({
            "curve": "zc", "as_of": as_of, "start_months": s, "tenor_months": m, "target_date": as_of + h,
            "observed_on": as_of + h, "forward_rate": forward, "realized_rate": level[h:], "spot_rate": level[:n],
            "error_bp": (forward - level[h:]) * 1e4, "rw_error_bp": (level[:n] - level[h:]) * 1e4,
            "inverted": pd.array((t[:n] // 70) % 3 == 1, dtype="boolean"),
            "realized_at": pd.Timestamp("2031-01-01") + pd.to_timedelta(t[:n] + h, "D")}))
    return pd.concat(frames, ignore_index=True)


def _compare(got: pd.DataFrame, want: pd.DataFrame, keys: list[str]) -> None:
    got = got.sort_values(keys).reset_index(drop=True)
    want = want.sort_values(keys).reset_index(drop=True)
    got["as_of"] = pd.to_datetime(got["as_of"]) if "as_of" in keys else None
    want["as_of"] = pd.to_datetime(want["as_of"]) if "as_of" in keys else None
    pd.testing.assert_frame_equal(got[keys], want[keys], check_dtype=False)
    for col in want.columns:
        if col in keys or col == "curve":
            continue
        a, b = got[col].to_numpy(), want[col].to_numpy()
        if np.issubdtype(np.asarray(b).dtype, np.number):
            np.testing.assert_allclose(a.astype(float), b.astype(float), rtol=RTOL, atol=1e-9, equal_nan=True,
                                       err_msg=col)
        else:
            assert list(a) == list(b), col


def _cells(frame: pd.DataFrame, cells: list[tuple[int, int]]) -> pd.Series:
    return pd.Series(pd.MultiIndex.from_frame(frame[["start_months", "tenor_months"]]).isin(cells), index=frame.index)


@pytest.mark.parametrize("days", [1, 7], ids=["daily", "weekly"])
def test_folding_the_newer_outcomes_step_by_step_equals_the_whole_record(days):
    # as the daily job does: the outcomes realised since the last refresh are folded in; a cell whose
    # new rows the state cannot take is rebuilt from its record (here: the rows realised so far)
    record = _record()
    stamps = np.sort(record["realized_at"].unique())
    first = stamps[len(stamps) - 60]
    seen = record.loc[record["realized_at"] < first].reset_index(drop=True)
    states = build_states(seen, WINDOW)
    premium = term_premium(seen, WINDOW)
    folded_steps = rebuilt = 0
    for lo in range(len(stamps) - 60, len(stamps), days):
        hi = stamps[min(lo + days, len(stamps)) - 1]
        step = (record["realized_at"] >= stamps[lo]) & (record["realized_at"] <= hi)
        new = record.loc[step].reset_index(drop=True)
        seen = pd.concat([seen, new]).sort_values(["start_months", "tenor_months", "as_of"], kind="stable")
        seen = seen.reset_index(drop=True)
        f = fold("zc", states, new, WINDOW)
        redo = seen.loc[_cells(seen, f.recompute)].reset_index(drop=True) if f.recompute else None
        summary, added = settle(f, redo)
        premium = pd.concat([premium.loc[~_cells(premium, f.recompute)], added], ignore_index=True)
        states = f.states
        folded_steps += len(f.recompute) < 3
        rebuilt += len(f.recompute)
    assert folded_steps > 0.8 * (60 // days)      # the fold, not the rebuild, did most of the work
    _compare(summary[list(SUMMARY_COLUMNS)], summarize(record)[list(SUMMARY_COLUMNS)],
             ["start_months", "tenor_months", "regime"])
    _compare(premium, term_premium(record, WINDOW), ["start_months", "tenor_months", "as_of"])


def test_a_late_outcome_names_its_cell_for_a_rebuild_and_settle_rebuilds_it():
    record = _record()
    newer = record["realized_at"] > np.sort(record["realized_at"].unique())[-2]   # the last day's outcomes
    # one outcome of the (3, 12) cell realised late: its as-of date is before the cell's last one
    late = record.index[(record["start_months"] == 3) & ~newer][10]
    old = record.loc[~newer].drop(index=late).reset_index(drop=True)
    new = pd.concat([record.loc[[late]], record.loc[newer]]).sort_values(
        ["start_months", "tenor_months", "as_of"], kind="stable").reset_index(drop=True)
    folded = fold("zc", build_states(old, WINDOW), new, WINDOW)
    assert folded.recompute == [(3, 12)]
    with pytest.raises(ValueError, match="no record"):
        settle(fold("zc", build_states(old, WINDOW), new, WINDOW))
    cell = record.loc[(record["start_months"] == 3) & (record["tenor_months"] == 12)].reset_index(drop=True)
    summary, premium = settle(folded, cell)
    _compare(summary[list(SUMMARY_COLUMNS)], summarize(record)[list(SUMMARY_COLUMNS)],
             ["start_months", "tenor_months", "regime"])
    assert {(int(s), int(m)) for s, m in zip(premium["start_months"], premium["tenor_months"], strict=True)
            if (s, m) == (3, 12)} == {(3, 12)}
    _compare(premium.loc[premium["start_months"] == 3], term_premium(cell, WINDOW),
             ["start_months", "tenor_months", "as_of"])
