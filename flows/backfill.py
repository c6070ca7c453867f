"""The backfill job as a Prefect flow: build a range of days in parallel chunks, with one writer.

The recipe: plan the days due (the build step's rule) in chunks (:mod:`flows.chunks`) and start them
on the flow's task runner (in this process, or a Dask cluster: :mod:`flows.dask_runner`); run the
checks meanwhile (a day they now hold back is dropped from its chunk before the chunk is stored);
store each chunk as it arrives; and as soon as a curve's last chunk is stored, finish that curve
while the others' chunks still compute: the build step once over the range (it withdraws the builds
of days now held back, and builds any day a chunk missed), then the curve's realisation and audit.
On Dask the audit, when its whole record is due (a first backfill), is computed on the workers in
parts by (start, tenor) cell and stored by this process once they are back.

The run takes the store's run lock and opens the store once for all its steps. Only this process
writes: DuckDB allows one writing process at a time, so workers never open the store.
"""

from __future__ import annotations

import contextlib
import time
from collections.abc import Iterator
from dataclasses import dataclass, field

from prefect import flow, get_run_logger
from prefect.artifacts import create_table_artifact
from prefect.utilities.annotations import quote

from flows.chunks import (
    CHUNK_DAYS,
    ChunkArrivals,
    costliest_first,
    empty_counts,
    plan_chunks,
    report,
    submit_chunks,
    write_chunks,
)
from flows.dask_runner import dask_client, submit, task_runner_for
from flows.tasks import (
    check_quotes,
    read_audit_record,
    realize_forwards,
    refresh_audit,
    run_store,
    settle_build,
    store_audit,
)
from pipeline.audit.refresh import audit_record, join_audits, split_record
from pipeline.config import load_config
from warehouse import builds
from warehouse.loads import utc_now
from warehouse.run_lock import run_lock

__all__ = ["BackfillSummary", "backfill", "task_runner_for"]


@dataclass
class BackfillSummary:
    """What one backfill did: days planned and built per curve, outcomes realised, seconds per stage."""

    first: str | None
    last: str | None
    chunks: int = 0
    days_planned: int = 0
    curves: dict[str, dict] = field(default_factory=dict)
    caught_up: int = 0
    realized: int = 0
    audited: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)
    work_seconds: float = 0.0

    @property
    def days_built(self) -> int:
        return sum(c["days_built"] for c in self.curves.values())

    @property
    def forwards_built(self) -> int:
        return sum(c["forwards"] for c in self.curves.values())

    def table(self) -> list[dict]:
        """One row per curve, JSON-ready (for the artifact)."""
        return [{"curve": name, "days_built": int(c["days_built"]), "days_failed": int(c["failed"]),
                 "days_held": int(c.get("held", 0)), "forwards_built": int(c["forwards"]),
                 "chunks": int(c["chunks"]),
                 "outcomes_realized": int(c.get("realized", 0)), "first_day": self.first or "",
                 "last_day": self.last or ""} for name, c in self.curves.items()]


