"""Small helpers for reading results in DuckDB 2.0, where an execute() result left half-fetched
blocks the next piece of work on the connection: every helper here fetches to the end."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import duckdb

__all__ = ["fetch_one", "fetch_value"]


def fetch_one(con: duckdb.DuckDBPyConnection, query: str, params: Sequence[Any] | None = None) -> tuple | None:
    rows = con.execute(query, list(params or [])).fetchall()
    return rows[0] if rows else None


def fetch_value(con: duckdb.DuckDBPyConnection, query: str, params: Sequence[Any] | None = None) -> Any:
    row = fetch_one(con, query, params)
    return row[0] if row else None
