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


# --- the options and messages of the command line ------------------------------------------------

def test_config_is_accepted_before_and_after_the_command(project, tmp_path_factory):
    (project / "govt_2031-01.csv").write_text(GOOD)
    assert run_cli("load", "govt_2031-01.csv", cwd=project).returncode == 0
    elsewhere = tmp_path_factory.mktemp("elsewhere")  # no afterward.toml here: only --config finds it
    config = str(project / "afterward.toml")
    before = run_cli("--config", config, "status", cwd=elsewhere)
    after = run_cli("status", "--config", config, cwd=elsewhere)
    assert before.returncode == 0, before.stderr
    assert after.returncode == 0, after.stderr
    assert "2031-01-02" in after.stdout and after.stdout == before.stdout
    none = run_cli("status", cwd=elsewhere)
    assert none.returncode == 2 and "config file not found" in _one_line_error(none)


# The commands of the contract's command-line table (CONTRACT.md, "Command line"); any command the
# program has besides these is checked too.
CONTRACT_COMMANDS = ["init", "load", "check", "build", "realize", "audit", "report", "run", "backfill", "serve",
                     "sql", "export", "demo", "status"]


def _all_commands() -> list[str]:
    from flows.cli import app

    names = [c.name or c.callback.__name__ for c in app.registered_commands]
    # a group's own help, then each of its commands ("forecasts", "forecasts load", ...)
    for group in app.registered_groups:
        names.append(group.name)
        names += [f"{group.name} {c.name or c.callback.__name__}" for c in group.typer_instance.registered_commands]
    return CONTRACT_COMMANDS + sorted(set(names) - set(CONTRACT_COMMANDS))


def test_help_shows_what_a_user_types_not_python_types(tmp_path):
    seen = {}
    for command in ["", *_all_commands()]:
        proc = run_cli(*command.split(), "--help", cwd=tmp_path, env={"COLUMNS": "200"})
        assert proc.returncode == 0, (command, proc.stderr)
        # typer's type markers: <bool>, <str>, <path>, <list[Path]>, <int>
        assert "<" not in proc.stdout, (command, [x for x in proc.stdout.splitlines() if "<" in x])
        seen[command] = proc.stdout
    assert "Usage: afterward load [OPTIONS] FILE..." in seen["load"]
    assert "Usage: afterward init [OPTIONS] [DIR]" in seen["init"]
    assert "Usage: afterward sql [OPTIONS] QUERY" in seen["sql"]
    assert "Usage: afterward forecasts load [OPTIONS] FILE..." in seen["forecasts load"]
    # a flag shows no value: "--full-sample-only" then straight to its help text
    flag = next(x for x in seen["model"].splitlines() if "--full-sample-only" in x)
    assert flag.split("--full-sample-only", 1)[1].split()[0] == "Only", flag
    for command, option, metavar in [("audit", "--from", "DATE"), ("audit", "--start", "TENOR"),
                                     ("audit", "--curve", "CURVE"), ("audit", "--format", "FORMAT"),
                                     ("sql", "--out", "FILE"), ("report", "--out", "DIR"), ("export", "--to", "DIR"),
                                     ("backfill", "--workers", "N"), ("status", "--config", "FILE"),
                                     ("model", "--curve", "CURVE"), ("model", "--factors", "K"),
                                     ("model", "--max-months", "N"), ("model", "--config", "FILE"),
                                     ("forecasts load", "--name", "NAME"), ("forecasts load", "--units", "UNITS"),
                                     ("forecasts load", "--curve", "CURVE"), ("forecasts list", "--format", "FORMAT"),
                                     ("", "--config", "FILE")]:
        # the options panel's row: "│ [*] --from  DATE  First as-of date ..."
        line = next(x for x in seen[command].splitlines() if x.strip("│ *").startswith(f"{option} "))
        assert line.split(option, 1)[1].split()[0] == metavar, (command, line)


def test_audit_refuses_a_start_or_tenor_outside_the_grid_naming_the_grid(project):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    # SMALL_CONFIG: govt forward.starts 0M, 3M, 1Y and forward.tenors 3M, 1Y
    proc = run_cli("audit", "--curve", "govt", "--start", "13M", cwd=project)
    assert proc.returncode == 2
    line = _one_line_error(proc)
    assert "--start 13M" in line and "0M, 3M, 1Y" in line
    proc = run_cli("audit", "--curve", "govt", "--tenor", "2Y", cwd=project)
    assert proc.returncode == 2 and "3M, 1Y" in _one_line_error(proc)
    ok = run_cli("audit", "--curve", "govt", "--start", "12M", "--tenor", "3M", cwd=project)  # 12M is 1Y
    assert ok.returncode == 0, ok.stderr


