"""Reproducible audits: ``--as-known-at TS`` recomputes what the official commands printed at TS, and
``load --known-since`` dates history that was known before it was loaded.

The curve: weekdays 2010-01 .. 2012-06 of continuous zero rates at six tenors from the seeded generator
of the term-structure tests, delivered as history to 2011-12 (run through load, check, build, realize,
audit, then ``audit --format json`` saved at T1), then the first half of 2012 and a restatement of a
day in 2011 (after T1). The rule checked is the issue's own: the output at T1 equals the saved one
exactly, except the two computation stamps (``computed_at``, ``data_version``).
"""

from __future__ import annotations

import json
import time
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from tests.conftest import run_cli
from tests.e2e.stores import Project, make_project, write_wide_csv
from tests.pipeline.term_structure.panels import synthetic_yields

pytestmark = pytest.mark.timeout(600)

TENORS = ["3M", "6M", "1Y", "2Y", "5Y", "10Y"]
MONTHS = np.array([3, 6, 12, 24, 60, 120])
TOML = f"""
[store]
path = "store.duckdb"

[curves.day]
files = "day_*.csv"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "decimal"
interpolation = "linear_zero"
tenors = [{", ".join(f'"{t}"' for t in TENORS)}]
calendar.holidays = []
checks.jump_bp = 500
forward.starts = ["0M", "3M", "6M"]
forward.tenors = ["3M", "1Y"]
"""
STAMPS = ("computed_at", "data_version")


def _steps(p: Project, files: list) -> None:  # noqa: ANN001
    load_files(p.cfg, files)
    run_checks(p.cfg)
    run_build(p.cfg)
    run_realize(p.cfg)
    run_audit(p.cfg)


def _audit_json(p: Project, *extra: str) -> list[dict]:
    done = run_cli("audit", "--format", "json", *extra, "--config", str(p.root / "afterward.toml"), cwd=p.root,
                   timeout=300)
    assert done.returncode == 0, done.stderr
    return [{k: v for k, v in row.items() if k not in STAMPS} for row in json.loads(done.stdout)]


@pytest.fixture(scope="module")
def history(tmp_path_factory: pytest.TempPathFactory) -> tuple[Project, str, list[dict]]:
    root = tmp_path_factory.mktemp("known_at")
    p = make_project(root, TOML)
    span = np.arange(np.datetime64("2010-01-01"), np.datetime64("2012-07-01"))
    days = span[np.is_busday(span)]
    rates = synthetic_yields(31, days.size)[:, MONTHS - 1]
    first = days < np.datetime64("2012-01-01")
    _steps(p, [write_wide_csv(root / "day_2010_2011.csv", days[first], TENORS, rates[first], "%.12f")])
    saved = _audit_json(p)
    time.sleep(0.05)
    t1 = datetime.now(UTC).replace(tzinfo=None).isoformat()
    time.sleep(0.05)
    # after T1: half a year more, and a restatement of 2011-06-15 (every tenor 25 bp higher)
    later = write_wide_csv(root / "day_2012.csv", days[~first], TENORS, rates[~first], "%.12f")
    k = int(np.flatnonzero(days == np.datetime64("2011-06-15"))[0])
    restated = write_wide_csv(root / "day_restated.csv", days[k:k + 1], TENORS, rates[k:k + 1] + 0.0025, "%.12f")
    _steps(p, [later, restated])
    return p, t1, saved


def test_the_audit_as_known_at_t1_is_the_audit_printed_at_t1(history) -> None:  # noqa: ANN001
    p, t1, saved = history
    now = _audit_json(p)
    assert now != saved  # the later data moved the figures: the comparison below is not trivial
    runs = p.value("SELECT count(*) FROM audit_run")
    again = _audit_json(p, "--as-known-at", t1)
    assert again == saved
    assert p.value("SELECT count(*) FROM audit_run") == runs  # the official store was not touched by it


