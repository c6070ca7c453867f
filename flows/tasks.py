"""The Prefect tasks the jobs share: one per step, each a thin call of the step with the run's store.

Every task that touches the store takes the one connection its flow run opened (so the run graph
shows one store, and no step opens the file again) and skips Prefect's input hashing (``NO_CACHE``):
every step writes to the store, so a cached result would be wrong. One retry policy for all of them:
twice, after 1 s and 4 s, and only on an I/O error or a locked store (:func:`is_retryable`): a failed
step rolled back its transaction, so running it again is safe.
"""

from __future__ import annotations

import contextlib
import time
from collections.abc import Iterator
from pathlib import Path

import duckdb
from prefect import get_run_logger, task
from prefect.cache_policies import NO_CACHE

from flows import audit_step
from flows.build_step import BuildSummary, run_build
from flows.check_step import CheckSummary, note_late_curves, run_checks
from flows.compare_step import CompareSummary, run_compare
from flows.inbox import PATIENCE_SECONDS, SETTLE_SECONDS, file_away, stable_files
from flows.load_step import load_files
from flows.model_step import ModelSummary, run_model
from flows.realize_step import RealizeSummary, run_realize
from pipeline.audit.refresh import WholeAudit
from pipeline.config import Config
from pipeline.errors import StoreLocked
from warehouse.connect import connect
from warehouse.loads import LoadOutcome

__all__ = ["RETRY", "RETRY_DELAYS", "build_days", "check_quotes", "file_away_task", "is_retryable", "load_new_files",
           "note_late", "read_audit_record", "realize_forwards", "refresh_audit", "refresh_compare", "refresh_model",
           "run_store",
           "scan_inbox", "settle_build", "store_audit"]

# what a task retries on: a store locked by another process, or the disk / network
RETRYABLE = (StoreLocked, OSError, duckdb.IOException)


def is_retryable(exc: BaseException) -> bool:
    """True for the errors worth retrying after a pause (a locked store, an I/O error)."""
    return isinstance(exc, RETRYABLE)


def _retry_condition(task, task_run, state) -> bool:  # noqa: ANN001 - Prefect's retry_condition_fn
    try:
        state.result()
    except BaseException as exc:  # noqa: BLE001 - the state's own exception, re-raised by Prefect
        return is_retryable(exc)
    return False


RETRY_DELAYS = [1, 4]
RETRY = {"retries": len(RETRY_DELAYS), "retry_delay_seconds": RETRY_DELAYS, "retry_condition_fn": _retry_condition}
Con = duckdb.DuckDBPyConnection


@contextlib.contextmanager
def run_store(cfg: Config) -> Iterator[Con]:
    """The one store of a flow run, opened (writable) under the same retry policy as the steps: a store
    another process holds is tried again after each of :data:`RETRY_DELAYS`, each try waiting up to
    ``$AFTERWARD_LOCK_WAIT`` (:func:`warehouse.connect.connect`)."""
    for delay in (*RETRY_DELAYS, None):
        try:
            con = connect(cfg.store_path, create=True)
            break
        except StoreLocked:
            if delay is None:
                raise
            get_run_logger().warning("the store %s is locked; trying again in %s s", cfg.store_path, delay)
            time.sleep(delay)
    try:
        yield con
    finally:
        con.close()


@task(name="scan inbox", cache_policy=NO_CACHE)
def scan_inbox(cfg: Config, settle_seconds: float = SETTLE_SECONDS,
               patience_seconds: float = PATIENCE_SECONDS) -> tuple[list[Path], list[Path]]:
    """The inbox files ready to load (size settled), and those still being written."""
    taken, changing = stable_files(cfg.inbox, settle_seconds, patience_seconds)
    log = get_run_logger()
    log.info("inbox %s: %d file(s) ready, %d still being written", cfg.inbox, len(taken), len(changing))
    for p in changing:
        log.warning("%s is still being written; left for the next run", p.name)
    return taken, changing


@task(name="load files", cache_policy=NO_CACHE, **RETRY)
def load_new_files(cfg: Config, paths: list[Path], con: Con, reader: object = None) -> list[LoadOutcome]:
    """Load each file in its own transaction (:func:`flows.load_step.load_files`); a retry finds the
    files committed before the failure "already loaded" and goes on with the rest."""
    if not paths:
        return []
    log = get_run_logger()
    outcomes = load_files(cfg, paths, con=con, reader=reader)  # type: ignore[arg-type]
    for o in outcomes:
        name = Path(o.source_file).name
        if o.status == "loaded":
            log.info("%s: accepted %d, revised %d, rejected %d", name, o.rows_accepted, o.rows_revised,
                     o.rows_rejected)
        elif o.status == "already loaded":
            log.info("%s: already loaded (%s)", name, o.detail)
        else:
            log.warning("%s: %s: %s", name, o.status, o.detail)
    return outcomes


@task(name="file away", cache_policy=NO_CACHE)
def file_away_task(cfg: Config, outcomes: list[LoadOutcome]) -> list[dict]:
    """Move loaded files to ``[inbox] loaded`` and unreadable ones to ``[inbox] refused``."""
    return file_away(cfg, outcomes)


