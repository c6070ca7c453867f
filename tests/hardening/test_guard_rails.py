"""Guard rails of ``afterward sql``: queries only (no writes, ATTACH, COPY ... TO, INSTALL/LOAD, SET,
nor an EXPLAIN ANALYZE of any of them), no file read outside the store's folder and the inbox folders
unless ``--allow-files``, and CSV cells that a spreadsheet would run as formulas neutralised, while
numbers (negative ones too) pass untouched.

Most cases call the command line's own entry point in this process (``flows.cli.main``: the same
parsing, guard, connection and output as the installed command); two run it as a subprocess.

DuckDB resolves a relative path in ``COPY ... TO 'leak.csv'`` or ``EXPORT DATABASE`` against the
working directory of the process that runs the statement (not the store's folder), and writes
through a temporary ``tmp_<name>`` file beside the target when it overwrites. So the in-process
cases run in an empty working directory of their own and require it to stay empty, whatever the
names; the subprocess case runs in the project and requires the project's files to be unchanged."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pytest

from flows.cli import main
from flows.load_step import load_files
from pipeline.config import load_config
from tests.hardening.harness import CONFIG, run_bounded


@pytest.fixture(scope="module")
def project(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("guard")
    proj = root / "proj"
    (proj / "inbox").mkdir(parents=True)
    (proj / "afterward.toml").write_text(CONFIG, encoding="utf-8")
    good = proj / "inbox" / "govt_2031-01.csv"
    good.write_text("date,3M,1Y,2Y,5Y,10Y\n2031-01-02,4.10,4.20,4.30,4.50,4.80\n"
                    "2031-01-03,=1+2,+cmd|' /C calc'!A0,@SUM(A1),-2+3,4.81\n", encoding="utf-8")
    load_files(load_config(proj / "afterward.toml"), [good])
    # a sibling whose name starts with the project's: a plain prefix test would let it through
    outside = root / "proj-outside"
    outside.mkdir()
    (outside / "secret.csv").write_text("a,b\n1,2\n", encoding="utf-8")
    (root / "secret.txt").write_text("top secret\n", encoding="utf-8")
    return proj


@pytest.fixture
def cwd(tmp_path, monkeypatch) -> Path:  # noqa: ANN001
    """An empty working directory for the in-process command: where a relative COPY target would land."""
    folder = tmp_path / "cwd"
    folder.mkdir()
    monkeypatch.chdir(folder)
    return folder


def _files(folder: Path) -> set[str]:
    return {str(p.relative_to(folder)) for p in folder.rglob("*") if not p.name.endswith(".wal")}


def _sql(project: Path, capsys, *args: str) -> tuple[int, str, str]:  # noqa: ANN001
    capsys.readouterr()
    code = main(["--config", str(project / "afterward.toml"), "sql", *args])
    out, err = capsys.readouterr()
    return code, out, err


def _one_line(err: str) -> str:
    lines = [x for x in err.splitlines() if x.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


@pytest.mark.parametrize(("query", "kind"), [
    pytest.param("DELETE FROM quote_version", "DELETE", id="delete"),
    pytest.param("UPDATE quote_version SET rate = 0", "UPDATE", id="update"),
    pytest.param("INSERT INTO load_log SELECT * FROM load_log", "INSERT", id="insert"),
    pytest.param("CREATE TABLE t AS SELECT 1", "CREATE", id="create"),
    pytest.param("DROP VIEW quotes", "DROP", id="drop"),
    pytest.param("ALTER VIEW quotes RENAME TO q", "ALTER", id="alter"),
    pytest.param("ATTACH 'other.duckdb' AS o", "ATTACH", id="attach"),
    pytest.param("DETACH o", "DETACH", id="detach"),
    pytest.param("COPY quote_version TO 'leak.csv'", "COPY", id="copy-to"),
    pytest.param("COPY (SELECT * FROM quotes) TO 'leak.parquet' (FORMAT parquet)", "COPY", id="copy-query-to"),
    pytest.param("EXPORT DATABASE 'leak-dir'", "EXPORT", id="export-database"),
    pytest.param("INSTALL httpfs", "LOAD", id="install"),
    pytest.param("LOAD httpfs", "LOAD", id="load"),
    pytest.param("SET enable_external_access = true", "SET", id="set"),
    pytest.param("RESET lock_configuration", "SET", id="reset"),
    pytest.param("PRAGMA enable_profiling", "PRAGMA", id="pragma"),
    pytest.param("CALL pragma_version()", "CALL", id="call"),
    pytest.param("CHECKPOINT", "CALL", id="checkpoint"),
    pytest.param("SELECT 1; DROP VIEW quotes", "DROP", id="query-then-drop"),
    pytest.param("EXPLAIN ANALYZE COPY quote_version TO 'leak.csv'", "EXPLAIN COPY", id="explain-analyze-copy"),
    pytest.param("/* note */ explain analyse INSERT INTO load_log SELECT * FROM load_log", "EXPLAIN INSERT",
                 id="explain-analyse-insert"),
    pytest.param("EXPLAIN (FORMAT json) COPY quote_version TO 'leak.csv'", "EXPLAIN COPY", id="explain-options-copy"),
])
@pytest.mark.parametrize("allow_files", [False, True], ids=["plain", "allow-files"])
def test_statements_other_than_queries_are_refused(project, capsys, cwd, query, kind, allow_files):
    before = _files(project.parent)
    args = [query, "--allow-files"] if allow_files else [query]
    code, out, err = _sql(project, capsys, *args)
    assert code == 2, out + err
    assert f"refused: {kind} statements are not allowed" in _one_line(err)
    assert list(cwd.iterdir()) == [], "a refused statement wrote a file"
    assert _files(project.parent) == before


@pytest.mark.parametrize("query", [
    pytest.param("SELECT * FROM read_text('/etc/hostname')", id="read-text-absolute"),
    pytest.param("SELECT * FROM read_blob('/etc/hostname')", id="read-blob"),
    pytest.param("SELECT * FROM read_csv('{root}/proj-outside/secret.csv')", id="prefix-sibling"),
    pytest.param("SELECT * FROM read_text('{proj}/../secret.txt')", id="dot-dot-escape"),
    pytest.param("SELECT * FROM read_text('{proj}/inbox/../../secret.txt')", id="dot-dot-from-inbox"),
    pytest.param("SELECT * FROM glob('/etc/*')", id="glob"),
    pytest.param("SELECT * FROM glob('{proj}/../*')", id="glob-parent"),
    pytest.param("SELECT * FROM read_parquet('/tmp/*.parquet')", id="read-parquet-glob"),
    pytest.param("SELECT * FROM read_json('/etc/hostname')", id="read-json"),
    pytest.param("SELECT * FROM sniff_csv('{root}/proj-outside/secret.csv')", id="sniff-csv"),
    pytest.param("SELECT * FROM parquet_metadata('/tmp/x.parquet')", id="parquet-metadata"),
    pytest.param("SELECT * FROM read_csv(['{proj}/inbox/govt_2031-01.csv', '{root}/proj-outside/secret.csv'])",
                 id="list-with-one-outside"),
    pytest.param("SELECT * FROM '{root}/proj-outside/secret.csv'", id="replacement-scan"),
    pytest.param("SELECT * FROM read_csv('https://example.invalid/x.csv')", id="url"),
    pytest.param("SELECT * FROM query('COPY quote_version TO ''leak.csv''')", id="query-function-copy"),
])
def test_files_outside_the_store_folders_are_refused(project, capsys, cwd, query):
    q = query.format(root=project.parent, proj=project)
    code, out, err = _sql(project, capsys, q)
    assert code == 2, out
    line = _one_line(err)
    assert line.startswith("afterward: SQL error:"), line
    assert "secret" not in out and "top secret" not in out
    assert list(cwd.iterdir()) == []


@pytest.mark.parametrize("query", [
    pytest.param("SELECT count(*) AS n FROM quotes", id="view"),
    pytest.param("WITH q AS (SELECT * FROM quotes) SELECT count(*) AS n FROM q", id="cte"),
    pytest.param("SUMMARIZE quotes", id="summarize"),
    pytest.param("DESCRIBE quotes", id="describe"),
    pytest.param("EXPLAIN SELECT * FROM quotes", id="explain"),
    pytest.param("EXPLAIN ANALYZE SELECT * FROM quotes", id="explain-analyze-select"),
    pytest.param("SELECT count(*) AS n FROM read_csv('{proj}/inbox/govt_2031-01.csv')", id="inbox-file"),
    pytest.param("SELECT count(*) AS n FROM glob('{proj}/*')", id="glob-store-folder"),
])
def test_queries_and_files_inside_are_allowed(project, capsys, query):
    code, out, err = _sql(project, capsys, query.format(proj=project), "--format", "csv")
    assert code == 0, err
    assert err == ""
    rows = _csv_rows(out)
    assert len(rows) >= 2 and rows[0], out   # a header and at least one row came back
    if rows[0] == ["n"]:
        # the counts as an independent reader sees them: the csv module on the inbox file, a plain
        # listing of the store's folder, DuckDB opened read-only on the store
        if "read_csv" in query:
            want = len(list(csv.reader(io.StringIO((project / "inbox" / "govt_2031-01.csv").read_text())))) - 1
        elif "glob" in query:
            want = sum(1 for p in project.iterdir() if p.is_file())
        else:
            import duckdb

            con = duckdb.connect(str(project / "store.duckdb"), read_only=True)
            try:
                want = con.execute("SELECT count(*) FROM quotes").fetchone()[0]  # type: ignore[index]
            finally:
                con.close()
        assert int(rows[1][0]) == want, (query, out)


def test_allow_files_reads_outside_but_still_writes_nothing(project, capsys):
    secret = project.parent / "proj-outside" / "secret.csv"
    code, out, err = _sql(project, capsys, f"SELECT * FROM read_csv('{secret}')", "--format", "csv", "--allow-files")
    assert code == 0 and out.splitlines() == ["a,b", "1,2"], err
    hostname = Path("/etc/hostname")
    code, out, err = _sql(project, capsys, f"SELECT content FROM read_text('{hostname}')", "--format", "csv",
                          "--allow-files")
    assert code == 0, err
    # the file's text as Python reads it (the first line: a host name is one line)
    assert hostname.read_text().strip() in out


def _csv_rows(text: str) -> list[list[str]]:
    return list(csv.reader(io.StringIO(text)))


def test_csv_cells_that_would_run_as_formulas_are_neutralised(project, capsys):
    # OWASP "CSV Injection": cells starting with =, +, -, @, tab or carriage return are run by spreadsheets
    query = ("SELECT '=1+2' AS eq, '+cmd|'' /C calc''!A0' AS plus, '-2+3' AS minus, '@SUM(A1)' AS at, "
             "chr(9) || '=1' AS tab, 'plain' AS text, -0.5 AS neg_double, -3 AS neg_int, "
             "CAST(-2.50 AS DECIMAL(5, 2)) AS neg_decimal, -1e-300 AS tiny, DATE '2031-01-02' AS day")
    code, out, err = _sql(project, capsys, query, "--format", "csv")
    assert code == 0, err
    header, row = _csv_rows(out)
    got = dict(zip(header, row, strict=True))
    assert got["eq"] == "'=1+2" and got["plus"] == "'+cmd|' /C calc'!A0" and got["minus"] == "'-2+3"
    assert got["at"] == "'@SUM(A1)" and got["tab"] == "'\t=1" and got["text"] == "plain"
    # numbers are numbers: a spreadsheet reads them as values, so they stay as they are
    assert (got["neg_double"], got["neg_int"], got["neg_decimal"]) == ("-0.5", "-3", "-2.50")
    assert float(got["tiny"]) == -1e-300 and got["day"] == "2031-01-02"


def test_csv_export_of_stored_text_is_neutralised(project, capsys, tmp_path):
    """Cells that came from a file (the rejected rows keep the raw line) are text and neutralised;
    rates computed from the store, negative ones included, are not."""
    query = ("SELECT split_part(raw, ',', 2) AS cell, split_part(raw, ',', 3) AS cell2 FROM rejected_rows "
             "WHERE line = 3 LIMIT 1")
    out_file = tmp_path / "out.csv"
    code, _out, err = _sql(project, capsys, query, "--format", "csv", "--out", str(out_file))
    assert code == 0, err
    header, row = _csv_rows(out_file.read_text(encoding="utf-8"))
    assert row == ["'=1+2", "'+cmd|' /C calc'!A0"]
    code, out, err = _sql(project, capsys, "SELECT rate - 1 AS r FROM quotes ORDER BY r LIMIT 2", "--format", "csv")
    assert code == 0
    values = [r[0] for r in _csv_rows(out)[1:]]
    assert values and all(v.startswith("-0.9") for v in values)


def test_table_output_prints_markup_as_text(project, capsys):
    code, out, err = _sql(project, capsys, "SELECT '[/b]' AS \"[/h]\", '[bold]x' AS y")
    assert code == 0, err
    assert "[/b]" in out and "[/h]" in out and "[bold]x" in out


def test_the_installed_command_refuses_the_same(project):
    """The real entry point in a fresh process: exit 2, one line, no traceback, nothing written."""
    before = _files(project)
    run = run_bounded("sql", "EXPLAIN ANALYZE COPY quote_version TO 'leak.csv'", cwd=project, timeout=60)
    assert run.returncode == 2 and not run.traceback
    assert "refused: EXPLAIN COPY" in _one_line(run.stderr)
    run = run_bounded("sql", f"SELECT * FROM read_text('{project.parent / 'secret.txt'}')", cwd=project, timeout=60)
    assert run.returncode == 2 and "Permission Error" in _one_line(run.stderr)
    # the process ran in the project: a relative COPY target (or its tmp_ file) would be there
    assert _files(project) == before