def test_the_as_known_at_run_says_so_and_changes_nothing(history) -> None:  # noqa: ANN001
    p, t1, _ = history
    before = p.sql("SELECT * FROM audit_summary ORDER BY ALL")
    done = run_cli("audit", "--as-known-at", t1, "--config", str(p.root / "afterward.toml"), cwd=p.root, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "recomputed on a scratch copy; the store is unchanged" in done.stdout
    assert p.sql("SELECT * FROM audit_summary ORDER BY ALL").equals(before)
    sql = run_cli("sql", "SELECT max(as_of) AS last FROM quotes", "--format", "csv", "--as-known-at", t1,
                  "--config", str(p.root / "afterward.toml"), cwd=p.root, timeout=300)
    assert sql.returncode == 0, sql.stderr
    assert sql.stdout.strip().splitlines()[-1] == "2011-12-30"  # the last weekday known at T1
    rate = run_cli("sql", "SELECT rate FROM quotes WHERE as_of = DATE '2011-06-15' AND tenor = '1Y'", "--format",
                   "csv", "--as-known-at", t1, "--config", str(p.root / "afterward.toml"), cwd=p.root, timeout=300)
    first = p.value("SELECT rate FROM quote_history WHERE as_of = DATE '2011-06-15' AND tenor = '1Y' "
                    "ORDER BY recorded_at LIMIT 1")
    assert float(rate.stdout.strip().splitlines()[-1]) == first  # the version before the restatement


def test_bad_times_are_refused_in_one_line(history) -> None:  # noqa: ANN001
    p, _, _ = history
    future = (datetime.now(UTC) + timedelta(days=2)).replace(tzinfo=None).isoformat()
    for ts, words in ((future, "is in the future"), ("2001-01-01", "is before the first load"),
                      ("31/03/2031", "is not an ISO 8601 time")):
        for cmd in (("audit",), ("sql", "SELECT 1")):
            bad = run_cli(*cmd, "--as-known-at", ts, "--config", str(p.root / "afterward.toml"), cwd=p.root)
            assert bad.returncode == 2, (cmd, ts, bad.stdout, bad.stderr)
            lines = [x for x in bad.stderr.strip().splitlines() if x.strip()]
            assert len(lines) == 1 and words in lines[0] and "Traceback" not in bad.stderr, (cmd, ts, bad.stderr)


def test_history_known_before_it_was_loaded_is_seen_as_known_then(tmp_path) -> None:  # noqa: ANN001
    p = make_project(tmp_path, TOML)
    span = np.arange(np.datetime64("2011-01-03"), np.datetime64("2011-03-01"))
    days = span[np.is_busday(span)]
    rates = synthetic_yields(3, days.size)[:, MONTHS - 1]
    f = write_wide_csv(tmp_path / "day_old.csv", days, TENORS, rates, "%.12f")
    cfgp = str(tmp_path / "afterward.toml")
    future = (datetime.now(UTC) + timedelta(hours=1)).replace(tzinfo=None).isoformat()
    bad = run_cli("load", str(f), "--known-since", future, "--config", cfgp, cwd=tmp_path)
    assert bad.returncode == 2 and "is in the future" in bad.stderr and "Traceback" not in bad.stderr
    assert not p.cfg.store_path.exists()  # refused before anything was opened or loaded
    ok = run_cli("load", str(f), "--known-since", "2011-03-01T18:00:00+01:00", "--config", cfgp, cwd=tmp_path)
    assert ok.returncode == 0, ok.stderr
    since, started = p.sql("SELECT known_since, started_at FROM load_log").iloc[0]
    assert str(since) == "2011-03-01 17:00:00" and started > since  # UTC; the load time kept beside it
    seen = run_cli("sql", "SELECT count(DISTINCT as_of) FROM quotes", "--format", "csv", "--as-known-at",
                   "2011-03-02", "--config", cfgp, cwd=tmp_path, timeout=300)
    assert seen.returncode == 0, seen.stderr
    assert int(seen.stdout.strip().splitlines()[-1]) == days.size
    early = run_cli("sql", "SELECT 1", "--as-known-at", "2011-02-01", "--config", cfgp, cwd=tmp_path)
    assert early.returncode == 2 and "before the first load" in early.stderr


def test_changes_since_t1_lists_the_restated_day_its_rebuild_and_the_cells_that_moved(history) -> None:  # noqa: ANN001
    p, t1, saved = history
    done = run_cli("changes", "--since", t1, "--format", "json", "--config", str(p.root / "afterward.toml"),
                   cwd=p.root, timeout=300)
    assert done.returncode == 0, done.stderr
    rows = json.loads(done.stdout)
    kinds = {k: [r for r in rows if r["kind"] == k] for k in ("restated", "rebuilt", "superseded", "audit")}
    # exactly the six tenors of 2011-06-15, old -> new, and the load that restated them
    assert sorted(r["item"] for r in kinds["restated"]) == sorted(TENORS)
    assert {str(r["as_of"])[:10] for r in kinds["restated"]} == {"2011-06-15"}
    assert all("day_restated.csv" in r["why"] for r in kinds["restated"])
    old = p.sql("SELECT tenor, rate FROM quote_history WHERE as_of = DATE '2011-06-15' AND superseded_at IS NOT NULL")
    assert {r["item"]: float(r["old"]) for r in kinds["restated"]} == pytest.approx(
        dict(zip(old["tenor"], old["rate"], strict=True)), rel=1e-9)
    # of the days known at T1, only the restated one was built again
    assert [str(r["as_of"])[:10] for r in kinds["rebuilt"]] == ["2011-06-15"]
    assert kinds["superseded"]  # the outcomes resting on that day were re-derived
    # every cell whose mean error moved is listed with its T1 figure (the saved audit) as the old one
    then = {(r["start_months"], r["tenor_months"], r["regime"]): r["mean_error_bp"] for r in saved}
    assert kinds["audit"]
    for r in kinds["audit"]:
        s, rest = r["item"].split("M x ")
        m, regime = rest.split("M ")
        want = then.get((int(s), int(m), regime))
        if want is not None and r["old"]:
            assert float(r["old"].split()[0]) == pytest.approx(want, abs=0.05)
    table = run_cli("changes", "--since", t1, "--config", str(p.root / "afterward.toml"), cwd=p.root, timeout=300)
    assert table.returncode == 0 and "changes since" in table.stdout
    bad = run_cli("changes", "--since", "yesterday", "--config", str(p.root / "afterward.toml"), cwd=p.root)
    assert bad.returncode == 2 and "not an ISO 8601 time" in bad.stderr and "Traceback" not in bad.stderr


def test_a_report_as_known_at_says_so_at_the_top(history, tmp_path) -> None:  # noqa: ANN001
    p, t1, _ = history
    done = run_cli("report", "--as-known-at", t1, "--out", str(tmp_path), "--config", str(p.root / "afterward.toml"),
                   cwd=p.root, timeout=600)
    assert done.returncode == 0, done.stderr
    from pathlib import Path

    path = Path(done.stdout.strip().splitlines()[-1])
    assert path.parent == tmp_path  # the report goes where --out says, never into the scratch folder
    page = path.read_text(encoding="utf-8")
    head = page[:page.index('<section')]
    assert "Data as known at" in head and "It is not the current record." in head
    assert "recomputed on a scratch copy" in done.stderr


def test_a_store_last_opened_by_an_older_version_is_brought_up_to_date_first(history, tmp_path) -> None:  # noqa: ANN001
    import duckdb

    from tests.e2e.stores import clone_project

    p, t1, _ = history
    old = clone_project(p, tmp_path / "old")
    con = duckdb.connect(str(old.cfg.store_path))
    try:  # the store as sql/014 left it: no known_since, no audit_run
        con.execute("DROP TABLE audit_run")
        con.execute("ALTER TABLE load_log DROP COLUMN known_since")
        con.execute("DELETE FROM schema_migration WHERE version = 15")
    finally:
        con.close()
    done = run_cli("sql", "SELECT count(*) AS n FROM quotes", "--format", "csv", "--as-known-at", t1,
                   "--config", str(old.root / "afterward.toml"), cwd=old.root, timeout=300)
    assert done.returncode == 0, done.stderr
    assert old.value("SELECT max(version) FROM schema_migration") >= 15
