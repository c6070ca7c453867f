"""The whole-record audit computed in parts by cell (as the backfill does on Dask workers) and joined
is the audit of the whole record."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.audit.refresh import audit_record, join_audits, split_record
from pipeline.config import CurveConfig
from pipeline.tenors import parse_tenor


def outcomes(cells: list[tuple[int, int]], n: int = 400) -> pd.DataFrame:
    """Invented outcomes: for each (start, tenor) cell, ``n`` consecutive days of an h-day forecast of a
    smooth rate path with a premium, episodes of inversion; sorted as read_outcomes sorts them."""
    frames = []
    for k, (s, m) in enumerate(cells):
        h = 20 + 5 * k
        t = np.arange(n + h)
        level = 0.03 + 0.004 * np.sin(t / (17.0 + k)) + 0.001 * np.cos(t / 3.1)
        as_of = np.datetime64("2010-01-04") + np.arange(n)
        forward = level[:n] + (5 + k) / 1e4 + 0.0002 * np.sin(np.arange(n) / 2.3)
        frames.append(pd.DataFrame({
            "curve": "demo", "as_of": as_of, "start_months": s, "tenor_months": m, "target_date": as_of + h,
            "observed_on": as_of + h, "forward_rate": forward, "realized_rate": level[h:], "spot_rate": level[:n],
            "error_bp": (forward - level[h:]) * 1e4, "rw_error_bp": (level[:n] - level[h:]) * 1e4,
            "inverted": pd.array(np.arange(n) % 90 < 30, dtype="boolean"),
            "realized_at": pd.Timestamp("2012-01-01") + pd.to_timedelta(np.arange(n), "h")}))
    return pd.concat(frames, ignore_index=True)


def curve() -> CurveConfig:
    tenors = tuple(parse_tenor(x) for x in ("3M", "1Y", "5Y"))
    return CurveConfig("demo", quote="zero", compounding="continuous", interpolation="linear_zero", tenors=tenors,
                       forward_starts=tenors[:2], forward_tenors=tenors[:2], premium_window_days=120)


@pytest.mark.parametrize("parts", [2, 3, 7])
def test_an_audit_in_parts_by_cell_joins_to_the_audit_of_the_whole(parts):
    # the reference is this project's own whole-record audit (checked elsewhere against statsmodels);
    # here only the cutting and joining is under test, so equality is exact
    record = outcomes([(3, 3), (3, 12), (12, 3), (12, 12), (24, 60)])
    now = pd.Timestamp("2013-01-01")
    whole = audit_record(record, curve().premium_window_days, now)
    pieces = split_record(record, parts)
    assert 1 < len(pieces) <= parts
    assert sum(len(p) for p in pieces) == len(record)
    for p in pieces:  # cut between cells only
        cells = set(zip(p["start_months"], p["tenor_months"], strict=True))
        others = [set(zip(q["start_months"], q["tenor_months"], strict=True)) for q in pieces if q is not p]
        assert all(not cells & o for o in others)
    version = record["realized_at"].max()
    joined = join_audits([audit_record(p, curve().premium_window_days, now, version=version) for p in pieces])
    pd.testing.assert_frame_equal(joined.summary, whole.summary, check_exact=True)
    pd.testing.assert_frame_equal(joined.premium, whole.premium, check_exact=True)
    assert joined.data_version == whole.data_version
    assert sorted(joined.states) == sorted(whole.states)
    for key, (state, tail) in whole.states.items():
        assert joined.states[key][0].as_record().keys() == state.as_record().keys()
        for field, value in state.as_record().items():
            np.testing.assert_array_equal(np.asarray(joined.states[key][0].as_record()[field]), np.asarray(value))
        for col, arr in tail.items():
            np.testing.assert_array_equal(joined.states[key][1][col], arr)


def test_a_record_of_one_cell_is_not_cut():
    record = outcomes([(3, 12)])
    assert len(split_record(record, 4)) == 1
