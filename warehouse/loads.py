"""Transactional loads: one file, one transaction, checksum lineage, versioned quotes.

A file whose checksum was already loaded changes nothing. Within a load, a quote for an existing
(curve, as_of, tenor) with a different rate supersedes the current version (stamped, kept); one with
the same rate is counted as unchanged and adds no version. Frames go in through Arrow.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from datetime import UTC, datetime

import duckdb
import pandas as pd
import pyarrow as pa

from warehouse.query import fetch_one

__all__ = ["FileBatch", "LoadOutcome", "already_loaded", "record_load", "utc_now"]

# equal rates within this are the same quote re-sent, not a restatement (decimals)
RATE_EPS = 1e-12


def utc_now() -> datetime:
    """The store's clock: naive UTC with microseconds (TIMESTAMP columns hold UTC)."""
    return datetime.now(UTC).replace(tzinfo=None)


@dataclass
class FileBatch:
    """One file, read and validated, ready to record.

    ``rows``: curve, as_of (date), tenor, maturity_date (date), rate (decimal), line.
    ``rejected``: line, raw, reason, check_name. ``error`` set means the file was refused whole.
    """

    source_file: str
    file_name: str
    sha256: str
    size_bytes: int
    curve: str | None
    layout: str | None
    rows: pd.DataFrame
    rejected: pd.DataFrame
    error: str | None = None
    validations: list[dict] = field(default_factory=list)


@dataclass
class LoadOutcome:
    source_file: str
    status: str                 # loaded | refused | already loaded
    load_id: int | None = None
    rows_read: int = 0
    rows_accepted: int = 0
    rows_new: int = 0
    rows_revised: int = 0
    rows_unchanged: int = 0
    rows_rejected: int = 0
    detail: str | None = None
    curves: tuple[str, ...] = ()


def already_loaded(con: duckdb.DuckDBPyConnection, sha256: str) -> int | None:
    row = fetch_one(con, "SELECT min(load_id) FROM load_log WHERE sha256 = ? AND status = 'loaded'", [sha256])
    return int(row[0]) if row and row[0] is not None else None


_ROW_SCHEMA = pa.schema([
    ("curve", pa.string()), ("as_of", pa.date32()), ("tenor", pa.string()),
    ("maturity_date", pa.date32()), ("rate", pa.float64()), ("line", pa.int32()),
])
_REJ_SCHEMA = pa.schema([
    ("line", pa.int32()), ("raw", pa.string()), ("reason", pa.string()), ("check_name", pa.string()),
])


def _arrow(frame: pd.DataFrame, schema: pa.Schema) -> pa.Table:
    cols = {}
    for f in schema:
        s = frame[f.name] if f.name in frame else pd.Series([None] * len(frame))
        if pa.types.is_date32(f.type):
            arr = pa.array(pd.to_datetime(s).to_numpy(dtype="datetime64[D]"), type=pa.date32())
        else:
            arr = pa.array(s.tolist() if f.type == pa.string() else s.to_numpy(), type=f.type)
        cols[f.name] = arr
    return pa.table(cols, schema=schema)


