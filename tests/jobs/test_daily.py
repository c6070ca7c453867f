"""The daily Prefect flow end to end: inbox in, store, moved files and artifacts out; reruns are no-ops.

Expected counts are recomputed from the files themselves with plain pandas / pyarrow, and from the
store's views, never taken from the flow's own summary alone.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import threading
import time
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest
from rich.console import Console

from flows.daily import COMPLETED, COMPLETED_WITH_FINDINGS, daily, file_away, is_retryable, stable_files
from flows.load_step import load_files
from warehouse.connect import StoreLocked, reader
from warehouse.loads import LoadOutcome

pytestmark = [
    pytest.mark.timeout(240),
    # Prefect's HTTP client leaves keep-alive sockets to the test server for the garbage collector
    pytest.mark.filterwarnings("ignore:unclosed <socket.socket:ResourceWarning"),
    pytest.mark.filterwarnings("ignore:Exception ignored in. <socket.socket:pytest.PytestUnraisableExceptionWarning"),
]

REPO = Path(__file__).resolve().parents[2]


def quotes_in_files(paths: list[Path]) -> int:
    """Quote rows in the demo files, counted with plain pandas / pyarrow (non-empty cells)."""
    n = 0
    for p in paths:
        if p.suffix == ".csv":
            frame = pd.read_csv(p, dtype=str)
            n += int(frame.drop(columns=frame.columns[0]).notna().sum().sum())
        else:
            n += pq.read_table(p).num_rows
    return n


def store_value(cfg, sql: str, params: list | None = None):  # noqa: ANN001, ANN201
    with reader(cfg.store_path) as con:
        return con.execute(sql, params or []).fetchall()


def artifact_rows(key: str) -> list[dict]:
    from prefect.client.orchestration import get_client
    from prefect.client.schemas.filters import ArtifactFilter, ArtifactFilterKey

    with get_client(sync_client=True) as client:
        found = client.read_latest_artifacts(artifact_filter=ArtifactFilter(key=ArtifactFilterKey(any_=[key])))
    assert found, f"no artifact {key}"
    data = found[0].data
    return json.loads(data) if isinstance(data, str) else data


def test_daily_loads_the_inbox_refuses_garbage_and_a_second_run_is_a_no_op(make_project):
    cfg = make_project("daily", (2011, 2012))
    delivered = sorted(p for p in cfg.inbox.iterdir())
    garbage = cfg.inbox / "govt_2013-01.csv"
    garbage.write_bytes(bytes(range(256)) * 4)  # routed to govt by its name, but not a text file at all
    # a named pipe with no writer: opening it to read would block the run for ever
    pipe = cfg.inbox / "govt_2013-02.csv"
    os.mkfifo(pipe)
    expected_rows = quotes_in_files(delivered)

    summary = daily(config_path=str(cfg.path), settle_seconds=0.05)

    # a refused file does not stop the run; it ends "completed with findings"
    assert summary.status == COMPLETED_WITH_FINDINGS
    assert summary.files_loaded == len(delivered) == 48
    assert summary.files_refused == 2
    # every quote in the files is in the store (plain recount of the files)
    [(n_quotes,)] = store_value(cfg, "SELECT count(*) FROM quotes")
    [(n_rejected,)] = store_value(cfg, "SELECT count(*) FROM rejected_rows WHERE line > 0")
    assert n_quotes + n_rejected == expected_rows
    assert summary.rows_accepted == n_quotes and summary.rows_rejected == n_rejected
    # the refused file has its reason in the store: loads says refused, rejected_rows holds line 0
    [(status,)] = store_value(cfg, "SELECT status FROM loads WHERE source_file LIKE '%govt_2013-01.csv'")
    assert status == "refused"
    [(line, reason)] = store_value(cfg, "SELECT line, reason FROM rejected_rows WHERE source_file LIKE "
                                        "'%govt_2013-01.csv'")
    assert line == 0 and reason
    # the pipe is recorded as refused too, with its reason (README: a file that cannot be read at
    # all is logged as refused), and nothing was read from it
    [(status, rows_read, detail)] = store_value(cfg, "SELECT l.status, l.rows_read, r.reason FROM loads l "
                                                     "JOIN rejected_rows r USING (load_id) "
                                                     "WHERE l.source_file LIKE '%govt_2013-02.csv'")
    assert (status, rows_read) == ("refused", 0) and "not a regular file" in detail
    # files moved: the inbox is empty, the loaded ones in loaded/, the garbage and the pipe in refused/
    assert [p for p in cfg.inbox.iterdir() if not p.is_dir()] == []
    assert sorted(p.name for p in cfg.loaded.iterdir()) == [p.name for p in delivered]
    assert sorted(p.name for p in cfg.refused.iterdir()) == [garbage.name, pipe.name]
    # built, realised: every day not held back has a zero curve and the full forward surface
    per_day = {name: len(c.forward_starts) * len(c.forward_tenors) for name, c in cfg.curves.items()}
    for name, n_fwd in per_day.items():
        [(days,)] = store_value(cfg, "SELECT count(DISTINCT as_of) FROM quotes WHERE curve = ?", [name])
        [(held,)] = store_value(cfg, "SELECT count(*) FROM held_days WHERE curve = ?", [name])
        [(built,)] = store_value(cfg, "SELECT count(DISTINCT as_of) FROM zero_rates WHERE curve = ?", [name])
        [(fwd,)] = store_value(cfg, "SELECT count(*) FROM forwards WHERE curve = ?", [name])
        assert built == days - held
        assert fwd == built * n_fwd
    [(n_fwd_total,)] = store_value(cfg, "SELECT count(*) FROM forwards")
    [(n_outcomes,)] = store_value(cfg, "SELECT count(*) FROM outcomes")
    assert n_outcomes > 0
    [(n_audit,)] = store_value(cfg, "SELECT count(*) FROM audit_summary")
    assert n_audit > 0
    # the artifact tells the same story as the store
    rows = {r["curve"]: r for r in artifact_rows("afterward-daily")}
    assert set(rows) == {"govt", "swap", "all"}
    total = rows["all"]
    assert total["files_loaded"] == 48
    assert total["rows_accepted"] == n_quotes and total["rows_rejected"] == n_rejected
    assert total["forwards_built"] == n_fwd_total
    assert total["outcomes_realized"] == n_outcomes
    assert total["new_findings"] == store_value(cfg, "SELECT count(*) FROM finding")[0][0]
    files = {r["file"]: r for r in artifact_rows("afterward-daily-files")}
    assert files[garbage.name]["status"] == "refused" and files[garbage.name]["detail"]
    json.dumps(artifact_rows("afterward-daily"))  # JSON-ready: dates were stringified

    # a second run on the same inbox loads nothing twice
    before = store_value(cfg, "SELECT (SELECT count(*) FROM loads), (SELECT count(*) FROM quote_history), "
                              "(SELECT count(*) FROM forwards), (SELECT count(*) FROM outcomes)")
    again = daily(config_path=str(cfg.path), settle_seconds=0.05)
    assert again.status == COMPLETED
    assert again.files == [] and again.forwards_built == 0 and again.outcomes_realized == 0
    assert store_value(cfg, "SELECT (SELECT count(*) FROM loads), (SELECT count(*) FROM quote_history), "
                            "(SELECT count(*) FROM forwards), (SELECT count(*) FROM outcomes)") == before

    # the same content re-sent under another name is "already loaded" and filed away, not loaded again
    resent = cfg.inbox / "govt_2011-01-resent.csv"
    resent.write_bytes((cfg.loaded / "govt_2011-01.csv").read_bytes())
    third = daily(config_path=str(cfg.path), settle_seconds=0.05)
    assert [f["status"] for f in third.files] == ["already loaded"]
    assert (cfg.loaded / resent.name).exists() and not resent.exists()
    assert store_value(cfg, "SELECT count(*) FROM quote_history")[0][0] == before[0][1]


def test_a_run_resumes_after_a_failure_part_way(make_project):
    """Files committed before a failure stay committed; the next run loads only the others."""
    cfg = make_project("resume", (2012,))
    files = sorted(cfg.inbox.iterdir())
    # what a run that died after its first files leaves behind: those files loaded, still in the inbox
    first = load_files(cfg, files[:5])
    assert [o.status for o in first] == ["loaded"] * 5
    summary = daily(config_path=str(cfg.path), settle_seconds=0.05)
    status = {f["file"]: f["status"] for f in summary.files}
    assert [status[p.name] for p in files[:5]] == ["already loaded"] * 5
    assert [status[p.name] for p in files[5:]] == ["loaded"] * (len(files) - 5)
    [(n_loads,)] = store_value(cfg, "SELECT count(*) FROM loads WHERE status = 'loaded'")
    assert n_loads == len(files)
    assert sorted(p.name for p in cfg.loaded.iterdir()) == [p.name for p in files]


def test_the_load_waits_out_a_locked_store(make_project):
    """Another process holds the store's lock for a while: the load task retries until it is free."""
    cfg = make_project("locked", (2012,))
    load_files(cfg, [])  # create the store
    hold = 3.0
    holder = subprocess.Popen(
        [sys.executable, "-c", "import duckdb, sys, time; c = duckdb.connect(sys.argv[1]); print('held', flush=True);"
         f" time.sleep({hold}); c.close()", str(cfg.store_path)],
        stdout=subprocess.PIPE, text=True, env={**os.environ, "PYTHONPATH": str(REPO)})
    try:
        assert holder.stdout.readline().strip() == "held"
        t = time.monotonic()
        os.environ["AFTERWARD_LOCK_WAIT"] = "0.5"  # each attempt gives up quickly, so retries are needed
        summary = daily(config_path=str(cfg.path), settle_seconds=0.05)
        waited = time.monotonic() - t
    finally:
        os.environ["AFTERWARD_LOCK_WAIT"] = "2"
        holder.wait(timeout=30)
        holder.stdout.close()
    assert waited >= hold * 0.8
    assert summary.files_loaded == 24


