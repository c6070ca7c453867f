"""User forecast contenders in the store: one file, one transaction, checksum lineage, versioned forecasts.

The discipline is the quotes' (:mod:`warehouse.loads`): a file whose bytes were already loaded under
the same contender name into the same curves changes nothing and adds no log row (a load that
accepted no row does not count, so a file wholly rejected can be loaded once fixed); a forecast for
an existing (curve, contender, as_of, start_months, tenor_months) with another rate supersedes the
current version (stamped ``superseded_at``, kept), one with the same rate counts as unchanged and
adds nothing; every rejected row is kept with its reason.

Why separate tables (``forecast_load``, ``forecast_version``, ``forecast_rejected_row``, migration
013) and not a ``kind`` column on ``load_log`` / ``rejected_row``: those tables are read by the
quote loader's own lineage (a forecast file's checksum must never make a rate file "already
loaded"), by ``status``, the report's loads and rejected rows, the ``loads`` and
``rejected_rows`` views and their export; every one of those readers would need a new filter, and
one forgotten would silently mix forecast files into the quote archive's counts. The forecast
version's key (start and tenor in months, a contender name) does not fit ``quote_version``
either. Separate tables change nothing that exists; the cost is three small tables.

Rates are decimals: a forecast of the zero rate for the tenor on the target date, in the curve's own
compounding and day count.
"""

from __future__ import annotations

from datetime import datetime

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from warehouse.frames import read_frame
from warehouse.loads import RATE_EPS, LoadOutcome, utc_now
from warehouse.query import fetch_value
from warehouse.status import table_exists

__all__ = ["LISTING_COLUMNS", "current_forecasts", "forecast_listing", "forecast_names",
           "forward_sample", "record_forecast_file"]

_ORDER = "curve, contender, as_of, start_months, tenor_months"
LISTING_COLUMNS = ("contender", "curve", "files", "rows_current", "first_as_of", "last_as_of", "last_loaded_at")


def _incoming(curve_of: pd.DataFrame, contender: str) -> pa.Table:
    return pa.table({
        "curve": pa.array(curve_of["curve"].astype(object).tolist(), type=pa.string()),
        "contender": pa.array([contender] * len(curve_of), type=pa.string()),
        "as_of": pa.array(curve_of["as_of"].to_numpy(dtype="datetime64[D]"), type=pa.date32()),
        "start_months": pa.array(curve_of["start_months"].to_numpy(dtype=np.int32)),
        "tenor_months": pa.array(curve_of["tenor_months"].to_numpy(dtype=np.int32)),
        "forecast_rate": pa.array(curve_of["forecast_rate"].to_numpy(dtype=float)),
        "line": pa.array(curve_of["line"].to_numpy(dtype=np.int32)),
        "_row": pa.array(np.arange(len(curve_of), dtype=np.int64)),
    })