def record_load(con: duckdb.DuckDBPyConnection, batch: FileBatch) -> LoadOutcome:
    """Record one file in a single transaction (see the module docstring). Safe to rerun."""
    started = utc_now()
    con.execute("BEGIN TRANSACTION")
    try:
        prior = already_loaded(con, batch.sha256)
        if prior is not None:
            con.execute("ROLLBACK")
            return LoadOutcome(batch.source_file, "already loaded", prior,
                               detail=f"same content as load {prior}")
        load_id = int(fetch_one(con, "SELECT nextval('load_id_seq')")[0])  # type: ignore[index]
        if batch.error is not None:
            con.execute(
                "INSERT INTO load_log (load_id, source_file, file_name, sha256, size_bytes, curve, layout, "
                "started_at, finished_at, status, detail) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, 'refused', ?)",
                [load_id, batch.source_file, batch.file_name, batch.sha256, batch.size_bytes, batch.curve,
                 batch.layout, started, utc_now(), batch.error],
            )
            con.execute(
                "INSERT INTO rejected_row VALUES (?, ?, 0, NULL, ?, 'unreadable')",
                [load_id, batch.source_file, batch.error],
            )
            con.execute("COMMIT")
            return LoadOutcome(batch.source_file, "refused", load_id, detail=batch.error)

        rows = _arrow(batch.rows, _ROW_SCHEMA)
        con.register("_incoming", rows)
        con.execute(
            """
            CREATE OR REPLACE TEMP TABLE _classified AS
            SELECT i.*, q.rate AS old_rate
            FROM _incoming i
            LEFT JOIN quote_version q
              ON q.curve = i.curve AND q.as_of = i.as_of AND q.tenor = i.tenor AND q.superseded_at IS NULL
            """
        )
        con.unregister("_incoming")
        counts = fetch_one(
            con,
            f"""
            SELECT count(*) FILTER (WHERE old_rate IS NULL),
                   count(*) FILTER (WHERE old_rate IS NOT NULL AND abs(old_rate - rate) > {RATE_EPS}),
                   count(*) FILTER (WHERE old_rate IS NOT NULL AND abs(old_rate - rate) <= {RATE_EPS})
            FROM _classified
            """,
        )
        new, revised, unchanged = (int(x) for x in counts)  # type: ignore[union-attr]
        if revised:
            con.execute(
                f"""
                UPDATE quote_version AS q SET superseded_at = ?
                FROM _classified c
                WHERE q.curve = c.curve AND q.as_of = c.as_of AND q.tenor = c.tenor
                  AND q.superseded_at IS NULL AND c.old_rate IS NOT NULL AND abs(c.old_rate - c.rate) > {RATE_EPS}
                """,
                [started],
            )
        con.execute(
            f"""
            INSERT INTO quote_version
            SELECT curve, as_of, tenor, maturity_date, rate, ? AS recorded_at, NULL AS superseded_at,
                   ? AS load_id, ? AS source_file, line
            FROM _classified
            WHERE old_rate IS NULL OR abs(old_rate - rate) > {RATE_EPS}
            ORDER BY curve, as_of, tenor
            """,
            [started, load_id, batch.source_file],
        )
        con.execute("DROP TABLE _classified")
        rejected = _arrow(batch.rejected, _REJ_SCHEMA)
        if rejected.num_rows:
            con.register("_rejected", rejected)
            con.execute(
                "INSERT INTO rejected_row SELECT ?, ?, line, raw, reason, check_name FROM _rejected",
                [load_id, batch.source_file],
            )
            con.unregister("_rejected")
        for v in batch.validations:
            con.execute(
                "INSERT INTO load_validation VALUES (?, ?, ?, ?, ?, ?)",
                [load_id, v.get("suite", ""), bool(v.get("success", False)), v.get("evaluated"),
                 v.get("unsuccessful"), json.dumps(v, default=str)],
            )
        accepted = rows.num_rows
        n_rej = rejected.num_rows
        curves = tuple(sorted(set(batch.rows["curve"]))) if len(batch.rows) else ()
        con.execute(
            "INSERT INTO load_log VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, 'loaded', NULL)",
            [load_id, batch.source_file, batch.file_name, batch.sha256, batch.size_bytes,
             ",".join(curves) or batch.curve, batch.layout, started, utc_now(),
             accepted + n_rej, accepted, revised, unchanged, n_rej],
        )
        con.execute("COMMIT")
    except BaseException:
        try:
            con.execute("ROLLBACK")
        except duckdb.Error:
            pass
        raise
    return LoadOutcome(batch.source_file, "loaded", load_id, accepted + n_rej, accepted, new, revised,
                       unchanged, n_rej, curves=curves)