@pytest.mark.parametrize(
    ("query", "n"),
    [
        pytest.param("SELECT 1 AS a; SELECT 2 AS a", 2, id="two"),
        pytest.param("SELECT 1 AS a;SELECT 2 AS a;SELECT 3 AS a;", 3, id="three-trailing-semicolon"),
    ],
)
def test_sql_refuses_more_than_one_statement(project, query, n):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    proc = run_cli("sql", query, "--format", "csv", cwd=project)
    assert proc.returncode == 2 and proc.stdout == ""
    assert f"{n} statements" in _one_line_error(proc)


@pytest.mark.parametrize(
    ("query", "expected"),
    [
        pytest.param("SELECT 'a;b' AS x", "a;b", id="semicolon-in-a-string"),
        pytest.param("SELECT 'a;b' AS x;", "a;b", id="trailing-semicolon"),
        pytest.param("SELECT 'a' AS x; -- a comment; not a statement", "a", id="comment-after"),
    ],
)
def test_sql_one_statement_with_semicolons_runs(project, query, expected):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    proc = run_cli("sql", query, "--format", "csv", cwd=project)
    assert proc.returncode == 0, proc.stderr
    # csv module, not our writer, reads the output back (a ';' needs no quoting in a comma-separated file)
    import csv
    import io

    assert list(csv.reader(io.StringIO(proc.stdout))) == [["x"], [expected]]


def test_sql_out_keeps_an_existing_file_unless_force(project):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    target = project / "result.csv"
    target.write_text("precious\n")
    proc = run_cli("sql", "SELECT count(*) AS n FROM quotes", "--format", "csv", "--out", "result.csv", cwd=project)
    assert proc.returncode == 1 and "already exists" in _one_line_error(proc) and "--force" in proc.stderr
    assert target.read_text() == "precious\n"
    forced = run_cli("sql", "SELECT count(*) AS n FROM quotes", "--format", "csv", "--out", "result.csv", "--force",
                     cwd=project)
    assert forced.returncode == 0, forced.stderr
    assert target.read_text() == "n\n5\n"
    # parquet too; pyarrow reads it back
    pq_out = project / "result.parquet"
    pq_out.write_bytes(b"not parquet")
    proc = run_cli("sql", "SELECT 1 AS a", "--format", "parquet", "--out", "result.parquet", cwd=project)
    assert proc.returncode == 1 and pq_out.read_bytes() == b"not parquet"
    folder = run_cli("sql", "SELECT 1 AS a", "--format", "csv", "--out", str(project), cwd=project)
    assert folder.returncode == 2 and "is a folder" in _one_line_error(folder)
    assert sorted(p.name for p in project.iterdir() if p.name.startswith("result")) == ["result.csv",
                                                                                        "result.parquet"]


def test_report_out_names_a_folder_and_an_existing_file_is_refused(project):
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    existing = project / "report.html"
    existing.write_text("earlier report")
    proc = run_cli("report", "--out", "report.html", cwd=project)
    assert proc.returncode == 2 and "is a file" in _one_line_error(proc)
    assert existing.read_text() == "earlier report"


