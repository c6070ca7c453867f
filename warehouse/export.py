"""Views to Parquet files: the statements behind ``afterward export`` (on a read-only connection).

Hive convention: a partitioned view's ``curve`` and ``year`` are only in the folder names
(``curve=C/year=Y/``), never also inside the files, so every common reader infers one type for each.
"""

from __future__ import annotations

from pathlib import Path

import duckdb

__all__ = ["copy_partitioned", "copy_whole", "count_rows"]


def _sql_string(path: Path) -> str:
    return "'" + str(path).replace("'", "''") + "'"


def count_rows(con: duckdb.DuckDBPyConnection, view: str) -> int:
    return int(con.execute(f"SELECT count(*) FROM {view}").fetchone()[0])


def copy_whole(con: duckdb.DuckDBPyConnection, view: str, path: Path) -> None:
    """The whole view as one Parquet file at ``path``."""
    con.execute(f"COPY (SELECT * FROM {view} ORDER BY ALL) TO {_sql_string(path)} (FORMAT parquet)")


def copy_partitioned(con: duckdb.DuckDBPyConnection, view: str, date_col: str, folder: Path, rows: int) -> None:
    """The view under ``folder`` partitioned by curve and the year of ``date_col``; a view with no
    ``rows`` becomes one empty file that keeps its schema, curve and year typed as hive inference
    types them (string, int32)."""
    if rows:
        con.execute(f"COPY (SELECT *, year({date_col}) AS year FROM {view} ORDER BY ALL) TO "
                    f"{_sql_string(folder)} (FORMAT parquet, PARTITION_BY (curve, year))")
    else:
        con.execute(f"COPY (SELECT *, CAST(year({date_col}) AS INTEGER) AS year FROM {view} LIMIT 0) "
                    f"TO {_sql_string(folder / 'empty.parquet')} (FORMAT parquet)")