def record_forecast_file(con: duckdb.DuckDBPyConnection, *, contender: str, source_file: str, file_name: str,
                         sha256: str, size_bytes: int, units: str | None, rows: pd.DataFrame,
                         rejected: pd.DataFrame, error: str | None = None,
                         curve: str | None = None) -> LoadOutcome:
    """Record one forecast file in a single transaction (see the module docstring).

    ``rows``: ``curve, as_of, start_months, tenor_months, forecast_rate`` (decimal), ``line``;
    ``rejected``: ``line, raw, reason, check_name``; ``error`` set: the file was refused whole (no
    rows). ``curve``: the ``--curve`` given, the lineage of a refused file. Returns the outcome in
    the quote loader's terms (``loaded``, ``refused`` or ``already loaded``).
    """
    curves = tuple(sorted(set(rows["curve"].tolist()))) if len(rows) else ()
    lineage = ",".join(curves) or curve or ""
    if error is None:
        prior = fetch_value(con, "SELECT min(load_id) FROM forecast_load WHERE contender = ? "
                            "AND coalesce(curve, '') = ? AND sha256 = ? AND status = 'loaded' AND rows_accepted > 0",
                            [contender, lineage, sha256])
        if prior is not None:
            return LoadOutcome(source_file, "already loaded", int(prior),
                               detail=f"same content as forecast load {int(prior)} of {contender}")
    started = utc_now()
    n_rows, n_rej = (0, 0) if error is not None else (len(rows), len(rejected))
    incoming = _incoming(rows, contender) if n_rows else None  # noqa: F841 - read by DuckDB by its name
    con.execute("BEGIN TRANSACTION")
    try:
        load_id = int(fetch_value(con, "SELECT coalesce(max(load_id), 0) + 1 FROM forecast_load"))
        if error is not None:
            con.execute("INSERT INTO forecast_rejected_row VALUES (?, ?, 0, NULL, ?, 'unreadable')",
                        [load_id, source_file, error])
        new = revised = 0
        if n_rows:
            # each row's current rate, inside the transaction: the one writer sees its own last commit
            old = con.execute(
                "SELECT i._row, v.forecast_rate FROM incoming i JOIN forecast_version v "
                "ON v.superseded_at IS NULL AND v.contender = i.contender AND v.curve = i.curve "
                "AND v.as_of = i.as_of AND v.start_months = i.start_months AND v.tenor_months = i.tenor_months"
            ).fetchnumpy()
            current = np.full(n_rows, np.nan)
            current[np.asarray(old["_row"], dtype=np.int64)] = np.asarray(old["forecast_rate"], dtype=float)
            rate = rows["forecast_rate"].to_numpy(dtype=float)
            is_new = np.isnan(current)
            changed = ~is_new & (np.abs(current - rate) > RATE_EPS)
            new, revised = int(is_new.sum()), int(changed.sum())
            if revised:
                restated = incoming.filter(pa.array(changed))  # noqa: F841
                con.execute(
                    "UPDATE forecast_version AS v SET superseded_at = ? FROM restated r "
                    "WHERE v.superseded_at IS NULL AND v.contender = r.contender AND v.curve = r.curve "
                    "AND v.as_of = r.as_of AND v.start_months = r.start_months AND v.tenor_months = r.tenor_months",
                    [started])
            if new or revised:
                written = incoming.filter(pa.array(is_new | changed))  # noqa: F841
                con.execute("INSERT INTO forecast_version SELECT curve, contender, as_of, start_months, tenor_months, "
                            "forecast_rate, ?, NULL, ?, ?, line FROM written", [started, load_id, source_file])
        if n_rej:
            rej = pa.table({"line": pa.array(rejected["line"].to_numpy(dtype=np.int32)),  # noqa: F841
                            "raw": pa.array(rejected["raw"].astype(object).tolist(), type=pa.string()),
                            "reason": pa.array(rejected["reason"].astype(object).tolist(), type=pa.string()),
                            "check_name": pa.array(rejected["check_name"].astype(object).tolist(), type=pa.string())})
            con.execute("INSERT INTO forecast_rejected_row SELECT ?, ?, line, raw, reason, check_name FROM rej",
                        [load_id, source_file])
        status = "refused" if error is not None else "loaded"
        # the log row last, so its finished_at is the moment just before the commit
        con.execute("INSERT INTO forecast_load VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    [load_id, contender, source_file, file_name, sha256, size_bytes, lineage or None, units, started,
                     utc_now(), n_rows + n_rej, n_rows, revised, n_rows - new - revised, n_rej, status, error])
        con.execute("COMMIT")
    except BaseException:
        try:
            con.execute("ROLLBACK")
        except duckdb.Error:
            pass
        raise
    if error is not None:
        return LoadOutcome(source_file, "refused", load_id, detail=error)
    first = rows["as_of"].min() if n_rows else None
    last = rows["as_of"].max() if n_rows else None
    return LoadOutcome(source_file, "loaded", load_id, n_rows + n_rej, n_rows, new, revised, n_rows - new - revised,
                       n_rej, curves=curves, first_day=first, last_day=last)