def test_a_verbatim_duplicate_is_rejected_without_a_finding_a_conflicting_one_with_one(project):
    """What the README says about same-day duplicates within one file, checked on the store."""
    import duckdb

    (project / "govt_2031-01.csv").write_text(
        "date,3M,1Y,2Y,5Y,10Y\n"
        "2031-01-02,4.10,4.20,4.30,4.50,4.80\n"
        "2031-01-02,4.10,4.20,4.30,4.50,4.80\n"   # line 3: line 2 again, verbatim
        "2031-01-03,4.10,4.20,4.30,4.50,4.80\n"
        "2031-01-03,4.10,4.20,4.30,4.55,4.80\n")  # line 5: day 3 again with 5Y changed
    proc = run_cli("load", "govt_2031-01.csv", cwd=project)
    assert proc.returncode == 1  # rejected rows
    with duckdb.connect(str(project / "store.duckdb"), read_only=True) as con:
        rejected = con.execute("SELECT line, reason FROM rejected_rows ORDER BY line, reason").fetchall()
        findings = con.execute("SELECT as_of, check_name, tenor FROM findings").fetchall()
        kept = con.execute("SELECT as_of, tenor, rate FROM quotes WHERE tenor = '5Y' ORDER BY as_of").fetchall()
    # a row is one quote: line 3 repeats all five of line 2; line 5 repeats four of line 4's and changes 5Y
    assert [reason for line, reason in rejected if line == 3] == ["duplicate: repeats line 2 with the same value"] * 5
    assert [reason for line, reason in rejected if line == 5 and "repeats" in reason] == [
        "duplicate: repeats line 4 with the same value"] * 4
    conflicting = [line for line, reason in rejected
                   if "conflicting values (percent) for 5Y on 2 lines: 4.5 on line 4, 4.55 on line 5" in reason]
    assert conflicting == [4, 5]
    assert len(rejected) == 5 + 4 + 2
    # one finding: the conflicting 5Y on 2031-01-03; none for the verbatim repeat
    assert [(str(d), c, t) for d, c, t in findings] == [("2031-01-03", "duplicate", "5Y")]
    # the verbatim repeat's first line is kept; neither conflicting value is
    assert [(str(d), r) for d, _, r in kept] == [("2031-01-02", pytest.approx(0.045))]


def test_which_rejected_rows_raise_a_finding(project):
    """The README: a rate outside the plausible band is rejected and its day gets an out_of_range finding;
    a tenor the curve does not list, or a date that does not parse, is rejected with no finding."""
    import duckdb

    (project / "govt_2031-02.csv").write_text(
        "date,3M,7Y\n"
        "2031-02-03,4.10,4.90\n"   # 7Y is a tenor, but not one of curves.govt.tenors
        "2031-02-04,99,\n"          # 99 % is outside the band of -5 % to +40 %
        "2031-02-31,4.10,\n")       # no such day
    proc = run_cli("load", "govt_2031-02.csv", cwd=project)
    assert proc.returncode == 1 and "read 4, accepted 1, rejected 3" in proc.stdout
    with duckdb.connect(str(project / "store.duckdb"), read_only=True) as con:
        rejected = con.execute("SELECT line, reason FROM rejected_rows ORDER BY line").fetchall()
        findings = con.execute("SELECT as_of, check_name, tenor FROM findings").fetchall()
    assert [line for line, _ in rejected] == [2, 3, 4]
    assert "unknown tenor: 7Y" in rejected[0][1]
    assert "rate 99 (percent) outside the plausible band -5 % to 40 %" in rejected[1][1]
    assert [(str(d), c, t) for d, c, t in findings] == [("2031-02-04", "out_of_range", "3M")]


def test_a_what_if_build_goes_to_forward_built_under_its_scenario_and_leaves_forwards(project):
    """The README's views table: ``build --method M`` writes scenario ``what-if:M`` into forward_built."""
    (project / "govt_2031-01.csv").write_text(GOOD)
    run_cli("load", "govt_2031-01.csv", cwd=project)
    assert run_cli("build", cwd=project).returncode == 0
    query = ("SELECT scenario, count(*) AS n FROM forward_built WHERE curve = 'govt' GROUP BY ALL ORDER BY ALL")
    before = run_cli("sql", query, "--format", "csv", cwd=project).stdout
    official = run_cli("sql", "SELECT * FROM forwards ORDER BY ALL", "--format", "csv", cwd=project).stdout
    proc = run_cli("build", "--method", "linear_zero", cwd=project)
    assert proc.returncode == 0 and "what-if:linear_zero" in proc.stdout, proc.stdout + proc.stderr
    after = run_cli("sql", query, "--format", "csv", cwd=project).stdout
    n = before.splitlines()[1].split(",")[1]  # SMALL_CONFIG: 3 starts x 2 tenors on the one day
    assert before.splitlines() == ["scenario,n", f"official,{n}"] and n == "6"
    assert after.splitlines() == ["scenario,n", f"official,{n}", f"what-if:linear_zero,{n}"]
    assert run_cli("sql", "SELECT * FROM forwards ORDER BY ALL", "--format", "csv", cwd=project).stdout == official