@flow(name="afterward-backfill", log_prints=False)
def backfill(config_path: str, first: str | None = None, last: str | None = None, chunk_days: int = CHUNK_DAYS,
             rebuild: bool = False) -> BackfillSummary:
    """Build and realise every day of ``[first, last]`` (ISO dates; None: open-ended) in parallel chunks.

    ``seconds`` adds up each stage's time across the curves ("build" is the writer's, waits for the
    computation included; "audit" includes waiting for the workers').
    """
    t0 = time.perf_counter()
    cfg = load_config(config_path)
    log = get_run_logger()
    summary = BackfillSummary(first, last)
    summary.curves = {name: empty_counts() for name in cfg.curves}
    finished: list[str] = []
    audits: dict[str, tuple] = {}  # curve -> (record, stamp, futures of its audit's parts on the cluster)
    client = dask_client()

    @contextlib.contextmanager
    def stage(name: str) -> Iterator[None]:
        t = time.perf_counter()
        yield
        summary.seconds[name] = round(summary.seconds.get(name, 0.0) + time.perf_counter() - t, 4)

    def finish(con, name: str) -> None:  # noqa: ANN001
        """The build step, realisation and audit of one curve whose chunks are all stored."""
        with stage("settle"):
            settled = settle_build(cfg, con, name, first, last)
        info = summary.curves[name]
        for got in settled.curves.values():
            summary.caught_up += got["days_built"]
            info["days_built"] += got["days_built"]
            info["forwards"] += got["forwards"]
            info["withdrawn"] = info.get("withdrawn", 0) + got.get("withdrawn", 0)
            # the build step's count, after the checks: days in the range an open reject finding holds back
            info["held"] = info.get("held", 0) + got.get("held", 0)
        with stage("realize"):
            realized = realize_forwards(cfg, con, name)
        summary.realized += realized.realized
        info["realized"] = sum(got["realized"] for got in realized.curves.values())
        with stage("audit"):
            record = read_audit_record(cfg, con, name) if client is not None else None
            if record is None:
                summary.audited += refresh_audit(cfg, con, curve=name)
            else:
                # the whole-record audit is the costliest part of finishing a curve and needs no
                # store: a worker computes it (ahead of the chunks still queued) while this process
                # goes on storing chunks; it is stored once computed
                now, version = utc_now(), record.outcomes["realized_at"].max()
                parts = split_record(record.outcomes, max(sum(client.nthreads().values()), 1))
                window = cfg.curve(name).premium_window_days
                audits[name] = (record, now, [
                    submit(client, audit_record, data, window, now, version=version, priority=10,
                           name=f"audit-{name}-{k}") for k, data in enumerate(client.scatter(parts))])
                return
        done(name)

    def done(name: str) -> None:
        finished.append(name)
        report("finish", len(finished), len(cfg.curves))

    # one job at a time per store, and one store for the run's many short steps
    with run_lock(cfg.store_path, "backfill"), run_store(cfg) as con:
        # the chunks compute while the checks run: a day the checks now hold back is dropped from
        # its chunk before it is stored, and a day they release is built by the build step after
        with stage("plan"):
            jobs = costliest_first(plan_chunks(cfg, first, last, chunk_days, rebuild, con=con))
        summary.chunks, summary.days_planned = len(jobs), sum(j.days for j in jobs)
        log.info("backfill %s..%s: %d day(s) due in %d chunk(s)", first, last, summary.days_planned, len(jobs))
        arrivals = ChunkArrivals(jobs, submit_chunks(jobs))
        report("build", 0, arrivals.total_days)
        with stage("check"):
            check_quotes(cfg, con, first, last)
            arrivals.held = builds.held_days(con)
        # curves with nothing to build are finished while the first chunks compute
        for name in cfg.curves:
            if not any(j.curve == name for j in jobs):
                finish(con, name)
        while not arrivals.done:
            with stage("build"):
                complete = write_chunks(cfg, quote(arrivals), con)
            for name in complete:
                summary.curves[name] = arrivals.counts[name]
                finish(con, name)
        for name, (record, now, futures) in audits.items():
            with stage("audit"):
                stored = store_audit(cfg, con, quote(record), quote(join_audits([f.result() for f in futures])), now)
            if stored.mode != "unchanged":
                summary.audited.append(name)
            done(name)
    if summary.caught_up:
        log.warning("the build step built %d day(s) the chunks did not", summary.caught_up)
    summary.work_seconds = round(time.perf_counter() - t0, 4)
    create_table_artifact(table=summary.table(), key="afterward-backfill",
                          description=f"afterward backfill {first or 'start'}..{last or 'end'}: "
                                      f"{summary.days_built} day(s) built, {summary.realized} outcome(s) realised")
    log.info("backfill done: %d day(s) built, %d forwards, %d outcomes realised in %.1f s", summary.days_built,
             summary.forwards_built, summary.realized, summary.work_seconds)
    return summary