def current_forecasts(con: duckdb.DuckDBPyConnection, curve: str | None = None, *,
                      as_known_at: datetime | None = None) -> pd.DataFrame:
    """The current version of every user forecast (of ``curve`` only, if given).

    Columns exactly :data:`pipeline.contenders.forecasts.FORECAST_COLUMNS`: ``curve``, ``contender``
    (the user's name), ``as_of`` (datetime64), ``start_months`` and ``tenor_months`` (int64),
    ``forecast_rate`` (decimal, a zero rate in the curve's own compounding and day count); sorted by
    (curve, contender, as_of, start_months, tenor_months). ``as_known_at``: the versions as they stood
    at that UTC time instead (recorded by then and not yet superseded).
    """
    # imported here: the contenders package brings scipy.stats, which `forecasts list` does not need
    from pipeline.contenders.forecasts import FORECAST_COLUMNS

    if not table_exists(con, "forecast_version"):    # a store opened read-only from before forecasts existed
        return pd.DataFrame({c: pd.Series([], dtype=t) for c, t in zip(FORECAST_COLUMNS, (
            object, object, "datetime64[s]", "int64", "int64", "float64"), strict=True)})
    where, params = [], []
    if as_known_at is None:
        where.append("superseded_at IS NULL")
    else:
        where.append("recorded_at <= CAST(? AS TIMESTAMP) AND (superseded_at IS NULL OR superseded_at > CAST(? AS "
                     "TIMESTAMP))")
        params += [as_known_at, as_known_at]
    if curve is not None:
        where.append("curve = ?")
        params.append(curve)
    frame = read_frame(con, f"SELECT {', '.join(FORECAST_COLUMNS)} FROM forecast_version WHERE {' AND '.join(where)} "
                            f"ORDER BY {_ORDER}", params, date_as_object=False)
    return pd.DataFrame({
        "curve": frame["curve"].astype(object).to_numpy(),
        "contender": frame["contender"].astype(object).to_numpy(),
        "as_of": frame["as_of"].to_numpy().astype("datetime64[D]"),
        "start_months": frame["start_months"].to_numpy(dtype=np.int64),
        "tenor_months": frame["tenor_months"].to_numpy(dtype=np.int64),
        "forecast_rate": frame["forecast_rate"].to_numpy(dtype=float),
    }, columns=list(FORECAST_COLUMNS))


def forecast_names(con: duckdb.DuckDBPyConnection) -> list[str]:
    """The user contender names with at least one current forecast, sorted."""
    if not table_exists(con, "forecast_version"):
        return []
    return [r[0] for r in con.execute("SELECT DISTINCT contender FROM forecast_version WHERE superseded_at IS NULL "
                                      "ORDER BY contender").fetchall()]


def forecast_listing(con: duckdb.DuckDBPyConnection) -> pa.Table:
    """What is loaded, one row per (contender, curve): :data:`LISTING_COLUMNS` (no rows in a store
    opened read-only from before forecasts existed).

    ``files``: loads of that name that accepted rows into the curve (a file of several curves counts
    for each); ``rows_current``: current forecasts; ``first_as_of`` / ``last_as_of`` their span;
    ``last_loaded_at``: when the last of those loads finished (UTC).
    """
    if not table_exists(con, "forecast_load"):
        return pa.table({c: pa.array([], type=t) for c, t in zip(LISTING_COLUMNS, (
            pa.string(), pa.string(), pa.int64(), pa.int64(), pa.date32(), pa.date32(), pa.timestamp("us")),
            strict=True)})
    return con.sql(
        """
        WITH loads AS (
            SELECT contender, unnest(string_split(curve, ',')) AS curve, load_id, finished_at
            FROM forecast_load WHERE status = 'loaded' AND rows_accepted > 0 AND curve IS NOT NULL),
        files AS (
            SELECT contender, curve, count(*) AS files, max(finished_at) AS last_loaded_at FROM loads GROUP BY ALL),
        cur AS (
            SELECT contender, curve, count(*) AS rows_current, min(as_of) AS first_as_of, max(as_of) AS last_as_of
            FROM forecast_version WHERE superseded_at IS NULL GROUP BY ALL)
        SELECT f.contender, f.curve, f.files, coalesce(c.rows_current, 0) AS rows_current, c.first_as_of,
               c.last_as_of, f.last_loaded_at
        FROM files f LEFT JOIN cur c USING (contender, curve)
        ORDER BY f.contender, f.curve
        """
    ).to_arrow_table()


def forward_sample(con: duckdb.DuckDBPyConnection, iso_weekday: int) -> pd.DataFrame:
    """The official forwards of the as-of days falling on ``iso_weekday`` (1 Monday .. 7 Sunday), with
    their realised rate where there is one (NaN while pending): ``curve, as_of, start_months,
    tenor_months, forward_rate, realized_rate`` (decimals, each curve's compounding and day count),
    sorted by curve, as_of, start, tenor. The demo's desk view is drawn from it."""
    return read_frame(
        con,
        "SELECT f.curve, f.as_of, f.start_months, f.tenor_months, f.forward_rate, o.realized_rate "
        "FROM forwards f LEFT JOIN outcomes o USING (curve, as_of, start_months, tenor_months) "
        "WHERE isodow(f.as_of) = ? ORDER BY f.curve, f.as_of, f.start_months, f.tenor_months",
        [int(iso_weekday)], date_as_object=False)
