"""What the notebook handle (:mod:`afterward`) reads: the views, filtered, as Arrow tables.

Every function takes an open (read-only) connection and reads only the stable query surface (the
views of ``sql/views.sql``), so a notebook sees exactly what ``afterward sql`` sees. Filters are
bound parameters, never spliced into the text.
"""

from __future__ import annotations

from datetime import datetime

import duckdb
import pyarrow as pa

__all__ = ["read_audit", "read_forwards", "read_outcomes", "read_quotes", "read_query"]

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


# the quotes as known at a time, by the rule of warehouse.as_known_at (the scratch copy behind
# --as-known-at): a load is known from its known_since, else its start; of a (curve, as_of, tenor)
# the version of the latest known load is current
_QUOTES_KNOWN_AT = """(
    SELECT q.curve, q.as_of, q.tenor, q.maturity_date, q.rate, q.recorded_at, q.source_file,
           tenor_in_months(q.tenor) AS tenor_months
    FROM quote_version q
    JOIN (SELECT load_id, coalesce(known_since, started_at) AS known_at FROM load_log) k USING (load_id)
    WHERE k.known_at <= CAST(? AS TIMESTAMP)
    QUALIFY row_number() OVER (PARTITION BY q.curve, q.as_of, q.tenor
                               ORDER BY k.known_at DESC, q.recorded_at DESC) = 1)"""


def read_quotes(con: duckdb.DuckDBPyConnection, curve: str | None = None, first: str | None = None,
                last: str | None = None, as_known_at: datetime | None = None) -> pa.Table:
    """The ``quotes`` view, optionally one curve and as-of days ``first .. last`` (ISO days,
    inclusive); with ``as_known_at`` (naive UTC), the quotes as known then, with the columns of
    ``quotes``: of each key the version from the latest load known by then (a load is known from
    its ``known_since``, else from its start), as the ``--as-known-at`` scratch copy has them."""
    where, params = _where(curve, first, last)
    if as_known_at is None:
        return _read(con, "quotes", "quotes", where, params)
    return _read(con, _QUOTES_KNOWN_AT, "quotes", where, [as_known_at, *params])


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
