"""The notebook handle ``afterward.open()``: its frames, its SQL guard, its locks and its mistakes.

Independent side of each check: the store read with plain DuckDB (a read-only connection opened
here) or the real command line in another process.
"""

from __future__ import annotations

import re
import subprocess
import sys
import textwrap
import time
from datetime import UTC, datetime
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

import afterward
from pipeline.errors import AfterwardError, ArgumentError, ConfigError, KnownAtError, UserError
from tests.conftest import REPO, run_cli
from tests.e2e.stores import Project, clone_project, write_wide_csv
from tests.notebook.store import TENORS, business_days, quotes

pytestmark = pytest.mark.timeout(300)


def _plain(p: Project, query: str, params: list | None = None) -> pd.DataFrame:
    con = duckdb.connect(str(p.cfg.store_path), read_only=True)
    try:
        return con.sql(query, params=params).df()
    finally:
        con.close()


def _one_line(exc: BaseException) -> str:
    """The error as a user sees it: one line, no chained traceback behind it."""
    message = str(exc)
    assert isinstance(exc, AfterwardError), type(exc)
    assert message and "\n" not in message, message
    assert exc.__cause__ is None and (exc.__context__ is None or exc.__suppress_context__), message
    return message


# --- the frames ------------------------------------------------------------------------------------

def test_the_frames_are_the_views_rows(small_store: Project) -> None:
    # source: the same views read with plain DuckDB SQL
    h = afterward.open(small_store.cfg.path)
    q = h.quotes("lz", from_="2031-02-03", to="2031-02-28")
    expected = _plain(small_store, "SELECT * FROM quotes WHERE curve = 'lz' AND as_of BETWEEN '2031-02-03' AND "
                                   "'2031-02-28' ORDER BY as_of, tenor_months")
    assert len(q) == len(expected) > 0
    np.testing.assert_array_equal(q["rate"], expected["rate"])
    f = h.forwards("govt", start="1Y", tenor=12)
    assert set(f["start_months"]) == {12} and set(f["tenor_months"]) == {12}
    assert len(f) == _plain(small_store, "SELECT count(*) FROM forwards WHERE curve = 'govt' AND start_months = 12 "
                                         "AND tenor_months = 12").iloc[0, 0]
    o = h.outcomes(start="6M", tenor="3M", to="2030-12-31")
    assert len(o) == _plain(small_store, "SELECT count(*) FROM outcomes WHERE start_months = 6 AND tenor_months = 3 "
                                         "AND as_of <= '2030-12-31'").iloc[0, 0] > 0
    np.testing.assert_allclose(o["error_bp"], (o["forward_rate"] - o["realized_rate"]) * 1e4, atol=1e-9)
    a = h.audit("govt")
    assert len(a) == _plain(small_store, "SELECT count(*) FROM audit_summary WHERE curve = 'govt'").iloc[0, 0] > 0
    assert pd.api.types.is_datetime64_any_dtype(q["as_of"])  # dates as datetime64, ready for plotting
    n = h.sql("SELECT count(*) AS n FROM quotes")["n"].iloc[0]
    assert n == h.arrow("SELECT count(*) AS n FROM quotes")["n"][0].as_py() == 3 * len(TENORS) * business_days().size


# --- the SQL guard -------------------------------------------------------------------------------

@pytest.mark.parametrize("query", [
    "DELETE FROM quote_version",
    "INSERT INTO acceptance VALUES ('lz', DATE '2031-09-01', 'me', now(), 'x')",
    "CREATE TABLE scratch AS SELECT 1",
    "DROP VIEW quotes",
    "COPY (SELECT 1) TO 'out.csv'",
    "ATTACH 'other.duckdb'",
    "SELECT 1; DELETE FROM quote_version",
    "EXPLAIN ANALYZE DELETE FROM quote_version",
], ids=["delete", "insert", "create", "drop", "copy", "attach", "two-statements", "explain-analyze"])
def test_sql_refuses_a_write_and_changes_nothing(small_store: Project, query: str) -> None:
    # rule: CONTRACT.md, sql runs on a read-only connection, queries only (the command line's guard)
    h = afterward.open(small_store.cfg.path)
    before = _plain(small_store, "SELECT count(*) AS n, sum(rate) AS s FROM quote_version")
    with pytest.raises(ArgumentError) as err:
        h.sql(query)
    message = _one_line(err.value)
    assert message.startswith(("refused:", "one statement at a time")), message
    pd.testing.assert_frame_equal(_plain(small_store, "SELECT count(*) AS n, sum(rate) AS s FROM quote_version"),
                                  before)


