"""The one connection factory: a store a job holds open is locked to other processes, which get the
one-line :class:`StoreLocked` (DuckDB's rule: one writing process or many readers, never both)."""

from __future__ import annotations

import subprocess
import sys

import pytest

from warehouse.connect import transaction, writer, writer_for


def test_another_process_cannot_open_a_store_a_job_holds(tmp_path):
    path = tmp_path / "held.duckdb"
    with writer(path):
        code = ("import sys; from warehouse.connect import connect, StoreLocked\n"
                f"try:\n    connect({str(path)!r}, read_only=True, wait_seconds=0.2)\n"
                "except StoreLocked:\n    sys.exit(3)\n")
        assert subprocess.run([sys.executable, "-c", code], check=False).returncode == 3  # StoreLocked
    # let go at the end of the block: now it opens
    code = f"from warehouse.connect import connect; connect({str(path)!r}, read_only=True).close()"
    assert subprocess.run([sys.executable, "-c", code], check=False).returncode == 0


def test_a_step_given_the_store_uses_it_and_leaves_it_open(tmp_path):
    path = tmp_path / "s.duckdb"
    with writer(path) as con:
        with writer_for(path, con) as got:
            assert got is con
        con.execute("CREATE TABLE t AS SELECT 1 AS x")   # still open
        with writer_for(path, con) as got, transaction(got):
            got.execute("INSERT INTO t VALUES (2)")
        with pytest.raises(ZeroDivisionError), transaction(con):
            con.execute("INSERT INTO t VALUES (3)")
            raise ZeroDivisionError        # rolled back: 3 never lands
        assert con.execute("SELECT sum(x) FROM t").fetchall() == [(3,)]
