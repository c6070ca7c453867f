"""The one place that opens the store.

DuckDB allows one read-write process or many read-only processes, never both. So: writers keep their
transactions short and close promptly; a connection that finds the file locked retries with backoff
and then fails with :class:`StoreLocked`, whose message names the process holding the lock. A job of
many short steps opens the store once and passes it down (the jobs do; :func:`writer_for`).
"""

from __future__ import annotations

import os
import re
import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

import duckdb

from pipeline.errors import StoreError, StoreLocked, StoreMissing
from warehouse.schema import apply_schema, schema_version

__all__ = ["StoreError", "StoreLocked", "StoreMissing", "connect", "one_thread", "reader", "transaction",
           "writer", "writer_for"]


_LOCK = re.compile(r"lock", re.IGNORECASE)
_PID = re.compile(r"PID (\d+)")


def _lock_message(path: Path, exc: Exception) -> str:
    pid = _PID.search(str(exc))
    holder = f"process {pid.group(1)}" if pid else "another process"
    return (f"the store {path} is locked by {holder} (a load or build is running); "
            "try again when it finishes")


def _default_wait() -> float:
    try:
        return float(os.environ.get("AFTERWARD_LOCK_WAIT", "10"))
    except ValueError:
        return 10.0


def _sql_list(paths: Sequence[str | os.PathLike[str]]) -> str:
    return "[" + ", ".join("'" + str(p).replace("'", "''") + "'" for p in paths) + "]"


def _close_external_access(con: duckdb.DuckDBPyConnection, allowed: Sequence[str | os.PathLike[str]]) -> None:
    # DuckDB takes allowed_directories only while external access is still on, and SET only after
    # start-up; locking the configuration then stops a query from SETting any of it back
    if allowed:
        dirs = [str(d).rstrip("/") + "/" for d in allowed]    # a prefix match: /a/proj must not admit /a/proj2
        con.execute(f"SET allowed_directories = {_sql_list(dirs)}")
    con.execute("SET enable_external_access = false")
    con.execute("SET lock_configuration = true")


def connect(path: str | os.PathLike[str], *, read_only: bool = False, wait_seconds: float | None = None,
            create: bool = False, external_access: bool = True,
            allowed_directories: Sequence[str | os.PathLike[str]] = ()) -> duckdb.DuckDBPyConnection:
    """Open the store at ``path``.

    A writer (``read_only=False``) brings the schema up to date. A reader needs an existing store.
    While another process holds the lock, retries with backoff for up to ``wait_seconds`` (default
    ``$AFTERWARD_LOCK_WAIT`` or 10 s).
    ``external_access=False`` stops SQL from reading or writing files, installing or loading
    extensions and reaching the network, except for files under ``allowed_directories`` (absolute
    folders; DuckDB compares path prefixes, so a symbolic link inside one is followed), and locks the
    connection's configuration so a query cannot undo it.
    """
    p = Path(path)
    if not p.exists() and (read_only or not create):
        raise StoreMissing(f"no store at {p} (run 'afterward init' or 'afterward load' first)")
    if p.exists() and p.is_dir():
        raise StoreError(f"the store path {p} is a directory, not a DuckDB file")
    config: dict[str, str | bool] = {}
    deadline = time.monotonic() + (_default_wait() if wait_seconds is None else wait_seconds)
    delay = 0.05
    while True:
        try:
            con = duckdb.connect(str(p), read_only=read_only, config=config)
            break
        except duckdb.IOException as exc:
            if not _LOCK.search(str(exc)):
                raise StoreError(f"cannot open the store {p}: {str(exc).splitlines()[0]}") from None
            if time.monotonic() >= deadline:
                raise StoreLocked(_lock_message(p, exc)) from None
            time.sleep(delay)
            delay = min(delay * 2, 1.0)
        except duckdb.Error as exc:
            raise StoreError(f"cannot open the store {p}: {str(exc).splitlines()[0]}") from None
    try:
        if not external_access:
            _close_external_access(con, allowed_directories)
        if read_only:
            if schema_version(con) == 0:
                raise StoreError(f"{p} is not an afterward store (no schema found)")
        else:
            apply_schema(con)
    except BaseException:
        con.close()
        raise
    return con


@contextmanager
def writer(path: str | os.PathLike[str], **kwargs: object) -> Iterator[duckdb.DuckDBPyConnection]:
    """The one writer, closed on exit so the lock is held no longer than needed."""
    con = connect(path, read_only=False, create=True, **kwargs)  # type: ignore[arg-type]
    try:
        yield con
    finally:
        con.close()


@contextmanager
def writer_for(path: str | os.PathLike[str], con: duckdb.DuckDBPyConnection | None = None
               ) -> Iterator[duckdb.DuckDBPyConnection]:
    """``con`` when given (the store a command or flow run opened once and passes down; left open),
    else a :func:`writer` of ``path`` for the block: a step called on its own opens its own store."""
    if con is not None:
        yield con
        return
    with writer(path) as opened:
        yield opened


@contextmanager
def reader(path: str | os.PathLike[str], **kwargs: object) -> Iterator[duckdb.DuckDBPyConnection]:
    """A read-only connection, closed on exit."""
    con = connect(path, read_only=True, **kwargs)  # type: ignore[arg-type]
    try:
        yield con
    finally:
        con.close()


@contextmanager
def transaction(con: duckdb.DuckDBPyConnection) -> Iterator[duckdb.DuckDBPyConnection]:
    """One transaction for the block: committed at its end, rolled back if it raises (even on Ctrl-C)."""
    con.execute("BEGIN TRANSACTION")
    try:
        yield con
    except BaseException:
        try:
            con.execute("ROLLBACK")
        except duckdb.Error:
            pass        # the failure that got us here is the one to report
        raise
    con.execute("COMMIT")


@contextmanager
def one_thread(con: duckdb.DuckDBPyConnection) -> Iterator[duckdb.DuckDBPyConnection]:
    """Run ``con``'s statements on one DuckDB thread for the length of the block.

    For a long series of tiny statements (a load is several per file): waking DuckDB's thread pool
    for each costs more than the statement itself, about 0.1 ms a statement on 2 cores.
    """
    con.execute("SET threads = 1")
    try:
        yield con
    finally:
        try:
            con.execute("RESET threads")
        except duckdb.Error:
            pass        # a connection that failed is closed by its owner anyway
