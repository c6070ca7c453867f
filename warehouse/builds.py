"""The built tables: ``built_day`` (one row per built day and scenario), ``zero_point``,
``forward_point`` and ``curve_fit``; which days are due; storing a batch of built days.

Functions take an open connection; the caller owns the transaction (:func:`warehouse.connect.transaction`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from pipeline.checks import CHECKS
from pipeline.forwards import ForwardGrid, ZeroGrid
from warehouse.frames import QuotePanel

__all__ = ["delete_builds", "due_days", "held_days", "last_params", "read_due_quotes", "withdraw_held",
           "write_built"]

# findings a rebuild of their day closes (the build raises them afresh)
SHAPE_CHECKS = tuple(c.name for c in CHECKS if c.raised_by == "build")


def _range_sql(first: object, last: object, column: str = "as_of") -> tuple[str, dict]:
    where, params = "", {}
    if first is not None:
        where += f" AND {column} >= CAST($first AS DATE)"
        params["first"] = str(first)
    if last is not None:
        where += f" AND {column} <= CAST($last AS DATE)"
        params["last"] = str(last)
    return where, params


def due_days(con, curve: str, scenario: str, first: object = None, last: object = None,  # noqa: ANN001
             rebuild: bool = False) -> tuple[pa.Table, int]:
    """The days to build, sorted: ``as_of`` and ``recorded_at`` (the latest among the day's current
    quotes); and how many days in the range an open reject finding holds back.

    A day is due when it has current quotes in ``[first, last]``, is not held, and has no build of
    ``scenario`` or its quotes changed after that build (every day not held, with ``rebuild``).
    """
    where, params = _range_sql(first, last)
    t = con.sql(
        f"""WITH q AS (SELECT as_of, max(recorded_at) AS recorded_at FROM quotes
                       WHERE curve = $curve{where} GROUP BY as_of),
                 h AS (SELECT DISTINCT as_of FROM held_days WHERE curve = $curve),
                 b AS (SELECT as_of, quotes_as_of FROM built_day WHERE curve = $curve AND scenario = $scenario)
            SELECT q.as_of, q.recorded_at, h.as_of IS NOT NULL AS held
            FROM q LEFT JOIN b ON b.as_of = q.as_of LEFT JOIN h ON h.as_of = q.as_of
            WHERE h.as_of IS NOT NULL OR $rebuild OR b.as_of IS NULL OR q.recorded_at > b.quotes_as_of
            ORDER BY q.as_of""",
        params={"curve": curve, "scenario": scenario, "rebuild": bool(rebuild), **params},
    ).to_arrow_table()
    held = t["held"].to_numpy(zero_copy_only=False).astype(bool)
    return t.filter(pa.array(~held)).select(["as_of", "recorded_at"]), int(held.sum())


def held_days(con) -> dict[str, np.ndarray]:  # noqa: ANN001
    """The days each curve's open reject findings hold back (datetime64[D]), by curve."""
    t = con.sql("SELECT curve, as_of FROM held_days").to_arrow_table()
    days = t["as_of"].to_numpy().astype("datetime64[D]")
    curves = np.asarray(t["curve"].to_pylist(), dtype=object)
    return {str(c): days[curves == c] for c in pd.unique(curves)}


def withdraw_held(con, curve: str, scenario: str) -> int:  # noqa: ANN001
    """Delete the builds of days an open reject finding now holds back; returns how many."""
    keys = con.sql("SELECT build_key, as_of FROM built_day WHERE curve = $curve AND scenario = $scenario "
                   "AND as_of IN (SELECT as_of FROM held_days WHERE curve = $curve)",
                   params={"curve": curve, "scenario": scenario}).to_arrow_table()
    if keys.num_rows:
        delete_builds(con, curve, scenario, keys)
    return keys.num_rows


def delete_builds(con, curve: str, scenario: str, keys: pa.Table) -> None:  # noqa: ANN001
    """Delete the rows of the builds ``keys`` (``build_key``, ``as_of``) from every built table.

    The key range goes in as constants beside the semi-join so that DuckDB skips the row groups of
    other days (the forward table holds ~100 rows a day).
    """
    gone = keys  # noqa: F841 - read by DuckDB by its name
    k = keys["build_key"].to_numpy()
    bounds = {"lo": int(k.min()), "hi": int(k.max())}
    for table in ("forward_point", "zero_point"):
        con.execute(f"DELETE FROM {table} WHERE build_key BETWEEN $lo AND $hi "
                    "AND build_key IN (SELECT build_key FROM gone)", bounds)
    con.execute("DELETE FROM built_day WHERE build_key BETWEEN $lo AND $hi "
                "AND build_key IN (SELECT build_key FROM gone)", bounds)
    con.execute("DELETE FROM curve_fit WHERE curve = $curve AND scenario = $scenario "
                "AND as_of IN (SELECT as_of FROM gone)", {"curve": curve, "scenario": scenario})


def read_due_quotes(con, curve: str, tenors: list[str], due: pa.Table) -> QuotePanel:  # noqa: ANN001
    """The current quotes of the ``due`` days (:func:`due_days`) pivoted to days x ``tenors`` (NaN = missing)."""
    days = due["as_of"].to_numpy().astype("datetime64[D]")
    recorded = due["recorded_at"].to_numpy().astype("datetime64[us]")
    rates = np.full((len(days), len(tenors)), np.nan)
    if len(days) == 0:
        return QuotePanel(days, list(tenors), rates, recorded)
    wanted = due.select(["as_of"])  # noqa: F841 - read by DuckDB by its name
    t = con.sql("SELECT as_of, tenor, rate FROM quotes WHERE curve = $curve AND as_of BETWEEN $lo AND $hi "
                "AND as_of IN (SELECT as_of FROM wanted)",
                params={"curve": curve, "lo": str(days[0]), "hi": str(days[-1])}).to_arrow_table()
    col = pc.index_in(t["tenor"], value_set=pa.array(list(tenors), pa.string()))
    keep = col.is_valid().to_numpy(zero_copy_only=False)
    row = np.searchsorted(days, t["as_of"].to_numpy().astype("datetime64[D]"))
    rates[row[keep], col.drop_null().to_numpy()] = t["rate"].to_numpy()[keep]
    return QuotePanel(days, list(tenors), rates, recorded)


def last_params(con, curve: str, scenario: str) -> np.ndarray | None:  # noqa: ANN001
    """The NSS parameters of the latest fitted day (the warm start of the next fit)."""
    rows = con.execute("SELECT params FROM curve_fit WHERE curve = $curve AND scenario = $scenario AND as_of = "
                       "(SELECT max(as_of) FROM curve_fit WHERE curve = $curve AND scenario = $scenario) LIMIT 1",
                       {"curve": curve, "scenario": scenario}).fetchall()
    return np.asarray(rows[0][0], dtype=float) if rows else None


def _days_of(values: object) -> np.ndarray:
    return np.asarray(values).astype("datetime64[D]")


def _same_days(grid: ZeroGrid | ForwardGrid, days: np.ndarray) -> None:
    if not np.array_equal(_days_of(grid.as_of), days):
        raise ValueError("the zero rates and forwards must be those of the chunk's built days, in order")


def _zero_table(zeros: ZeroGrid, keys: np.ndarray, days: np.ndarray, quoted: set[str]) -> pa.Table:
    """The ``zero_point`` rows of the built days ``days`` keyed ``keys`` (aligned)."""
    _same_days(zeros, days)
    n, k = zeros.maturity_date.shape
    codes = pa.array(np.tile(np.arange(k, dtype=np.int32), n))
    return pa.table({
        "build_key": pa.array(np.repeat(keys, k)),
        "tenor": pa.DictionaryArray.from_arrays(codes, pa.array(list(zeros.tenor), pa.string())),
        "tenor_months": pc.take(pa.array(list(zeros.tenor_months), pa.int32()), codes),
        "quoted": pc.take(pa.array([x in quoted for x in zeros.tenor]), codes),
        "maturity_date": pa.array(zeros.maturity_date.reshape(-1), pa.date32()),
        "year_fraction": pa.array(zeros.year_fraction.reshape(-1)),
        "zero_rate": pa.array(zeros.zero_rate.reshape(-1)),
        "zero_rate_cc": pa.array(zeros.zero_rate_cc.reshape(-1)),
        "discount_factor": pa.array(zeros.discount_factor.reshape(-1)),
    })


def _forward_table(fwd: ForwardGrid, keys: np.ndarray, days: np.ndarray) -> pa.Table:
    """The ``forward_point`` rows of the built days ``days`` keyed ``keys`` (aligned), in the table's
    own column types (the million-row insert is the largest single cost of a long build)."""
    _same_days(fwd, days)
    n, g = fwd.forward_rate.shape
    return pa.table({
        "build_key": pa.array(np.repeat(keys, g)),
        "start_months": pa.array(np.tile(fwd.start_months, n).astype(np.int32)),
        "tenor_months": pa.array(np.tile(fwd.tenor_months, n).astype(np.int32)),
        "start_date": pa.array(fwd.start_date.reshape(-1).astype("datetime64[D]"), pa.date32()),
        "end_date": pa.array(fwd.end_date.reshape(-1).astype("datetime64[D]"), pa.date32()),
        "forward_rate": pa.array(fwd.forward_rate.reshape(-1)),
        "forward_rate_cc": pa.array(fwd.forward_rate_cc.reshape(-1)),
    })