@task(name="check", cache_policy=NO_CACHE, **RETRY)
def check_quotes(cfg: Config, con: Con, first: str | None = None, last: str | None = None) -> CheckSummary:
    """Curve-level data checks of the days whose quotes changed (:func:`flows.check_step.run_checks`)."""
    return run_checks(cfg, None, first, last, con=con)


@task(name="late curves", cache_policy=NO_CACHE, **RETRY)
def note_late(cfg: Config, con: Con) -> int:
    """A ``late_curve`` finding for each curve whose last due day has no curve yet
    (:func:`flows.check_step.note_late_curves`)."""
    return note_late_curves(cfg, con=con)


@task(name="build", cache_policy=NO_CACHE, **RETRY)
def build_days(cfg: Config, con: Con, first: str | None = None, last: str | None = None) -> BuildSummary:
    """Zero curves and forward surfaces for the days not yet built (:func:`flows.build_step.run_build`)."""
    return run_build(cfg, None, first, last, con=con)


@task(name="settle build", cache_policy=NO_CACHE, **RETRY)
def settle_build(cfg: Config, con: Con, curve: str, first: str | None, last: str | None) -> BuildSummary:
    """The build step once over the range for ``curve``: withdraws builds of held-back days; builds
    any day left (the backfill's last word on a curve)."""
    return run_build(cfg, curve, first, last, con=con)


@task(name="realize", cache_policy=NO_CACHE, **RETRY)
def realize_forwards(cfg: Config, con: Con, curve: str | None = None) -> RealizeSummary:
    """Outcomes for forwards whose target date has been observed (:func:`flows.realize_step.run_realize`),
    for one curve or (None) all."""
    return run_realize(cfg, curve, con=con)


@task(name="audit", cache_policy=NO_CACHE, **RETRY)
def refresh_audit(cfg: Config, con: Con, force: bool = False, curve: str | None = None) -> list[str]:
    """Bring the audit of one curve or (None) all up to date with the outcomes realised since the last
    one; returns the curves it changed.

    Incremental (:func:`flows.audit_step.refresh_audit_incremental`: only the new outcomes are folded into
    the stored running state, with the same rows as a full recompute); ``force`` recomputes every curve.
    """
    names = [curve] if curve else list(cfg.curves)
    if force:
        for name in names:
            audit_step.run_audit(cfg, name, con=con)
        return names
    done = audit_step.refresh_audit_incremental(cfg, curve, con=con)
    return [name for name, d in done.items() if d.mode != "unchanged"]


@task(name="read audit record", cache_policy=NO_CACHE, **RETRY)
def read_audit_record(cfg: Config, con: Con, curve: str) -> audit_step.CurveRecord | None:
    """The curve's outcomes when its audit is due in full (see :func:`flows.audit_step.whole_record_due`)."""
    return audit_step.whole_record_due(cfg, curve, con=con)


@task(name="store audit", cache_policy=NO_CACHE, **RETRY)
def store_audit(cfg: Config, con: Con, record: audit_step.CurveRecord, audit: WholeAudit,
                now: object) -> audit_step.AuditRefresh:
    """Store an audit computed elsewhere (:func:`flows.audit_step.store_whole_audit`)."""
    return audit_step.store_whole_audit(cfg, record, audit, now, con=con)


@task(name="model", cache_policy=NO_CACHE, **RETRY)
def refresh_model(cfg: Config, con: Con, curves: list[str]) -> ModelSummary:
    """Re-estimate the term-structure lens of ``curves`` (those :func:`flows.model_step.model_due`
    names: a month closed since the last estimate), real-time and full-sample
    (:func:`flows.model_step.run_model`); a curve the model cannot use yet is logged, not failed."""
    from pipeline.term_structure import ModelInputError

    out = ModelSummary()
    log = get_run_logger()
    for name in curves:
        try:
            done = run_model(cfg, name, con=con)
        except ModelInputError as exc:  # too little history yet: the daily run goes on
            out.refused[name] = str(exc)
            log.warning("model: %s", exc)
            continue
        out.curves.update(done.curves)
        info = done.curves[name]
        log.info("model %s: %d month ends, estimated through %s", name, info["months"], info["latest_through"])
    return out


@task(name="compare", cache_policy=NO_CACHE, **RETRY)
def refresh_compare(cfg: Config, con: Con, curves: list[str]) -> CompareSummary:
    """Recompute the contender comparison of ``curves`` (those :func:`flows.compare_step.compare_due`
    names: outcomes, model estimate, what-if builds or user forecasts changed since the last one).
    The confidence set is a bootstrap over a cell's whole sample, so a curve is recomputed whole."""
    out = CompareSummary()
    log = get_run_logger()
    for name in curves:
        done = run_compare(cfg, name, con=con)
        out.curves.update(done.curves)
        info = done.curves[name]
        log.info("compare %s: %d contenders over %d cells", name, len(info["contenders"]), info["cells"])
    return out
