"""What is in the store, in one read: curves and their date ranges, loads, findings, pending forwards."""

from __future__ import annotations

from typing import Any

import duckdb

from warehouse.query import fetch_one

__all__ = ["store_status", "table_exists"]


def table_exists(con: duckdb.DuckDBPyConnection, name: str) -> bool:
    row = fetch_one(con, "SELECT count(*) FROM information_schema.tables WHERE table_name = ?", [name])
    return bool(row and row[0])


def store_status(con: duckdb.DuckDBPyConnection) -> dict[str, Any]:
    """A plain dict (JSON-friendly) describing the store's contents."""
    from warehouse.schema import schema_version

    info: dict[str, Any] = {"schema_version": schema_version(con)}
    info["curves"] = [
        dict(zip(("curve", "first_day", "last_day", "days", "quotes"), r, strict=True))
        for r in con.execute(
            "SELECT curve, min(as_of), max(as_of), count(DISTINCT as_of), count(*) FROM quotes "
            "GROUP BY curve ORDER BY curve"
        ).fetchall()
    ]
    last = fetch_one(
        con, "SELECT load_id, source_file, finished_at, status FROM load_log ORDER BY load_id DESC LIMIT 1"
    )
    keys = ("load_id", "source_file", "finished_at", "status")
    info["last_load"] = dict(zip(keys, last, strict=True)) if last else None
    totals = fetch_one(
        con,
        "SELECT count(*), count(*) FILTER (WHERE status = 'refused'), coalesce(sum(rows_rejected), 0) "
        "FROM load_log",
    )
    info["loads"], info["refused_files"], info["rejected_rows"] = (int(x) for x in totals)  # type: ignore[union-attr]
    info["open_findings"] = None
    if table_exists(con, "finding"):
        info["open_findings"] = [
            dict(zip(("severity", "count"), r, strict=True))
            for r in con.execute(
                "SELECT severity, count(*) FROM open_findings GROUP BY severity ORDER BY severity"
            ).fetchall()
        ]
    info["pending_forwards"] = None
    if table_exists(con, "pending_forwards"):
        row = fetch_one(con, "SELECT count(*) FROM pending_forwards")
        info["pending_forwards"] = int(row[0]) if row else 0
    return info