def test_a_bad_query_is_one_line(small_store: Project) -> None:
    h = afterward.open(small_store.cfg.path)
    with pytest.raises(ArgumentError) as err:
        h.sql("SELECT no_such_column FROM quotes")
    assert _one_line(err.value).startswith("SQL error:")
    with pytest.raises(ArgumentError) as err:  # files outside the store's and the inbox's folders
        h.sql("SELECT * FROM read_csv('/etc/hostname')")
    _one_line(err.value)


# --- no lock held between calls ---------------------------------------------------------------------

_WRITER = textwrap.dedent("""
    import sys
    from warehouse.connect import writer
    with writer(sys.argv[1], wait_seconds=0) as con:
        con.execute("CHECKPOINT")
    print("wrote")
""")


def _writer_in_another_process(store: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-c", _WRITER, str(store)], cwd=REPO, capture_output=True, text=True,
                          timeout=120, env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"})


def test_a_handle_holds_no_lock_between_calls(small_store: Project, tmp_path: Path) -> None:
    # rule: DuckDB allows one writing process or many readers; the handle must never be the reader in the way
    p = clone_project(small_store, tmp_path / "copy")
    h = afterward.open(p.cfg.path)
    before = h.quotes("lz")
    stamp = datetime.now(UTC).replace(tzinfo=None)
    then = afterward.open(p.cfg.path, as_known_at=stamp)
    # the control: a reader held open does block a writer in another process, so the check below can fail
    with duckdb.connect(str(p.cfg.store_path), read_only=True):
        blocked = _writer_in_another_process(p.cfg.store_path)
    assert blocked.returncode != 0 and "locked" in blocked.stderr, blocked.stderr[-500:]
    # with the handles alive, after their calls: a writer gets the store at once ...
    done = _writer_in_another_process(p.cfg.store_path)
    assert done.returncode == 0 and done.stdout.strip() == "wrote", done.stderr[-500:]
    # ... and so does the command line, restating a day and adding the next one
    days = business_days()
    new_day = np.busday_offset(days[-1], 1, roll="forward")
    rates = quotes("lz")[[-1, -1]]
    rates[0, 3] += 0.0005                       # 1Y on the last day, restated by 5 bp
    restate = write_wide_csv(p.root / "lz_more.csv", [days[-1], new_day], TENORS, rates, "%.10f")
    loaded = run_cli("load", str(restate), "--config", str(p.cfg.path), cwd=p.root, env={"AFTERWARD_LOCK_WAIT": "0"})
    assert loaded.returncode == 0, loaded.stderr[-800:]
    built = run_cli("build", "--curve", "lz", "--config", str(p.cfg.path), cwd=p.root,
                    env={"AFTERWARD_LOCK_WAIT": "0"})
    assert built.returncode == 0, built.stderr[-800:]
    # the same handle, a call later, reads the store as it is now
    after = h.quotes("lz")
    assert len(after) == len(before) + len(TENORS)
    assert h.curve("lz", str(new_day)).ok.all()
    last_1y = after[(after["as_of"] == np.datetime64(days[-1])) & (after["tenor"] == "1Y")]["rate"].iloc[0]
    assert last_1y == pytest.approx(rates[0, 3], abs=1e-12)
    # and the handle as known before the load sees the quotes as they were (quotes_as_of)
    old = then.quotes("lz")
    assert len(old) == len(before)
    np.testing.assert_array_equal(old["rate"].to_numpy(), before["rate"].to_numpy())


# --- mistakes --------------------------------------------------------------------------------------

def test_bad_input_is_one_line(small_store: Project, tmp_path: Path) -> None:
    cfg = small_store.cfg.path
    h = afterward.open(cfg)
    cases = [
        (lambda: h.curve("nope", "2031-03-03"), ConfigError, r"unknown curve 'nope'; configured curves: govt, lld, lz"),
        (lambda: h.forwards("nope"), ConfigError, r"unknown curve 'nope'"),
        (lambda: h.curve("govt", "2031-03-01"), UserError,    # a Saturday
         r"govt has no official build on 2031-03-01 .*nearest built day\(s\): 2031-02-28, 2031-03-03"),
        (lambda: h.curve("lz", "2031-09-01"), UserError,      # held back by the jump finding the checks raised
         r"lz has no official build on 2031-09-01 \(.*held back by a reject finding\)"),
        (lambda: h.curve("govt", "2040-01-02"), UserError, r"nearest built day\(s\): 2032-06-30$"),
        (lambda: h.curve("govt", "2031-02-30"), ArgumentError, r"as_of '2031-02-30' is not a date \(YYYY-MM-DD\)"),
        (lambda: h.quotes("govt", from_="last week"), ArgumentError, r"from_ 'last week' is not a date"),
        (lambda: h.outcomes(to=3.5), ArgumentError, r"to 3.5 is not a date"),
        (lambda: h.forwards("govt", start="1Q"), ArgumentError, r"^start: "),
        (lambda: h.forwards("govt", start="5Y"), ArgumentError,
         r"start '5Y' is not on the forward grid of govt; allowed: 0M, 6M, 1Y, 2Y"),
        (lambda: h.outcomes(tenor="10D"), ArgumentError, r"tenor '10D' must be whole months"),
        (lambda: afterward.open(tmp_path / "missing.toml"), ConfigError, r"config file not found"),
        (lambda: afterward.open(cfg, as_known_at="31/03/2031"), KnownAtError, r"is not an ISO 8601 timestamp"),
        (lambda: afterward.open(cfg, as_known_at="2999-01-01T00:00:00Z"), KnownAtError, r"is in the future"),
        (lambda: afterward.open(cfg, as_known_at="2000-01-01"), KnownAtError,
         r"is before the archive existed \(the first load's data: "),
    ]
    for call, kind, pattern in cases:
        with pytest.raises(kind) as err:
            call()
        assert re.search(pattern, _one_line(err.value)), (pattern, str(err.value))
    # a handle as known at the last load answers quotes straight from the store
    loaded = _plain(small_store, "SELECT max(finished_at) FROM loads").iloc[0, 0].to_pydatetime()
    then = afterward.open(cfg, as_known_at=loaded.isoformat())       # naive: UTC, as the store's clock
    assert len(then.quotes("govt")) == len(h.quotes("govt"))
    # one as known now (after the checks, builds and audit) answers the rest from its scratch rebuild of the
    # archive as known then, which is the record itself (rule: --as-known-at; at the last load's time the
    # checks had not yet held a day back, so that rebuild would build one day more)
    then = afterward.open(cfg, as_known_at=datetime.now(UTC).replace(tzinfo=None).isoformat())
    now_f, then_f = h.forwards("govt"), then.forwards("govt")
    assert len(then_f) == len(now_f) > 0
    np.testing.assert_allclose(then_f["forward_rate"].to_numpy(), now_f["forward_rate"].to_numpy(), rtol=0, atol=1e-12)
    assert len(then.outcomes()) == len(h.outcomes())
    assert int(then.sql("SELECT count(*) AS n FROM zero_rates")["n"].iloc[0]) == int(
        h.sql("SELECT count(*) AS n FROM zero_rates")["n"].iloc[0])
    assert set(then.audit()["curve"]) == set(h.audit()["curve"])
    assert then._known_store().store_path != h.store_path  # the official store was never written


def test_dates_and_year_fractions_of_the_curve(small_store: Project) -> None:
    # rule: CurveSet's interface, dates turned into year fractions on the curve's day count (CONTRACT.md)
    h = afterward.open(small_store.cfg.path)
    c = h.curve("lld", pd.Timestamp("2031-03-03"))
    assert c.day_count == "30/360"
    same = [c.zero_rate(x, "annual")[0, 0] for x in ("2033-03-03", np.datetime64("2033-03-03"),
                                                       pd.Timestamp("2033-03-03"), 2.0)]
    assert max(same) - min(same) == 0.0        # 2 years on 30/360 from 2031-03-03
    with pytest.raises(ArgumentError) as err:
        c.discount("2033-02-30")
    _one_line(err.value)


def test_the_config_is_found_as_the_command_line_finds_it(small_store: Project, tmp_path: Path,
                                                          monkeypatch: pytest.MonkeyPatch) -> None:
    # rule: CONTRACT.md, --config PATH, else $AFTERWARD_CONFIG, else ./afterward.toml
    monkeypatch.delenv("AFTERWARD_CONFIG", raising=False)
    monkeypatch.chdir(small_store.root)
    assert afterward.open().store_path == small_store.cfg.store_path
    monkeypatch.chdir(tmp_path)
    with pytest.raises(ConfigError):
        afterward.open()
    monkeypatch.setenv("AFTERWARD_CONFIG", str(small_store.cfg.path))
    assert afterward.open().curves == ["govt", "lz", "lld"]


def test_quotes_as_known_at_are_the_as_known_at_copys(small_store: Project, tmp_path: Path) -> None:
    # source: warehouse.as_known_at.copy_known_at, the scratch copy behind --as-known-at (its own rule,
    # known_since included), read back through its quotes view
    from flows.load_step import load_files
    from warehouse.as_known_at import copy_known_at
    from warehouse.connect import writer

    p = clone_project(small_store, tmp_path / "copy")
    days = business_days()
    built = _plain(p, "SELECT max(finished_at) FROM loads").iloc[0, 0].to_pydatetime()
    time.sleep(0.01)
    t0 = datetime.now(UTC).replace(tzinfo=None)
    time.sleep(0.01)
    late = quotes("lz")[[-1]]
    late[0, 3] += 0.0005                               # restates the last day's 1Y, loaded now
    load_files(p.cfg, [write_wide_csv(p.root / "lz_late.csv", [days[-1]], TENORS, late, "%.10f")])
    early = quotes("lz")[[-2]]
    early[0, 0] -= 0.0003                              # restates the day before's 1M, known long before t0
    load_files(p.cfg, [write_wide_csv(p.root / "lz_known.csv", [days[-2]], TENORS, early, "%.10f")],
               known_since=built + (t0 - built) / 2)  # after the first loads, before t0
    for ts in (t0, datetime.now(UTC).replace(tzinfo=None)):
        ours = afterward.open(p.cfg.path, as_known_at=ts).quotes("lz")
        with writer(tmp_path / f"scratch-{ts:%H%M%S%f}.duckdb") as con:
            copy_known_at(con, str(p.cfg.store_path), ts)
            theirs = con.sql("SELECT * FROM quotes WHERE curve = 'lz' ORDER BY as_of, tenor_months").df()
        assert len(ours) == len(theirs) > 0
        for col in ("as_of", "tenor", "rate", "recorded_at", "source_file"):
            np.testing.assert_array_equal(ours[col].to_numpy(), theirs[col].to_numpy(), err_msg=col)
    at_t0 = afterward.open(p.cfg.path, as_known_at=t0).quotes("lz")
    pick = at_t0[(at_t0["as_of"] == np.datetime64(days[-2])) & (at_t0["tenor"] == "1M")]["rate"].iloc[0]
    assert pick == pytest.approx(early[0, 0], abs=1e-12)   # known since before t0: already there at t0
    pick = at_t0[(at_t0["as_of"] == np.datetime64(days[-1])) & (at_t0["tenor"] == "1Y")]["rate"].iloc[0]
    assert pick == pytest.approx(quotes("lz")[-1, 3], abs=1e-12)   # loaded after t0: not yet