def write_built(con, curve: str, scenario: str, method: str, version: str, tried: np.ndarray,  # noqa: ANN001
                recorded_at: np.ndarray, ok: np.ndarray, zeros: ZeroGrid, fwd: ForwardGrid,
                shape: pd.DataFrame | None, params: np.ndarray | None, quoted: set[str], now) -> None:  # noqa: ANN001
    """Store a batch of days, in the caller's transaction: every day ``tried`` ``(D,)`` loses its
    previous build of ``scenario``; the days built (``ok``) get a new build key (``recorded_at``: the
    quotes' version they were built from), their zero rates, forwards, NSS parameters and (official
    scenario) shape findings, which replace the day's earlier ones."""
    tried = _days_of(tried)
    built_days = tried[ok]
    days = pa.table({"as_of": pa.array(tried, pa.date32())})  # noqa: F841 - read by DuckDB by its name
    span = {"curve": curve, "scenario": scenario, "lo": str(tried.min()), "hi": str(tried.max())} if len(tried) \
        else None
    if span is not None:
        old = con.sql("SELECT build_key, as_of FROM built_day WHERE curve = $curve AND scenario = $scenario "
                      "AND as_of BETWEEN $lo AND $hi AND as_of IN (SELECT as_of FROM days)",
                      params=span).to_arrow_table()
        if old.num_rows:
            delete_builds(con, curve, scenario, old)
    n = len(built_days)
    if n:
        # keys rise with the date, so a day's rows sit together and in date order on disk
        keys = np.empty(n, dtype=np.int64)
        fresh = con.sql("SELECT nextval('build_key_seq') AS k FROM range($n)", params={"n": n}).to_arrow_table()
        keys[np.argsort(built_days, kind="stable")] = np.sort(fresh["k"].to_numpy())
        built = pa.table({  # noqa: F841 - read by DuckDB by its name
            "as_of": pa.array(built_days, pa.date32()),
            "quotes_as_of": pa.array(np.asarray(recorded_at)[ok].astype("datetime64[us]"), pa.timestamp("us")),
            "build_key": pa.array(keys),
        })
        consts = {"curve": curve, "scenario": scenario, "method": method, "version": version, "now": now}
        con.execute("INSERT INTO built_day (curve, scenario, as_of, method, code_version, built_at, quotes_as_of, "
                    "build_key) SELECT $curve, $scenario, as_of, $method, $version, $now, quotes_as_of, build_key "
                    "FROM built", consts)
        z = _zero_table(zeros, keys, built_days, quoted)  # noqa: F841 - read by DuckDB by its name
        con.execute("INSERT INTO zero_point SELECT * FROM z")
        f = _forward_table(fwd, keys, built_days)  # noqa: F841 - read by DuckDB by its name
        con.execute("INSERT INTO forward_point SELECT * FROM f")
        if params is not None and len(params):
            fits = pd.DataFrame({"curve": curve, "scenario": scenario,  # noqa: F841
                                 "as_of": built_days, "method": method, "params": list(params)})
            con.execute("INSERT INTO curve_fit SELECT curve, scenario, CAST(as_of AS DATE), method, params FROM fits")
    if scenario == "official" and span is not None:
        con.execute(
            "UPDATE finding SET resolved_at = $now, resolution = 'rebuilt' WHERE curve = $curve "
            f"AND resolved_at IS NULL AND check_name IN ({', '.join(repr(x) for x in SHAPE_CHECKS)}) "
            "AND as_of BETWEEN $lo AND $hi AND as_of IN (SELECT as_of FROM days)",
            {"now": now, "curve": curve, "lo": span["lo"], "hi": span["hi"]})
        if shape is not None and len(shape):
            sh = pd.DataFrame({"curve": curve, "as_of": shape["as_of"].to_numpy(),  # noqa: F841
                               "check_name": shape["check_name"].astype(str),
                               "severity": shape["severity"].astype(str), "tenor": shape["tenor"].astype(object),
                               "detail": shape["detail"].astype(str)})
            con.execute("INSERT INTO finding SELECT curve, CAST(as_of AS DATE), check_name, severity, tenor, "
                        "detail, ?, NULL, NULL, NULL FROM sh", [now])
