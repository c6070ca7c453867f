"""Schema files from ``sql/``: the migrations, applied in order, each once, with the version recorded in
the store; then ``views.sql``, the current definition of every view, applied whenever it changed.

The files ship inside the wheel as ``warehouse/sql``; in a source checkout they are read from the
top-level ``sql/`` folder.
"""

from __future__ import annotations

import hashlib
import re
from datetime import UTC, datetime
from pathlib import Path

import duckdb

from warehouse.query import fetch_one

__all__ = ["SCHEMA_FILES", "VIEWS_FILE", "apply_schema", "schema_version", "sql_dir"]

VIEWS_FILE = "views.sql"

_NAME = re.compile(r"^(\d{3})_[a-z0-9_]+\.sql$")


def sql_dir() -> Path:
    here = Path(__file__).resolve().parent
    for candidate in (here / "sql", here.parent / "sql"):
        if candidate.is_dir() and any(candidate.glob("[0-9][0-9][0-9]_*.sql")):
            return candidate
    raise FileNotFoundError("the schema files (sql/*.sql) are missing from this installation")


def SCHEMA_FILES() -> list[tuple[int, Path]]:  # noqa: N802 - reads like the constant it stands for
    files = []
    for p in sorted(sql_dir().glob("*.sql")):
        m = _NAME.match(p.name)
        if m:
            files.append((int(m.group(1)), p))
    return files


def schema_version(con: duckdb.DuckDBPyConnection) -> int:
    """The highest schema file applied to this store (0 for an empty database)."""
    exists = fetch_one(con, "SELECT count(*) FROM information_schema.tables WHERE table_name = 'schema_migration'")
    if not exists or not exists[0]:
        return 0
    row = fetch_one(con, "SELECT coalesce(max(version), 0) FROM schema_migration")
    return int(row[0]) if row else 0


def apply_schema(con: duckdb.DuckDBPyConnection) -> int:
    """Apply every schema file the store has not recorded yet, in order, each in its own transaction."""
    con.execute(
        "CREATE TABLE IF NOT EXISTS schema_migration (version INTEGER PRIMARY KEY, name VARCHAR NOT NULL, "
        "applied_at TIMESTAMP NOT NULL DEFAULT current_timestamp)"
    )
    # every file not yet recorded, in order: a store that skipped a number (a file added below the
    # newest one it has) still gets it
    applied = {int(v) for (v,) in con.execute("SELECT version FROM schema_migration").fetchall()}
    current = max(applied, default=0)
    for version, path in SCHEMA_FILES():
        if version in applied:
            continue
        con.execute("BEGIN TRANSACTION")
        try:
            con.execute(path.read_text(encoding="utf-8"))
            con.execute("INSERT INTO schema_migration (version, name) VALUES (?, ?)", [version, path.name])
            con.execute("COMMIT")
        except BaseException:
            con.execute("ROLLBACK")
            raise
        current = max(current, version)
    _apply_views(con)
    return current


def _apply_views(con: duckdb.DuckDBPyConnection) -> None:
    """Apply ``views.sql`` when the store holds another version of it (or none): one checksum per open."""
    text = (sql_dir() / VIEWS_FILE).read_text(encoding="utf-8")
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
    con.execute("CREATE TABLE IF NOT EXISTS schema_views (sha256 VARCHAR NOT NULL, applied_at TIMESTAMP NOT NULL)")
    if fetch_one(con, "SELECT count(*) FROM schema_views WHERE sha256 = ?", [digest])[0]:  # type: ignore[index]
        return
    con.execute("BEGIN TRANSACTION")
    try:
        con.execute(text)
        con.execute("DELETE FROM schema_views")
        con.execute("INSERT INTO schema_views VALUES (?, ?)", [digest, datetime.now(UTC).replace(tzinfo=None)])
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise
