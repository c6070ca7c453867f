"""The daily job as a Prefect flow: take the new files from the inbox, load, check, build, realize, audit,
and, when a month has closed since the last estimate, the term-structure lens (the month-end estimate);
then the contender comparison of the curves whose inputs changed.

Each task is one step (:mod:`flows.tasks`), called unchanged, so the same work runs without Prefect
(``afterward load``, ``check``, ``build``, ``realize``, ``audit``). The run takes the store's run lock
(one job at a time per store) and opens the store once, after the inbox scan, for all its steps.

Reliability:

* a file is taken only once its size stopped changing (:mod:`flows.inbox`); files still changing are
  left in the inbox for the next run;
* the steps retry on a locked store or an I/O error (:data:`flows.tasks.RETRY`); every file is its own
  transaction, so a run that fails part-way leaves each finished file committed and the others
  untouched, and a rerun skips what was loaded ("already loaded");
* a file that could not be read at all is refused (its reason is in ``rejected_rows`` at line 0
  and in ``loads``) and moved to ``[inbox] refused``; the run goes on and ends
  "completed with findings", not failed.

The flow returns a :class:`~flows.daily_summary.DailySummary` and publishes two table artifacts:
``afterward-daily`` (one row per curve and a total) and ``afterward-daily-files`` (one row per file).
"""

from __future__ import annotations

import time

from prefect import flow, get_run_logger, task
from prefect.artifacts import create_table_artifact
from prefect.cache_policies import NO_CACHE

from flows.compare_step import compare_due
from flows.daily_summary import COMPLETED, COMPLETED_WITH_FINDINGS, DailySummary, curve_rows, file_record, summarise
from flows.inbox import PATIENCE_SECONDS, SETTLE_SECONDS, file_away, stable_files
from flows.load_step import READ_AHEAD_MIN_FILES, reader_process
from flows.model_step import model_due
from flows.tasks import (
    build_days,
    check_quotes,
    file_away_task,
    is_retryable,
    load_new_files,
    note_late,
    realize_forwards,
    refresh_audit,
    refresh_compare,
    refresh_model,
    run_store,
    scan_inbox,
)
from pipeline.config import Config, load_config
from warehouse.findings import findings_since
from warehouse.loads import utc_now
from warehouse.run_lock import run_lock

__all__ = ["COMPLETED", "COMPLETED_WITH_FINDINGS", "DailySummary", "daily", "file_away", "is_retryable",
           "stable_files"]


@task(name="publish", cache_policy=NO_CACHE)
def publish(summary: DailySummary) -> None:
    """The run's two table artifacts (keys ``afterward-daily`` and ``afterward-daily-files``)."""
    create_table_artifact(
        table=curve_rows(summary), key="afterward-daily",
        description=f"afterward daily run: {summary.status}; {summary.files_loaded} file(s) loaded, "
                    f"{summary.files_refused} refused, {summary.new_findings} new finding(s)",
    )
    if summary.files:
        create_table_artifact(table=summary.files, key="afterward-daily-files",
                              description="afterward daily run: what happened to each file")


@flow(name="afterward-daily", log_prints=False, validate_parameters=True)
def daily(config_path: str, settle_seconds: float = SETTLE_SECONDS,
          patience_seconds: float = PATIENCE_SECONDS) -> DailySummary:
    """The daily job: load the inbox's new files, check, build, realize, refresh the audit.

    ``config_path`` is the ``afterward.toml`` to use (read once, here). Returns the run's summary;
    a refused file or rejected rows or new reject/warn findings make the status
    "completed with findings" (the flow run itself still completes).
    """
    cfg = load_config(config_path)
    # one job at a time per store (held already when the command took it before Prefect started)
    with run_lock(cfg.store_path, "run"):
        return _daily(cfg, settle_seconds, patience_seconds)


def _daily(cfg: Config, settle_seconds: float, patience_seconds: float) -> DailySummary:
    started_clock = time.perf_counter()
    started = utc_now()
    summary = DailySummary()

    def timed(name: str, fn, *args):  # noqa: ANN001, ANN202
        t = time.perf_counter()
        out = fn(*args)
        summary.seconds[name] = round(time.perf_counter() - t, 4)
        return out

    taken, changing = timed("scan", scan_inbox, cfg, settle_seconds, patience_seconds)
    summary.still_changing = [p.name for p in changing]
    # the reading process is forked before the store is opened, so it never inherits the connection
    reader = reader_process() if len(taken) >= READ_AHEAD_MIN_FILES else None
    try:
        with run_store(cfg) as con:
            outcomes = timed("load", load_new_files, cfg, taken, con, reader)
            moves = timed("file away", file_away_task, cfg, outcomes)
            summary.files = [file_record(o, m["moved_to"]) for o, m in zip(outcomes, moves, strict=True)]
            checks = timed("check", check_quotes, cfg, con)
            timed("late curves", note_late, cfg, con)
            built = timed("build", build_days, cfg, con)
            realized = timed("realize", realize_forwards, cfg, con)
            audited = timed("audit", refresh_audit, cfg, con)
            due = model_due(cfg, con=con)  # the month-end estimate, only when a month has closed since
            if due:
                summary.modelled = list(timed("model", refresh_model, cfg, con, due).curves)
            due = compare_due(cfg, con=con)  # after the model: its estimate feeds model_expected
            if due:
                summary.compared = list(timed("compare", refresh_compare, cfg, con, due).curves)
            found = findings_since(con, started)
    finally:
        if reader is not None:
            reader.shutdown(wait=True)
    summarise(summary, list(cfg.curves), checks, built, realized, audited, found)
    summary.work_seconds = round(time.perf_counter() - started_clock, 4)
    publish(summary)
    get_run_logger().info(
        "daily run %s: %d file(s) loaded, %d refused, %d rows accepted, %d rejected, %d new finding(s), "
        "%d forwards built, %d outcomes realised", summary.status, summary.files_loaded, summary.files_refused,
        summary.rows_accepted, summary.rows_rejected, summary.new_findings, summary.forwards_built,
        summary.outcomes_realized)
    return summary
