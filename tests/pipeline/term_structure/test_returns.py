"""Excess holding-period returns against two outside computations.

References: the PyPI package ``pyacm`` (2.x), whose ``NominalACM.rx_m`` holds the one-month log
excess returns ``ln P(n-1)_{t+1} - ln P(n)_t - y(1)_t/12`` of the same panel (monthly units, so ours
are 12 times it); and a plain pandas computation from log bond prices ``ln P(n) = -y(n) n/12`` on a
calendar-month index (the definition in Cochrane & Piazzesi 2005, maturities in months).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from pyacm import NominalACM

from pipeline.term_structure import EXCESS_RETURN_COLUMNS, ModelInputError, excess_returns, term_panel_from_yields
from tests.pipeline.term_structure.panels import month_ends, synthetic_yields


def _pandas_rx(days: np.ndarray, y: np.ndarray, h: int) -> pd.DataFrame:
    """rx(n, h) realised at t+h from log prices, on a calendar-month index with gaps as NaN."""
    n = y.shape[1]
    months = pd.PeriodIndex(pd.DatetimeIndex(days), freq="M")
    full = pd.period_range(months[0], months[-1], freq="M")
    logp = pd.DataFrame(-y * np.arange(1, n + 1) / 12.0, index=months, columns=range(1, n + 1)).reindex(full)
    date = pd.Series(pd.DatetimeIndex(days), index=months).reindex(full)
    rows = []
    for m in range(h + 1, n + 1):
        ret = logp[m - h].shift(-h) - logp[m] + logp[h]  # + ln P(h)_t = - y(h)_t h/12
        rx = (ret * 12.0 / h).shift(h)  # dated at the month of realisation
        rows.append(pd.DataFrame({"as_of": date, "maturity_months": m, "holding_months": h, "rx": rx}))
    out = pd.concat(rows).dropna()
    return out.sort_values(["as_of", "maturity_months"], ignore_index=True)


def test_one_month_returns_are_twelve_times_pyacm():
    days = month_ends("2001-01", 60)
    y = synthetic_yields(seed=3, months=60, n=24)
    ours = excess_returns(term_panel_from_yields(days, y, "s"), holding_months=(1,))
    acm = NominalACM(pd.DataFrame(y, index=pd.DatetimeIndex(days), columns=range(1, 25)), None, n_factors=3)
    ref = acm.rx_m.loc[:, 2:]  # maturity 1 is identically zero there; we give it no row
    got = ours.pivot(index="as_of", columns="maturity_months", values="rx")
    assert got.shape == ref.shape == (59, 23)
    np.testing.assert_allclose(got.to_numpy(), 12.0 * ref.to_numpy(), rtol=0, atol=1e-14)


@pytest.mark.parametrize("h", [1, 12], ids=["monthly", "annual"])
def test_returns_match_log_prices_and_never_bridge_a_gap(h):
    days = month_ends("1999-01", 40)
    y = synthetic_yields(seed=5, months=40, n=30)
    gone = np.isin(np.arange(40), [7, 20])  # two months with no built day
    panel = term_panel_from_yields(days[~gone], y[~gone], "g")
    assert panel.skipped_months == ("1999-08", "2000-09")
    ours = excess_returns(panel, holding_months=(h,))
    ref = _pandas_rx(days[~gone], y[~gone], h)
    assert tuple(ours.columns) == EXCESS_RETURN_COLUMNS
    assert len(ours) == len(ref) > 0
    np.testing.assert_array_equal(ours["as_of"].to_numpy().astype("datetime64[D]"),
                                  ref["as_of"].to_numpy().astype("datetime64[D]"))
    np.testing.assert_array_equal(ours["maturity_months"], ref["maturity_months"])
    np.testing.assert_allclose(ours["rx"], ref["rx"], rtol=0, atol=1e-14)
    # no return is realised in a month right after (or h months after) a skipped one
    realised = set(ours["as_of"].to_numpy().astype("datetime64[M]").astype(str))
    for skipped in (7, 20):
        assert str(days[skipped + h].astype("datetime64[M]")) not in realised


def test_a_holding_period_as_long_as_the_panel_is_refused():
    panel = term_panel_from_yields(month_ends("2001-01", 30), synthetic_yields(1, 30, n=12), "short")
    with pytest.raises(ModelInputError, match="holding period") as err:
        excess_returns(panel, holding_months=(12,))
    assert "\n" not in str(err.value)