@pytest.mark.parametrize(("exc", "retry"), [
    (StoreLocked("locked by process 12"), True),
    (OSError(5, "Input/output error"), True),
    (ValueError("a bad value"), False),
    (KeyError("x"), False),
], ids=["locked-store", "io-error", "value-error", "key-error"])
def test_only_io_and_lock_errors_are_retried(exc, retry):
    assert is_retryable(exc) is retry


def _write_slowly(path: Path, chunks: int, pause: float) -> None:
    with path.open("wb") as fh:
        for _ in range(chunks):
            fh.write(b"date,1M\n" * 50)
            fh.flush()
            os.fsync(fh.fileno())
            time.sleep(pause)


def test_a_file_still_being_written_is_left_for_the_next_run(tmp_path):
    done = tmp_path / "govt_2012-01.csv"
    done.write_text("date,1M\n2012-01-02,1.0\n")
    growing = tmp_path / "govt_2012-02.csv"
    writer = threading.Thread(target=_write_slowly, args=(growing, 40, 0.03))
    writer.start()
    try:
        time.sleep(0.15)
        taken, changing = stable_files(tmp_path, settle_seconds=0.1, patience_seconds=0.3)
    finally:
        writer.join()
    assert taken == [done]
    assert changing == [growing]
    taken, changing = stable_files(tmp_path, settle_seconds=0.1, patience_seconds=0.3)
    assert taken == [done, growing] and changing == []


@pytest.mark.parametrize("name", [".hidden.csv", "~lock.csv", "govt_2012-03.csv.part", "govt_2012-03.csv.tmp",
                                  "govt_2012-03.csv.crdownload"],
                         ids=["hidden", "office-lock", "part", "tmp", "browser-download"])
def test_files_in_delivery_are_not_taken(tmp_path, name):
    (tmp_path / name).write_text("date,1M\n")
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "govt_2012-04.csv").write_text("date,1M\n")
    assert stable_files(tmp_path, settle_seconds=0.01) == ([], [])


def test_filing_away_keeps_an_earlier_file_of_the_same_name(make_project):
    cfg = make_project("names", ())
    cfg.loaded.mkdir(parents=True)
    (cfg.loaded / "govt_2012-01.csv").write_text("earlier")
    new = cfg.inbox / "govt_2012-01.csv"
    new.write_text("newer")
    gone = cfg.inbox / "govt_2012-02.csv"  # could not be opened: stays where it is (here: it vanished)
    moves = file_away(cfg, [LoadOutcome(str(new), "loaded"), LoadOutcome(str(gone), "missing")])
    assert (cfg.loaded / "govt_2012-01.csv").read_text() == "earlier"
    assert (cfg.loaded / "govt_2012-01.1.csv").read_text() == "newer"
    assert [m["moved_to"] for m in moves] == [str(cfg.loaded / "govt_2012-01.1.csv"), None]


