"""The command line as a user meets it: one-line messages, exit statuses, no tracebacks."""

from __future__ import annotations

import subprocess
import sys
import time

import pytest

from pipeline.config import load_config
from pipeline.config_template import CONFIG_TEMPLATE
from tests.conftest import run_cli

GOOD = "date,3M,1Y,2Y,5Y,10Y\n2031-01-02,4.10,4.20,4.30,4.50,4.80\n"


def _one_line_error(proc: subprocess.CompletedProcess[str]) -> str:
    assert "Traceback" not in proc.stderr + proc.stdout
    lines = [x for x in proc.stderr.splitlines() if x.strip()]
    assert len(lines) == 1, proc.stderr
    return lines[0]


def test_init_writes_a_config_that_loads_and_an_empty_store(tmp_path):
    proc = run_cli("init", str(tmp_path / "proj"), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    cfg = load_config(tmp_path / "proj" / "afterward.toml")
    assert cfg.store_path.exists() and "govt" in cfg.curves
    assert (tmp_path / "proj" / "afterward.toml").read_text() == CONFIG_TEMPLATE
    again = run_cli("init", str(tmp_path / "proj"), cwd=tmp_path)
    assert again.returncode == 1 and "already exists" in _one_line_error(again)


def test_load_then_status_and_sql(project):
    (project / "govt_2031-01.csv").write_text(GOOD)
    proc = run_cli("load", "govt_2031-01.csv", cwd=project)
    assert proc.returncode == 0, proc.stderr
    assert "read 5, accepted 5, rejected 0" in proc.stdout
    again = run_cli("load", "govt_2031-01.csv", cwd=project)
    assert again.returncode == 0 and "already loaded" in again.stdout
    csv = run_cli("sql", "SELECT tenor, rate FROM quotes ORDER BY rate", "--format", "csv", cwd=project)
    assert csv.returncode == 0
    assert csv.stdout.splitlines()[:2] == ["tenor,rate", "3M,0.041"]
    js = run_cli("sql", "SELECT count(*) AS n FROM quotes", "--format", "json", cwd=project)
    assert '"n": 5' in js.stdout
    st = run_cli("status", cwd=project)
    assert st.returncode == 0 and "govt" in st.stdout and "2031-01-02" in st.stdout


@pytest.mark.parametrize(
    ("statement", "kind"),
    [
        pytest.param("DELETE FROM quote_version", "DELETE", id="delete"),
        pytest.param("INSERT INTO load_log SELECT * FROM load_log", "INSERT", id="insert"),
        pytest.param("DROP VIEW quotes", "DROP", id="drop"),
        pytest.param("ATTACH 'other.duckdb'", "ATTACH", id="attach"),
        pytest.param("COPY quote_version TO 'leak.csv'", "COPY", id="copy-to"),
        pytest.param("INSTALL httpfs", "LOAD", id="install"),
        pytest.param("CREATE TABLE x (a INT)", "CREATE", id="create"),
    ],
)
def test_sql_refuses_writes(project, statement, kind):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    proc = run_cli("sql", statement, cwd=project)
    assert proc.returncode == 2
    assert f"{kind} statements are not allowed" in _one_line_error(proc)


def test_sql_cannot_read_files_outside_the_store_unless_allowed(project, tmp_path_factory):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    outside = tmp_path_factory.mktemp("elsewhere") / "other.csv"
    outside.write_text(GOOD)
    proc = run_cli("sql", f"SELECT * FROM read_csv('{outside}')", cwd=project)
    assert proc.returncode == 2 and "SQL error" in _one_line_error(proc)
    ok = run_cli("sql", f"SELECT count(*) AS n FROM read_csv('{outside}')", "--allow-files",
                 "--format", "csv", cwd=project)
    assert ok.returncode == 0 and ok.stdout.splitlines()[1] == "1"


@pytest.mark.parametrize(
    ("content", "message", "code", "status", "read", "rejected"),
    [
        # exit 1 when a file is refused or a row rejected, 0 otherwise (the contract's exit statuses);
        # rows read counted by hand from each file's text
        pytest.param(b"", "empty file", 1, "refused", 0, 0, id="empty-file"),
        pytest.param(b"\x00\xff\x00\xfe" * 64, "binary file", 1, "refused", 0, 0, id="binary-file"),
        pytest.param(b"date,3M,1Y\n", "read 0, accepted 0", 0, "loaded", 0, 0, id="header-only"),
        pytest.param(b"date,7Q,9Z\n2031-01-02,1,2\n", "no column of the header is a tenor", 1, "refused", 0, 0,
                     id="unknown-tenors"),
        pytest.param(b"date,3M\n2031-01-02,abc\n", "rejected 1", 1, "loaded", 1, 1, id="text-in-rate"),
        pytest.param(b"date,as_of,3M\n2031-01-02,2031-01-02,4\n", "two date columns", 1, "refused", 0, 0,
                     id="two-date-columns"),
        pytest.param(b"date,3M\n2031-01-05,4\n2031-01-02,4\n", "accepted 2", 0, "loaded", 2, 0,
                     id="dates-out-of-order"),
    ],
)
def test_bad_files_never_traceback(project, content, message, code, status, read, rejected):
    (project / "govt_bad.csv").write_bytes(content)
    proc = run_cli("load", "govt_bad.csv", cwd=project)
    assert "Traceback" not in proc.stdout + proc.stderr
    assert message in proc.stdout + proc.stderr
    assert proc.returncode == code, proc.stdout + proc.stderr
    # the store holds what the line said: one load, its status and counts, a refusal's reason at line 0
    import duckdb

    con = duckdb.connect(str(project / "store.duckdb"), read_only=True)
    try:
        loads = con.execute("SELECT status, rows_read, rows_rejected FROM loads").fetchall()
        reasons = con.execute("SELECT line, reason FROM rejected_rows").fetchall()
    finally:
        con.close()
    assert loads == [(status, read, rejected)]
    if status == "refused":
        assert len(reasons) == 1 and reasons[0][0] == 0 and message in reasons[0][1]
    else:
        assert len(reasons) == rejected


def test_missing_file_is_a_one_line_error(project):
    proc = run_cli("load", "nowhere.csv", cwd=project)
    assert proc.returncode == 1 and "file not found" in proc.stdout


@pytest.mark.parametrize(
    ("toml", "message"),
    [
        pytest.param("[store]\npath = 1\n[curves.a]\ntenors=['1Y']\n", "store.path must be a path", id="bad-path"),
        pytest.param("[curves.a]\ntenors=['1Y']\nquote='fancy'\n", "allowed: zero, par, discount, simple",
                     id="unknown-quote"),
        pytest.param("[curves.a]\ntenors=['1Y']\nday_count='ACT/999'\n", "allowed: ACT/365F", id="day-count"),
        pytest.param("[curves.a]\ntenors=['1Y', '3Q']\n", "curves.a.tenors", id="malformed-tenor"),
        pytest.param("[curves.a]\ntenors=['1Y']\ncolour='red'\n", "unknown key curves.a.'colour'", id="unknown-key"),
        pytest.param("[curves.a]\ntenors=['1Y']\ninterpolation='spline'\n", "monotone_convex", id="interp"),
        pytest.param("this is not toml = = =", "not valid TOML", id="not-toml"),
        pytest.param("[curves.a]\ntenors=['1Y']\nchecks.severity.jump='fatal'\n", "allowed: reject, warn, info",
                     id="severity"),
    ],
)
def test_bad_config_is_refused_naming_the_key(tmp_path, toml, message):
    (tmp_path / "afterward.toml").write_text(toml)
    proc = run_cli("status", cwd=tmp_path)
    assert proc.returncode == 2
    line = _one_line_error(proc)
    assert message in line
    assert not list(tmp_path.glob("*.duckdb")), "a bad config must write nothing"


def test_locked_store_is_a_one_line_error(project):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    holder = subprocess.Popen(
        [sys.executable, "-c", "import duckdb, time; c = duckdb.connect('store.duckdb'); print('ok', flush=True);"
         " time.sleep(30)"], cwd=project, stdout=subprocess.PIPE, text=True,
    )
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "ok"
        t0 = time.monotonic()
        proc = run_cli("status", cwd=project)
        assert proc.returncode == 1
        line = _one_line_error(proc)
        assert "locked by process" in line and str(holder.pid) in line
        assert time.monotonic() - t0 < 20
        load = run_cli("load", "govt_2031-01.csv", cwd=project)
        assert load.returncode == 1 and "locked" in _one_line_error(load)
    finally:
        holder.kill()
        holder.wait()
        if holder.stdout is not None:
            holder.stdout.close()


def test_usage_errors_exit_2(project):
    proc = run_cli("no-such-command", cwd=project)
    assert proc.returncode == 2 and "No such command" in _one_line_error(proc)
    proc = run_cli("sql", "SELECT 1", "--format", "xml", cwd=project)
    assert proc.returncode == 2
    line = _one_line_error(proc)
    assert "--format 'xml' is not allowed" in line and "table, csv, json, parquet" in line
    assert proc.stdout == ""
