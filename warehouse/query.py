"""Small helpers for reading results in DuckDB 2.0, where an execute() result left half-fetched
blocks the next piece of work on the connection: every helper here fetches to the end; and the guard
that lets only queries through to a user's SQL (``afterward sql`` and the notebook handle)."""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Any

import duckdb

from pipeline.errors import ArgumentError

__all__ = ["fetch_one", "fetch_value", "refuse_writes"]

_ALLOWED_STATEMENTS = {"SELECT", "EXPLAIN"}
# what follows EXPLAIN [ANALYZE] [(options)], after any leading comments
_EXPLAIN_PREFIX = re.compile(r"^\s*(?:(?:--[^\n]*(?:\n|$)|/\*.*?\*/)\s*)*"
                             r"EXPLAIN\b\s*(?:ANALY[SZ]E\b\s*)?(?:\([^()]*\)\s*)?",
                             flags=re.IGNORECASE | re.DOTALL)


def fetch_one(con: duckdb.DuckDBPyConnection, query: str, params: Sequence[Any] | None = None) -> tuple | None:
    rows = con.execute(query, list(params or [])).fetchall()
    return rows[0] if rows else None


def fetch_value(con: duckdb.DuckDBPyConnection, query: str, params: Sequence[Any] | None = None) -> Any:
    row = fetch_one(con, query, params)
    return row[0] if row else None


def _kind_of(st) -> str:  # noqa: ANN001 - a duckdb Statement
    kind = str(st.type).rsplit(".", 1)[-1]
    if kind != "EXPLAIN":
        return kind
    # EXPLAIN ANALYZE runs the statement it explains: what follows EXPLAIN [ANALYZE] [(options)] is
    # judged as a statement of its own
    m = _EXPLAIN_PREFIX.match(st.query)
    try:
        inner = duckdb.extract_statements(st.query[m.end():]) if m else []
    except duckdb.Error:
        inner = []
    if len(inner) != 1:
        return "EXPLAIN of an unrecognised form"
    inner_kind = str(inner[0].type).rsplit(".", 1)[-1]
    return "EXPLAIN" if inner_kind == "SELECT" else f"EXPLAIN {inner_kind}"


def refuse_writes(query: str, who: str = "'afterward sql'") -> None:
    """Let through exactly one query (SELECT, or EXPLAIN of a SELECT); anything else raises
    :class:`~pipeline.errors.ArgumentError` naming what was refused. ``who`` names the caller in the
    message. The read-only connection behind it is the second guard, not the only one."""
    try:
        statements = duckdb.extract_statements(query)
    except duckdb.Error as exc:
        raise ArgumentError(f"SQL error: {str(exc).splitlines()[0]}") from None
    if not statements:
        raise ArgumentError("no SQL statement given")
    for st in statements:  # a write anywhere in the text is named as such
        kind = _kind_of(st)
        if kind not in _ALLOWED_STATEMENTS:
            raise ArgumentError(f"refused: {kind} statements are not allowed; {who} is read-only (queries only)")
    if len(statements) > 1:
        # DuckDB's own splitter: a ';' inside a string literal or a comment does not count, a trailing one is fine
        raise ArgumentError(f"one statement at a time: the query holds {len(statements)} statements")