def test_afterward_run_prints_the_outcome_and_the_timings_and_exits_1_on_findings(make_project):
    from flows.prefect_commands import cli_run

    cfg = make_project("cli", ())
    (cfg.inbox / "swap_2012-01.parquet").write_bytes(b"PAR1 not really parquet")
    console = Console(record=True, width=200, force_terminal=False)
    rc = cli_run(cfg.path, console)
    text = console.export_text()
    assert rc == 1, text
    assert "swap_2012-01.parquet: refused" in text
    assert "daily run completed with findings" in text
    assert "Prefect start-up" in text and "the job's own work" in text


def test_serve_options_use_the_config_schedule_and_cancel_new_runs(make_project):
    from prefect.client.orchestration import get_client
    from prefect.client.schemas.objects import ConcurrencyLimitStrategy
    from prefect.runner import Runner

    from flows.prefect_commands import serve_options
    from pipeline.config import ConfigError

    cfg = make_project("serve", ())
    text = cfg.path.read_text() + '\n[schedule]\ncron = "15 19 * * 1-5"\ntimezone = "Europe/Paris"\n'
    cfg.path.write_text(text)
    opts = serve_options(cfg.path)
    assert opts["schedule"].cron == "15 19 * * 1-5" and opts["schedule"].timezone == "Europe/Paris"
    assert serve_options(cfg.path, "0 7 * * *")["schedule"].cron == "0 7 * * *"
    with pytest.raises(ConfigError):
        serve_options(cfg.path, "61 25 * * *")
    # registered on the Prefect server exactly as `afterward serve` would (without blocking to serve)
    runner = Runner(name="afterward-test")
    kwargs = {k: v for k, v in opts.items() if k != "global_limit"}
    deployment_id = runner.add_flow(daily, concurrency_limit=opts["global_limit"], **kwargs)
    with get_client(sync_client=True) as client:
        dep = client.read_deployment(deployment_id)
    assert dep.parameters == {"config_path": str(cfg.path.resolve())}
    assert [s.schedule.cron for s in dep.schedules] == ["15 19 * * 1-5"]
    assert dep.schedules[0].schedule.timezone == "Europe/Paris"
    assert dep.global_concurrency_limit.limit == 1
    assert dep.concurrency_options.collision_strategy == ConcurrencyLimitStrategy.CANCEL_NEW


def test_the_default_schedule_is_weekdays_at_half_past_six(make_project):
    from flows.prefect_commands import serve_options

    cfg = make_project("default-schedule", ())
    assert serve_options(cfg.path)["schedule"].cron == "30 18 * * 1-5"


def test_serve_without_a_prefect_server_explains_how_to_start_one(make_project):
    from prefect.settings import PREFECT_API_URL, temporary_settings

    from flows.prefect_commands import cli_serve

    cfg = make_project("serve-no-server", ())
    console = Console(record=True, width=200)
    saved = os.environ.pop("PREFECT_API_URL", None)
    try:
        with temporary_settings(restore_defaults={PREFECT_API_URL}):
            rc = cli_serve(cfg.path, None, console)
    finally:
        if saved is not None:
            os.environ["PREFECT_API_URL"] = saved
    assert rc == 2
    assert "prefect server start" in console.export_text()
