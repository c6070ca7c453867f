"""What changed in the record since a time: restated quotes, rebuilt days, superseded outcomes.

Read-only queries on the official store; ``since`` is naive UTC. The audit cells that moved are
found by :mod:`flows.changes_step`, which recomputes the audit as known at ``since``.
"""

from __future__ import annotations

import duckdb
import pandas as pd

from warehouse.frames import read_frame

__all__ = ["rebuilt_days", "restated_quotes", "superseded_outcomes"]


def _curve(curve: str | None, alias: str) -> tuple[str, list]:
    return (f" AND {alias}.curve = ?", [curve]) if curve else ("", [])


def restated_quotes(con: duckdb.DuckDBPyConnection, since, curve: str | None = None) -> pd.DataFrame:  # noqa: ANN001
    """One row per quote that was current at ``since`` and has been restated after it: ``curve, as_of,
    tenor, old_rate, new_rate`` (the current version), ``load_id`` and ``file_name`` of the load that
    holds the current version, ``restated_at``."""
    w, p = _curve(curve, "o")
    return read_frame(con, f"""
        SELECT o.curve, o.as_of, o.tenor, o.rate AS old_rate, n.rate AS new_rate, n.load_id, l.file_name,
               o.superseded_at AS restated_at
        FROM quote_version o
        JOIN quote_version n ON n.curve = o.curve AND n.as_of = o.as_of AND n.tenor = o.tenor
                            AND n.superseded_at IS NULL
        JOIN load_log l ON l.load_id = n.load_id
        WHERE o.recorded_at <= ? AND o.superseded_at > ?{w}
        ORDER BY o.curve, o.as_of, o.tenor""", [since, since, *p])


def rebuilt_days(con: duckdb.DuckDBPyConnection, since, curve: str | None = None) -> pd.DataFrame:  # noqa: ANN001
    """One row per official built day quoted by ``since`` that was built again after it: ``curve, as_of,
    built_at, forwards`` (the forwards the new build holds)."""
    w, p = _curve(curve, "b")
    return read_frame(con, f"""
        SELECT b.curve, b.as_of, b.built_at, count(f.build_key) AS forwards
        FROM built_day b LEFT JOIN forward_point f ON f.build_key = b.build_key
        WHERE b.scenario = 'official' AND b.built_at > ?{w}
          AND EXISTS (SELECT 1 FROM quote_version q WHERE q.curve = b.curve AND q.as_of = b.as_of
                      AND q.recorded_at <= ?)
        GROUP BY ALL ORDER BY b.curve, b.as_of""", [since, *p, since])


def superseded_outcomes(con: duckdb.DuckDBPyConnection, since, curve: str | None = None) -> pd.DataFrame:  # noqa: ANN001
    """Per (curve, start_months, tenor_months): the outcomes realised by ``since`` and superseded after
    it (``outcomes``), with the first and last as-of date among them."""
    w, p = _curve(curve, "o")
    return read_frame(con, f"""
        SELECT o.curve, o.start_months, o.tenor_months, count(*) AS outcomes, min(o.as_of) AS first_as_of,
               max(o.as_of) AS last_as_of
        FROM outcome o WHERE o.realized_at <= ? AND o.superseded_at > ?{w}
        GROUP BY ALL ORDER BY ALL""", [since, since, *p])
