"""The term-structure tables: ``term_panel_point``, ``excess_return_point``, ``eh_regression_result``,
``eh_verdict``, ``model_term_premium_point`` and ``model_estimate`` (one row per curve: the latest
estimate's bookkeeping); and what the model step reads: a curve's official built curves as stored.

Functions take an open connection; the caller owns the transaction (:func:`warehouse.connect.transaction`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyarrow as pa

from warehouse.frames import append_frame

__all__ = ["Estimate", "StoredCurves", "built_days", "last_estimate", "replace_curve", "stored_curves"]

PANEL_COLUMNS = ["curve", "as_of", "maturity_months", "zero_rate_cc"]
RETURN_COLUMNS = ["curve", "as_of", "maturity_months", "holding_months", "rx"]
EH_COLUMNS = ["curve", "test", "maturity_months", "coef", "se", "hac_t", "r2", "n", "lags", "first_as_of",
              "last_as_of"]
MODEL_COLUMNS = ["curve", "as_of", "maturity_months", "fit", "model_yield", "risk_neutral_yield", "term_premium",
                 "estimated_through"]


@dataclass(frozen=True)
class StoredCurves:
    """A curve's official built days as stored: ``as_of`` ``(D,)`` datetime64[D], ``methods`` ``(D,)``,
    node ``times`` and continuous ``zero_cc`` ``(D, n)`` at the quoted tenors (year fractions on the
    curve's day count, columns in maturity order, NaN where a day has no row for a tenor), NSS
    ``params`` ``(D, 6)`` (NaN for days without), ``built_at`` ``(D,)`` datetime64[us]."""

    as_of: np.ndarray
    methods: np.ndarray
    times: np.ndarray
    zero_cc: np.ndarray
    params: np.ndarray
    built_at: np.ndarray


@dataclass(frozen=True)
class Estimate:
    """The ``model_estimate`` row of a curve (see ``sql/011_term_structure.sql``)."""

    computed_at: object
    factors: int
    max_months: int
    panel_through: object
    months: int
    skipped_months: tuple[str, ...]
    realtime_fits: int
    realtime_passed: tuple[str, ...]
    full_problem: str | None


_ON_DAY = "($on IS NULL OR b.as_of = CAST($on AS DATE))"


def _day(on: object) -> str | None:
    return None if on is None else str(np.datetime64(on, "D"))


def built_days(con, curve: str, on: object = None) -> tuple[np.ndarray, np.ndarray]:  # noqa: ANN001
    """The official built days of ``curve`` ``(D,)`` datetime64[D], sorted, and when each was built
    ``(D,)`` datetime64[us]; with ``on`` (a day), that day only (none when it was not built)."""
    t = con.sql(f"SELECT as_of, built_at FROM built_day b WHERE curve = $curve AND scenario = 'official' "
                f"AND {_ON_DAY} ORDER BY as_of", params={"curve": curve, "on": _day(on)}).to_arrow_table()
    return t["as_of"].to_numpy().astype("datetime64[D]"), t["built_at"].to_numpy().astype("datetime64[us]")


def stored_curves(con, curve: str, on: object = None) -> StoredCurves:  # noqa: ANN001
    """The official built curves of ``curve``: every built day's nodes at its quoted tenors; with
    ``on`` (a day), that day's only (``D = 0`` when it was not built)."""
    days, built_at = built_days(con, curve, on)
    params_on = {"curve": curve, "on": _day(on)}
    meta = con.sql("SELECT b.as_of, b.method, f.params FROM built_day b LEFT JOIN curve_fit f ON "
                   "f.curve = b.curve AND f.scenario = b.scenario AND f.as_of = b.as_of "
                   f"WHERE b.curve = $curve AND b.scenario = 'official' AND {_ON_DAY} ORDER BY b.as_of",
                   params=params_on).to_arrow_table()
    pts = con.sql("SELECT b.as_of, z.tenor, z.year_fraction, z.zero_rate_cc FROM zero_point z "
                  "JOIN built_day b ON b.build_key = z.build_key "
                  f"WHERE b.curve = $curve AND b.scenario = 'official' AND z.quoted AND {_ON_DAY}",
                  params=params_on).to_arrow_table()
    params = np.full((days.size, 6), np.nan)
    for i, p in enumerate(meta["params"].to_pylist()):  # NSS days only carry parameters
        if p is not None:
            params[i] = p
    labels = np.asarray(pts["tenor"].to_pylist(), dtype=object)
    tenors, col = np.unique(labels, return_inverse=True)
    yf = pts["year_fraction"].to_numpy()
    times = np.full((days.size, tenors.size), np.nan)
    zero = np.full((days.size, tenors.size), np.nan)
    row = np.searchsorted(days, pts["as_of"].to_numpy().astype("datetime64[D]"))
    times[row, col] = yf
    zero[row, col] = pts["zero_rate_cc"].to_numpy()
    # columns in maturity order (a tenor's year fraction moves with the day; its median does not cross another's)
    order = np.argsort(np.nanmedian(times, axis=0)) if tenors.size and days.size else np.arange(tenors.size)
    return StoredCurves(days, np.asarray(meta["method"].to_pylist(), dtype=object), times[:, order],
                        zero[:, order], params, built_at)


def last_estimate(con, curve: str) -> Estimate | None:  # noqa: ANN001
    """The curve's ``model_estimate`` row, or None when it was never estimated."""
    rows = con.execute("SELECT computed_at, factors, max_months, panel_through, months, skipped_months, "
                       "realtime_fits, realtime_passed, full_problem FROM model_estimate WHERE curve = ?",
                       [curve]).fetchall()
    if not rows:
        return None
    r = rows[0]
    return Estimate(r[0], int(r[1]), int(r[2]), r[3], int(r[4]), tuple(r[5]), int(r[6]), tuple(r[7]), r[8])


def _frame(frame: pd.DataFrame, columns: list[str], dates: tuple[str, ...]) -> pa.Table:
    out = pa.Table.from_pandas(frame[columns], preserve_index=False)
    for name in dates:  # the views' dates are DATEs
        i = out.schema.get_field_index(name)
        out = out.set_column(i, name, out[name].cast(pa.timestamp("s")).cast(pa.date32()))
    return out


def replace_curve(con, curve: str, panel: pd.DataFrame, returns: pd.DataFrame, regressions: pd.DataFrame,  # noqa: ANN001
                  verdicts: pd.DataFrame, model: pd.DataFrame, fits: tuple[str, ...],
                  estimate: Estimate | None) -> dict[str, int]:
    """Replace ``curve``'s rows in every term-structure table, in the caller's transaction: the panel,
    returns, regressions and verdicts as a whole; the model rows of ``fits`` only (the other fit's rows
    stay); the ``model_estimate`` row when ``estimate`` is given. Returns the rows written per table."""
    for table in ("term_panel_point", "excess_return_point", "eh_regression_result", "eh_verdict"):
        con.execute(f"DELETE FROM {table} WHERE curve = ?", [curve])
    for fit in fits:
        con.execute("DELETE FROM model_term_premium_point WHERE curve = ? AND fit = ?", [curve, fit])
    written = {
        "term_panel": append_frame(con, "term_panel_point", _frame(panel, PANEL_COLUMNS, ("as_of",)),
                                   PANEL_COLUMNS),
        "excess_returns": append_frame(con, "excess_return_point", _frame(returns, RETURN_COLUMNS, ("as_of",)),
                                       RETURN_COLUMNS),
        "eh_regressions": append_frame(con, "eh_regression_result",
                                       _frame(regressions, EH_COLUMNS, ("first_as_of", "last_as_of")), EH_COLUMNS),
        "model_term_premium": append_frame(con, "model_term_premium_point",
                                           _frame(model, MODEL_COLUMNS, ("as_of", "estimated_through")),
                                           MODEL_COLUMNS),
    }
    append_frame(con, "eh_verdict", verdicts[["curve", "test", "verdict"]], ["curve", "test", "verdict"])
    if estimate is not None:
        e = estimate
        con.execute("DELETE FROM model_estimate WHERE curve = ?", [curve])
        con.execute("INSERT INTO model_estimate VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    [curve, e.computed_at, e.factors, e.max_months, e.panel_through, e.months,
                     list(e.skipped_months), e.realtime_fits, list(e.realtime_passed), e.full_problem])
    return written
