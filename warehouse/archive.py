"""What the notebook handle (:mod:`afterward`) reads: the views, filtered, as Arrow tables.

Every function takes an open (read-only) connection and reads only the stable query surface (the
views of ``sql/views.sql``), so a notebook sees exactly what ``afterward sql`` sees. Filters are
bound parameters, never spliced into the text.
"""

from __future__ import annotations

from datetime import datetime

import duckdb
import pyarrow as pa

from warehouse.query import fetch_value

__all__ = ["first_load_at", "read_audit", "read_forwards", "read_outcomes", "read_quotes", "read_query"]

# each view's own order: one row per key, keys in the order a reader scans them
_ORDER = {
    "quotes": "curve, as_of, tenor_months",
    "forwards": "curve, as_of, start_months, tenor_months",
    "outcomes": "curve, as_of, start_months, tenor_months",
    "audit_summary": "curve, start_months, tenor_months, regime",
}


def _where(curve: str | None, first: str | None, last: str | None, start: int | None = None,
           tenor: int | None = None) -> tuple[str, list]:
    clauses, params = [], []
    for sql, value in (("curve = ?", curve), ("as_of >= CAST(? AS DATE)", first),
                       ("as_of <= CAST(? AS DATE)", last), ("start_months = ?", start),
                       ("tenor_months = ?", tenor)):
        if value is not None:
            clauses.append(sql)
            params.append(value)
    return (" WHERE " + " AND ".join(clauses)) if clauses else "", params


def _read(con: duckdb.DuckDBPyConnection, source: str, view: str, where: str, params: list) -> pa.Table:
    return con.sql(f"SELECT * FROM {source}{where} ORDER BY {_ORDER[view]}", params=params or None).to_arrow_table()


def read_query(con: duckdb.DuckDBPyConnection, query: str) -> pa.Table:
    """A user's query (already let through by :func:`warehouse.query.refuse_writes`) as Arrow;
    an empty table for a statement without a result."""
    rel = con.sql(query)
    return rel.to_arrow_table() if rel is not None else pa.table({})


def read_quotes(con: duckdb.DuckDBPyConnection, curve: str | None = None, first: str | None = None,
                last: str | None = None, as_known_at: datetime | None = None) -> pa.Table:
    """The ``quotes`` view (or ``quotes_as_of(as_known_at)``, naive UTC), optionally one curve and
    as-of days ``first .. last`` (ISO days, inclusive)."""
    where, params = _where(curve, first, last)
    if as_known_at is None:
        return _read(con, "quotes", "quotes", where, params)
    return _read(con, "quotes_as_of(CAST(? AS TIMESTAMP))", "quotes", where, [as_known_at, *params])


def read_forwards(con: duckdb.DuckDBPyConnection, curve: str | None = None, start: int | None = None,
                  tenor: int | None = None, first: str | None = None, last: str | None = None) -> pa.Table:
    """The ``forwards`` view, optionally one curve, one start and one tenor (months), as-of days
    ``first .. last``."""
    where, params = _where(curve, first, last, start, tenor)
    return _read(con, "forwards", "forwards", where, params)


def read_outcomes(con: duckdb.DuckDBPyConnection, curve: str | None = None, start: int | None = None,
                  tenor: int | None = None, first: str | None = None, last: str | None = None) -> pa.Table:
    """The ``outcomes`` view with the filters of :func:`read_forwards`."""
    where, params = _where(curve, first, last, start, tenor)
    return _read(con, "outcomes", "outcomes", where, params)


def read_audit(con: duckdb.DuckDBPyConnection, curve: str | None = None) -> pa.Table:
    """The ``audit_summary`` view, optionally one curve."""
    where, params = _where(curve, None, None)
    return _read(con, "audit_summary", "audit_summary", where, params)


def first_load_at(con: duckdb.DuckDBPyConnection) -> datetime | None:
    """When the first load started (naive UTC), or None for a store never loaded."""
    return fetch_value(con, "SELECT min(started_at) FROM loads")
