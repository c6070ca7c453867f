"""The archive as it stood at a past time, copied into a scratch store.

:func:`copy_known_at` fills a freshly migrated scratch store with what the official store knew at
``ts`` (naive UTC), so that the ordinary steps (build, realize, audit, compare) recompute every
derived figure from it without touching the official store:

* a load is known at ``ts`` when its data was first available by then: ``known_since`` when the load
  recorded one (history loaded later than it was known), else its ``started_at``;
* the quote versions of the known loads; of a (curve, as_of, tenor) the latest known is current, the
  earlier ones are superseded when the next one became known;
* findings as they stood: those raised by a known load, or found by a check at or before ``ts``, open
  again if they were resolved after ``ts``; acceptances given at or before ``ts``; check runs before it;
* the forecast files (and their versions) loaded at or before ``ts``.

Derived tables (built curves, outcomes, audit, model, comparison) are left empty: the steps rebuild
them. Inversion episodes are derived by the checks and not versioned; they are not copied.
"""

from __future__ import annotations

import duckdb

from warehouse.query import fetch_one

__all__ = ["copy_known_at", "first_known"]


def _columns(con: duckdb.DuckDBPyConnection, table: str) -> list[str]:
    return [r[0] for r in con.execute(f"DESCRIBE {table}").fetchall()]


def first_known(con: duckdb.DuckDBPyConnection) -> object:
    """When the first load's data became known (its known_since, else its start); None for an empty store."""
    row = fetch_one(con, "SELECT min(coalesce(known_since, started_at)) FROM load_log")
    return row[0] if row else None


def copy_known_at(scratch: duckdb.DuckDBPyConnection, official: str, ts) -> dict[str, int]:  # noqa: ANN001
    """Copy what ``official`` (a store file, attached read-only) knew at ``ts`` into ``scratch`` (a
    migrated, empty store), in one transaction; returns the rows copied per table."""
    scratch.execute(f"ATTACH '{official}' AS src (READ_ONLY)")
    try:
        scratch.execute("BEGIN TRANSACTION")
        counts = _copy(scratch, ts)
        scratch.execute("COMMIT")
    except BaseException:
        scratch.execute("ROLLBACK")
        raise
    finally:
        scratch.execute("DETACH src")
    return counts


def _insert(con: duckdb.DuckDBPyConnection, table: str, select: str, params: list) -> int:
    cols = _columns(con, table)
    con.execute(f"INSERT INTO {table} ({', '.join(cols)}) SELECT {', '.join(cols)} FROM ({select})", params)
    return int(fetch_one(con, f"SELECT count(*) FROM {table}")[0])  # type: ignore[index]


def _copy(con: duckdb.DuckDBPyConnection, ts) -> dict[str, int]:  # noqa: ANN001
    known = "SELECT load_id, coalesce(known_since, started_at) AS known_at FROM src.load_log"
    counts = {
        "load_log": _insert(con, "load_log", "SELECT l.* FROM src.load_log l WHERE coalesce(l.known_since, "
                                             "l.started_at) <= ?", [ts]),
        "quote_version": _insert(con, "quote_version", f"""
            SELECT q.* REPLACE (lead(k.known_at) OVER (PARTITION BY q.curve, q.as_of, q.tenor
                                                       ORDER BY k.known_at, q.recorded_at) AS superseded_at)
            FROM src.quote_version q JOIN ({known}) k USING (load_id) WHERE k.known_at <= ?""", [ts]),
        "rejected_row": _insert(con, "rejected_row", f"""
            SELECT r.* FROM src.rejected_row r JOIN ({known}) k USING (load_id) WHERE k.known_at <= ?""", [ts]),
        "finding": _insert(con, "finding", f"""
            SELECT f.* REPLACE (CASE WHEN f.resolved_at <= ? THEN f.resolved_at END AS resolved_at,
                                CASE WHEN f.resolved_at <= ? THEN f.resolution END AS resolution)
            FROM src.finding f LEFT JOIN ({known}) k USING (load_id)
            WHERE (f.load_id IS NOT NULL AND k.known_at <= ?) OR (f.load_id IS NULL AND f.found_at <= ?)""",
                           [ts, ts, ts, ts]),
        "acceptance": _insert(con, "acceptance", "SELECT * FROM src.acceptance WHERE accepted_at <= ?", [ts]),
        "check_run": _insert(con, "check_run", "SELECT * FROM src.check_run WHERE ran_at <= ?", [ts]),
        "forecast_load": _insert(con, "forecast_load", "SELECT * FROM src.forecast_load WHERE started_at <= ?", [ts]),
        "forecast_version": _insert(con, "forecast_version", """
            SELECT v.* REPLACE (CASE WHEN v.superseded_at <= ? THEN v.superseded_at END AS superseded_at)
            FROM src.forecast_version v WHERE v.recorded_at <= ?""", [ts, ts]),
        "forecast_rejected_row": _insert(con, "forecast_rejected_row", """
            SELECT r.* FROM src.forecast_rejected_row r JOIN src.forecast_load l USING (load_id)
            WHERE l.started_at <= ?""", [ts]),
    }
    return counts
