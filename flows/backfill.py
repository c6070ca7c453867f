"""The backfill job as a Prefect flow: build a range of days in parallel chunks, with one writer.

The flow reads each curve's quotes for the range once, picks the days due (not built yet, or whose
quotes changed since their build, and not held back by an open reject finding; every day with
``rebuild``), and splits them into chunks of days. Each chunk is pure computation
(:func:`compute_chunk`: curves, zero rates, forwards and shape checks for the chunk's days,
returned as arrays), run in parallel on the flow's task runner: as Prefect tasks in this process,
or on Prefect's Dask task runner (a local or remote cluster) as Dask tasks sent through the
runner's client (see :func:`submit_chunks` for why not Prefect tasks there). Only the flow's own
process writes: one writer task stores each chunk as it arrives, one transaction per chunk,
through the build step's writer. The chunks start computing before the checks run, which saves
the checks' time when there are workers to spare; a day the checks then hold back (a new reject
finding) is dropped from its chunk before the chunk is stored (:meth:`ChunkResult.without`). As
soon as a curve's last chunk is stored, the flow finishes that curve while the others' chunks still
compute: the build step once over the range (it withdraws the builds of days now held back, and
builds any day a chunk missed, such as one the checks released), then the curve's realisation and
audit. On Dask the audit, when its whole record is due (a first backfill), is computed on the
workers in parts by (start, tenor) cell and stored by this process once they are back.

The flow holds the store open for its whole run (:func:`warehouse.connect.held`): its steps are
many and short, and each would otherwise open the file and write its log back at close.

Why one writer: DuckDB allows one writing process at a time, and Dask workers without a shared
Prefect server would each start their own; workers therefore never open the store.

Parametric fits (``nss``) start every chunk from the last stored fit before the range, not from the
previous chunk's last day as ``afterward build`` does, so chunks stay independent; the other
methods give the same rows either way.
"""

from __future__ import annotations

import contextlib
import dataclasses
import sys
import time
import uuid
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from prefect import flow, get_run_logger, task
from prefect.artifacts import create_table_artifact
from prefect.cache_policies import NO_CACHE
from prefect.context import FlowRunContext
from prefect.futures import as_completed
from prefect.utilities.annotations import quote

from flows import audit_step, build_step
from flows.daily import _retry_condition, check_quotes, realize_forwards, refresh_audit
from pipeline.audit.refresh import WholeAudit, audit_record, join_audits, split_record
from pipeline.config import Config, CurveConfig, load_config
from pipeline.forwards import ForwardGrid, ZeroGrid
from warehouse.connect import held, one_thread, writer
from warehouse.frames import QuotePanel, read_frame, read_quote_panel
from warehouse.loads import utc_now
from warehouse.run_lock import run_lock

__all__ = [
    "BackfillSummary",
    "ChunkJob",
    "ChunkResult",
    "backfill",
    "compute_chunk",
    "costliest_first",
    "local_cluster",
    "make_local_cluster",
    "plan_chunks",
    "progress_hook",
    "submit_chunks",
    "task_runner_for",
    "write_chunk",
]

CHUNK_DAYS = 750

_progress: Callable[[str, int, int], None] | None = None


@contextlib.contextmanager
def progress_hook(fn: Callable[[str, int, int], None] | None) -> Iterator[None]:
    """Within the block, ``fn(stage, done, total)`` hears how many days the writer has stored."""
    global _progress
    old, _progress = _progress, fn
    try:
        yield
    finally:
        _progress = old


def _report(stage: str, done: int, total: int) -> None:
    if _progress is not None:
        _progress(stage, done, total)


# --- planning (flow process, reads the store) ---------------------------------------------------

@dataclass(frozen=True)
class ChunkJob:
    """Everything a worker needs to build a chunk of one curve's days (no store access).

    ``as_of`` ``(D,)`` datetime64[D]; ``rates`` ``(D, T)`` decimals as quoted (NaN = missing) for
    ``tenors``; ``recorded_at`` ``(D,)`` the latest recorded_at of each day's quotes; ``warm`` the
    starting parameters of a parametric fit (or None).
    """

    curve: str
    index: int
    config: CurveConfig
    method: str
    scenario: str
    tenors: tuple[str, ...]
    as_of: np.ndarray
    rates: np.ndarray
    recorded_at: np.ndarray
    warm: np.ndarray | None = None

    @property
    def days(self) -> int:
        return len(self.as_of)


@dataclass
class ChunkResult:
    """A built chunk: per-day ``ok`` and what the build step's writer stores (see
    :class:`flows.build_step.BuiltDays`: zero rates and forwards as arrays, which travel between
    processes far more cheaply than frames of rows).
    """

    curve: str
    index: int
    method: str
    scenario: str
    as_of: np.ndarray
    recorded_at: np.ndarray
    ok: np.ndarray
    zeros: ZeroGrid
    forwards: ForwardGrid
    shape: pd.DataFrame | None
    params: np.ndarray | None
    reasons: dict[str, int] = field(default_factory=dict)
    seconds: float = 0.0

    def without(self, days: np.ndarray) -> ChunkResult:
        """The chunk less ``days`` (datetime64[D]): neither tried nor built, so storing it leaves
        those days as they are. The reasons of the days dropped are kept (they were counted)."""
        keep = ~np.isin(self.as_of, days)
        if keep.all():
            return self
        built = keep[self.ok]  # the zero rates, forwards and fits hold the built days only
        zeros = dataclasses.replace(self.zeros, **{k: getattr(self.zeros, k)[built] for k in (
            "as_of", "maturity_date", "year_fraction", "zero_rate", "zero_rate_cc", "discount_factor")})
        forwards = dataclasses.replace(self.forwards, **{k: getattr(self.forwards, k)[built] for k in (
            "as_of", "start_date", "end_date", "forward_rate", "forward_rate_cc")})
        shape = self.shape
        if shape is not None and len(shape):
            shape = shape.loc[~np.isin(shape["as_of"].to_numpy().astype("datetime64[D]"), days)]
        params = self.params[built] if self.params is not None and len(self.params) else self.params
        return dataclasses.replace(self, as_of=self.as_of[keep], recorded_at=self.recorded_at[keep],
                                   ok=self.ok[keep], zeros=zeros, forwards=forwards, shape=shape, params=params)


def _due_days(con, name: str, c: CurveConfig, scenario: str, first: str | None, last: str | None,  # noqa: ANN001
              rebuild: bool) -> QuotePanel:
    """The days of ``name`` in the range that need a build, as a quote panel (the build step's rule)."""
    panel = read_quote_panel(con, name, list(c.tenor_labels), first, last)
    if not len(panel):
        return panel
    held = read_frame(con, "SELECT as_of FROM held_days WHERE curve = ?", [name])
    held_days = held["as_of"].to_numpy().astype("datetime64[D]") if len(held) else np.array([], "M8[D]")
    todo = ~np.isin(panel.as_of, held_days)
    if not rebuild:
        built = read_frame(con, "SELECT as_of, quotes_as_of FROM built_day WHERE curve = ? AND scenario = ?",
                           [name, scenario])
        if len(built):
            stamp = pd.Series(built["quotes_as_of"].to_numpy().astype("datetime64[us]"),
                              index=built["as_of"].to_numpy().astype("datetime64[D]"))
            prev = stamp.reindex(panel.as_of).to_numpy()
            todo &= np.isnat(prev) | (panel.recorded_at > prev)
    return panel.select(todo)


def plan_chunks(cfg: Config, first: str | None = None, last: str | None = None, chunk_days: int = CHUNK_DAYS,
                rebuild: bool = False, curve: str | None = None) -> list[ChunkJob]:
    """Read each curve's quotes for ``[first, last]`` once and cut the days due into chunks."""
    jobs: list[ChunkJob] = []
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            scenario = build_step.scenario_name(c, None)
            due = _due_days(con, name, c, scenario, first, last, rebuild)
            warm = build_step._last_params(con, name, scenario) if c.interpolation == "nss" else None
            for k, start in enumerate(range(0, len(due), chunk_days)):
                sl = slice(start, start + chunk_days)
                jobs.append(ChunkJob(name, k, c, c.interpolation, scenario, tuple(due.tenors), due.as_of[sl],
                                     due.rates[sl], due.recorded_at[sl], warm))
    return jobs


def held_back(cfg: Config) -> dict[str, np.ndarray]:
    """The days each curve's open reject findings hold back (datetime64[D]), by curve."""
    with writer(cfg.store_path) as con:
        held = read_frame(con, "SELECT curve, as_of FROM held_days")
    days = held["as_of"].to_numpy().astype("datetime64[D]") if len(held) else np.array([], "M8[D]")
    curves = held["curve"].to_numpy() if len(held) else np.array([], object)
    return {str(c): days[curves == c] for c in np.unique(curves)}


# --- computing (any process, pure) --------------------------------------------------------------

def compute_chunk(job: ChunkJob) -> ChunkResult:
    """Build one chunk's curves, zero rates at the quoted and forward tenors, forward surface and
    curve-shape findings, exactly as the build step does for a chunk. Pure: no store, no Prefect.

    Rates are decimals in the curve's own compounding and day count (``*_cc``: continuous).
    """
    t = time.perf_counter()
    b = build_step.compute_days(job.as_of, list(job.tenors), job.rates, job.config, job.method, job.warm)
    return ChunkResult(job.curve, job.index, job.method, job.scenario, job.as_of, job.recorded_at, b.ok, b.zeros,
                       b.forwards, b.shape, b.params, b.reasons, time.perf_counter() - t)


def job_cost(job: ChunkJob) -> int:
    """Relative work of a chunk: days x tenors, sixteen times over for a par curve (its bootstrap
    took 10-20x a zero curve's build of the same size when timed here)."""
    return job.days * len(job.tenors) * (16 if job.config.quote == "par" else 1)


def costliest_first(jobs: list[ChunkJob]) -> list[ChunkJob]:
    """The chunks in the order they should start: curve by curve, the costliest curve first, and
    within a curve its costliest chunk first. The flow finishes a curve (realisation, audit) as soon
    as its chunks are stored, so the dearest curve's chunks go first and its finishing overlaps the
    other curves' computation; within a curve, longest-processing-time order balances the workers."""
    total: dict[str, int] = {}
    for j in jobs:
        total[j.curve] = total.get(j.curve, 0) + job_cost(j)
    return sorted(jobs, key=lambda j: (-total[j.curve], j.curve, -job_cost(j), j.index))


@task(name="compute chunk", cache_policy=NO_CACHE)
def compute_chunk_task(job: ChunkJob) -> ChunkResult:
    """A Prefect task around :func:`compute_chunk`, for the in-process task runner."""
    return compute_chunk(job)


def submit_chunks(jobs: list[ChunkJob]) -> list:
    """Start every chunk on the flow's task runner; returns their futures in ``jobs``' order.

    On Prefect's Dask task runner each chunk goes to the cluster through the runner's own Dask
    client as a plain Dask task (the function :func:`compute_chunk`, no Prefect task run around it):
    each Prefect task sent to Dask costs the flow process about 0.1 s of serialising Prefect's
    settings and context, and each worker the task engine's API calls, which on two cores cost more
    than a second worker gains (measured by ``benchmarks/bench_daily.py``). On any other runner each
    chunk is a Prefect task.
    """
    client = _dask_client()
    if client is not None:
        return [client.submit(compute_chunk, job, pure=False, key=f"afterward-chunk-{job.curve}-{job.index}-"
                              f"{uuid.uuid4().hex[:12]}") for job in jobs]
    return [compute_chunk_task.submit(job) for job in jobs]


def _dask_client():  # noqa: ANN202
    """The Dask client of the flow's task runner, or None when the flow runs on another runner."""
    runner = FlowRunContext.get().task_runner
    return runner.client if _is_dask(runner) else None


def _is_dask(runner: object) -> bool:
    if "prefect_dask" not in sys.modules:  # no Dask runner was made; importing it costs ~0.4 s
        return False
    try:
        from prefect_dask import DaskTaskRunner
    except ImportError:  # pragma: no cover - prefect-dask is a dependency
        return False
    return isinstance(runner, DaskTaskRunner)


def completed(futures: list) -> Iterator[tuple[int, ChunkResult]]:
    """``(position, result)`` of each future in the order they finish (Dask or Prefect futures; a
    failed chunk raises)."""
    if not futures:
        return
    where = {id(f): i for i, f in enumerate(futures)}
    try:
        from distributed import Future as DaskFuture
        from distributed import as_completed as dask_completed
    except ImportError:  # pragma: no cover - distributed comes with prefect-dask
        DaskFuture = ()  # noqa: N806
    finished = (dask_completed(futures, loop=futures[0].client.loop) if isinstance(futures[0], DaskFuture)
                else as_completed(futures))
    for fut in finished:
        yield where[id(fut)], fut.result()


@dataclass
class ChunkArrivals:
    """The chunks on their way to the writer: ``jobs`` and their ``futures`` (same order), which of
    them are stored, and the counts per curve of what was stored. Kept outside the writer task, so a
    retried writer skips what it already stored."""

    jobs: list[ChunkJob]
    futures: list
    stored: set[int] = field(default_factory=set)
    counts: dict[str, dict] = field(default_factory=dict)
    held: dict[str, np.ndarray] = field(default_factory=dict)  # curve -> days not to store (held back)

    @property
    def days_stored(self) -> int:
        return sum(self.jobs[i].days for i in self.stored)

    @property
    def total_days(self) -> int:
        return sum(j.days for j in self.jobs)

    def left(self, curve: str) -> int:
        """Chunks of ``curve`` not stored yet."""
        return sum(1 for i, j in enumerate(self.jobs) if j.curve == curve and i not in self.stored)

    @property
    def done(self) -> bool:
        return len(self.stored) == len(self.jobs)

    def record(self, res: ChunkResult, fetched: float, wrote: float) -> None:
        info = self.counts.setdefault(res.curve, _empty_counts())
        info["fetch_seconds"] += fetched
        info["write_seconds"] += wrote
        info["days_built"] += int(res.ok.sum())
        info["failed"] += int((~res.ok).sum())
        info["forwards"] += len(res.forwards)
        info["chunks"] += 1
        info["compute_seconds"] += res.seconds
        for r, n in res.reasons.items():
            info["reasons"][r] = info["reasons"].get(r, 0) + n


# --- writing (flow process only) ----------------------------------------------------------------

def _empty_counts() -> dict:
    return {"days_built": 0, "failed": 0, "forwards": 0, "chunks": 0, "compute_seconds": 0.0, "fetch_seconds": 0.0,
            "write_seconds": 0.0, "reasons": {}}


def write_chunk(con, cfg: Config, result: ChunkResult, version: str) -> None:  # noqa: ANN001
    """Store one computed chunk in one transaction through the build step's writer.

    Every day of the chunk loses its previous build of the same scenario; the days built (``ok``)
    get their zero rates, forwards, fits and shape findings.
    """
    c = cfg.curve(result.curve)
    part = QuotePanel(result.as_of, list(c.tenor_labels), np.empty((len(result.as_of), 0)), result.recorded_at)
    build_step._write_chunk(con, result.curve, result.scenario, result.method, version, part, result.ok,
                            result.zeros, result.forwards, result.shape, result.params, set(c.tenor_labels))


@task(name="write chunks", cache_policy=NO_CACHE, retries=2, retry_condition_fn=_retry_condition,
      retry_delay_seconds=[1, 4])
def write_chunks(cfg: Config, arrivals: ChunkArrivals) -> list[str]:
    """The one writer: store each chunk as its computation finishes, until the last chunk of some
    curve is stored (or every chunk is); returns the curves whose chunks are now all stored.

    Runs in the flow's own process (called, not submitted), so only this process opens the store.
    Returning when a curve is complete lets the flow realise and audit that curve while the other
    curves' chunks are still being computed.
    """
    version = build_step.code_version()
    pending = [i for i in range(len(arrivals.jobs)) if i not in arrivals.stored]
    complete: list[str] = []
    # one DuckDB thread: the cores belong to the chunks' computation, and a chunk's writes are small
    with writer(cfg.store_path) as con, one_thread(con):
        stream = completed([arrivals.futures[i] for i in pending])
        while not complete:
            t = time.perf_counter()
            got = next(stream, None)
            if got is None:
                break
            fetched = time.perf_counter() - t
            k, res = pending[got[0]], got[1]
            if res.curve in arrivals.held:
                res = res.without(arrivals.held[res.curve])
            t = time.perf_counter()
            write_chunk(con, cfg, res, version)
            arrivals.stored.add(k)
            arrivals.futures[k] = None  # lets a cluster drop the stored result
            arrivals.record(res, fetched, time.perf_counter() - t)
            _report("build", arrivals.days_stored, arrivals.total_days)
            if not arrivals.left(res.curve):
                complete.append(res.curve)
    return complete


@task(name="settle build", cache_policy=NO_CACHE, retries=2, retry_condition_fn=_retry_condition,
      retry_delay_seconds=[1, 4])
def settle_build(cfg: Config, curve: str, first: str | None, last: str | None) -> build_step.BuildSummary:
    """The build step once over the range for ``curve``: withdraws builds of held-back days; builds
    any day left."""
    return build_step.run_build(cfg, curve, first, last)


@task(name="read audit record", cache_policy=NO_CACHE, retries=2, retry_condition_fn=_retry_condition,
      retry_delay_seconds=[1, 4])
def read_audit_record(cfg: Config, curve: str) -> audit_step.CurveRecord | None:
    """The curve's outcomes when its audit is due in full (see :func:`flows.audit_step.whole_record_due`)."""
    return audit_step.whole_record_due(cfg, curve)


@task(name="store audit", cache_policy=NO_CACHE, retries=2, retry_condition_fn=_retry_condition,
      retry_delay_seconds=[1, 4])
def store_audit(cfg: Config, record: audit_step.CurveRecord, audit: WholeAudit,
                now: object) -> audit_step.AuditRefresh:
    """Store an audit computed on the cluster (:func:`flows.audit_step.store_whole_audit`)."""
    return audit_step.store_whole_audit(cfg, record, audit, now)


# --- the flow -----------------------------------------------------------------------------------

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

    Plans and starts the chunks on the flow's task runner, runs the checks meanwhile (a day held
    back by a reject finding is not stored), then stores the chunks with one writer in this
    process. As soon as every chunk of a curve is stored, that curve is finished while the other
    curves' chunks are still computing: the build step once over its range, then its realisation
    and its audit. ``seconds`` adds up each stage's time across the curves ("build" is the
    writer's, waits for the computation included; "audit" includes waiting for the workers').
    """
    t0 = time.perf_counter()
    cfg = load_config(config_path)
    log = get_run_logger()
    summary = BackfillSummary(first, last)
    summary.curves = {name: _empty_counts() for name in cfg.curves}
    finished: list[str] = []
    audits: dict[str, tuple] = {}  # curve -> (record, stamp, futures of its audit's parts on the cluster)
    client = _dask_client()

    @contextlib.contextmanager
    def stage(name: str) -> Iterator[None]:
        t = time.perf_counter()
        yield
        summary.seconds[name] = round(summary.seconds.get(name, 0.0) + time.perf_counter() - t, 4)

    def finish(name: str) -> None:
        """The build step, realisation and audit of one curve whose chunks are all stored."""
        with stage("settle"):
            settled = settle_build(cfg, name, first, last)
        info = summary.curves[name]
        for got in settled.curves.values():
            summary.caught_up += got["days_built"]
            info["days_built"] += got["days_built"]
            info["forwards"] += got["forwards"]
            info["withdrawn"] = info.get("withdrawn", 0) + got.get("withdrawn", 0)
            # the build step's count, after the checks: days in the range an open reject finding holds back
            info["held"] = info.get("held", 0) + got.get("held", 0)
        with stage("realize"):
            realized = realize_forwards(cfg, name)
        summary.realized += realized.realized
        info["realized"] = sum(got["realized"] for got in realized.curves.values())
        with stage("audit"):
            record = read_audit_record(cfg, name) if client is not None else None
            if record is None:
                summary.audited += refresh_audit(cfg, curve=name)
            else:
                # the whole-record audit is the costliest part of finishing a curve and needs no
                # store: a worker computes it (ahead of the chunks still queued) while this process
                # goes on storing chunks; it is stored once computed
                now = utc_now()
                version = record.outcomes["realized_at"].max()
                parts = split_record(record.outcomes, max(sum(client.nthreads().values()), 1))
                audits[name] = (record, now, [client.submit(
                    audit_record, data, cfg.curve(name).premium_window_days, now, version=version, pure=False,
                    priority=10,
                    key=f"afterward-audit-{name}-{k}-{uuid.uuid4().hex[:12]}")
                    for k, data in enumerate(client.scatter(parts))])
                return
        done(name)

    def done(name: str) -> None:
        finished.append(name)
        _report("finish", len(finished), len(cfg.curves))

    def store_audits() -> None:
        for name, (record, now, futures) in audits.items():
            with stage("audit"):
                res = join_audits([f.result() for f in futures])
                stored = store_audit(cfg, quote(record), quote(res), now)
            if stored.mode != "unchanged":
                summary.audited.append(name)
            done(name)

    # one job at a time per store; one open store for the run's many short steps (warehouse.connect.held)
    with run_lock(cfg.store_path, "backfill"), held(cfg.store_path):
        # the chunks compute while the checks run: a day the checks now hold back is dropped from
        # its chunk before it is stored, and a day they release is built by the build step below
        with stage("plan"):
            jobs = costliest_first(plan_chunks(cfg, first, last, chunk_days, rebuild))
        summary.chunks = len(jobs)
        summary.days_planned = sum(j.days for j in jobs)
        log.info("backfill %s..%s: %d day(s) due in %d chunk(s)", first, last, summary.days_planned, len(jobs))
        arrivals = ChunkArrivals(jobs, submit_chunks(jobs))
        _report("build", 0, arrivals.total_days)
        with stage("check"):
            check_quotes(cfg, first, last)
            arrivals.held = held_back(cfg)
        # curves with nothing to build are finished while the first chunks compute
        for name in cfg.curves:
            if not any(j.curve == name for j in jobs):
                finish(name)
        while not arrivals.done:
            with stage("build"):
                complete = write_chunks(cfg, quote(arrivals))
            for name in complete:
                summary.curves[name] = arrivals.counts[name]
                finish(name)
        store_audits()
    if summary.caught_up:
        log.warning("the build step built %d day(s) the chunks did not", summary.caught_up)
    summary.work_seconds = round(time.perf_counter() - t0, 4)
    create_table_artifact(table=summary.table(), key="afterward-backfill",
                          description=f"afterward backfill {first or 'start'}..{last or 'end'}: "
                                      f"{summary.days_built} day(s) built, {summary.realized} outcome(s) realised")
    log.info("backfill done: %d day(s) built, %d forwards, %d outcomes realised in %.1f s", summary.days_built,
             summary.forwards_built, summary.realized, summary.work_seconds)
    return summary


# --- task runners -------------------------------------------------------------------------------

def _warm_up() -> None:
    """Get a worker ready before the first chunk arrives (while the cluster starts, not in the job's
    time): import the chunk computation's modules and build one small chunk so that the libraries'
    first-call costs are paid too."""
    from flows import build_step
    from pipeline.config import CurveConfig
    from pipeline.tenors import parse_tenor

    def tenors(*labels: str) -> tuple:
        return tuple(parse_tenor(x) for x in labels)

    days = np.arange(np.datetime64("2001-01-01"), np.datetime64("2001-01-11"))
    for kind, compounding in (("zero", "continuous"), ("par", "semiannual")):
        for method in ("linear_zero", "monotone_convex"):
            c = CurveConfig("warm-up", quote=kind, compounding=compounding, interpolation=method,
                            tenors=tenors("3M", "1Y", "2Y", "5Y", "10Y"), forward_starts=tenors("3M", "1Y"),
                            forward_tenors=tenors("3M", "1Y"))
            build_step.compute_days(days, list(c.tenor_labels), np.full((days.size, len(c.tenors)), 0.03), c,
                                    method)
    # and one small whole-record audit (its first call imports SciPy's statistics, ~0.4 s cold)
    n = 300
    as_of = np.arange(np.datetime64("2001-01-01"), np.datetime64("2001-01-01") + n)
    spot = 0.03 + 0.002 * np.sin(np.arange(n + 60) / 9.0)
    forward = spot[:n] + 0.0004 + 0.0003 * np.cos(np.arange(n) / 5.0)
    outcomes = pd.DataFrame({
        "curve": "warm-up", "as_of": as_of, "start_months": 3, "tenor_months": 3, "target_date": as_of + 60,
        "observed_on": as_of + 60, "forward_rate": forward, "realized_rate": spot[60:], "spot_rate": spot[:n],
        "error_bp": (forward - spot[60:]) * 1e4, "rw_error_bp": (spot[:n] - spot[60:]) * 1e4,
        "inverted": pd.array(np.arange(n) % 50 < 20, dtype="boolean"),
        "realized_at": pd.Timestamp("2001-06-01")})
    audit_record(outcomes, c.premium_window_days, pd.Timestamp("2001-06-01"))


# Dask's nanny sets MALLOC_TRIM_THRESHOLD_=65536 in its workers by default; with it, glibc hands
# memory back to the system after every large numpy temporary and the chunk computation runs about
# three times slower (measured here). Keep the one-thread BLAS settings, drop the trim threshold.
_WORKER_ENVIRON = {"OMP_NUM_THREADS": 1, "MKL_NUM_THREADS": 1, "OPENBLAS_NUM_THREADS": 1}


def make_local_cluster(n_workers: int, **kwargs: object):  # noqa: ANN201
    """A ``distributed.LocalCluster`` of ``n_workers`` processes, one thread each (no dashboard),
    whose workers keep glibc's default memory trimming (see ``_WORKER_ENVIRON``)."""
    import dask
    from distributed import LocalCluster

    # no dashboard; the scheduler's own HTTP endpoints on a free port rather than 8787, which another
    # cluster on the machine may hold
    options = {"threads_per_worker": 1, "processes": True, "dashboard_address": None,
               "scheduler_kwargs": {"dashboard_address": ":0"}, **kwargs}
    with dask.config.set({"distributed.nanny.pre-spawn-environ": dict(_WORKER_ENVIRON)}):
        return LocalCluster(n_workers=n_workers, **options)


@contextlib.contextmanager
def local_cluster(workers: int) -> Iterator[object]:
    """A local Dask cluster of ``workers`` processes, one thread each, modules imported on each worker."""
    from distributed import Client

    with make_local_cluster(workers) as cluster:
        with Client(cluster) as client:
            client.run(_warm_up)
        yield cluster


def task_runner_for(workers: int = 1, scheduler: str | None = None):  # noqa: ANN201
    """The task runner for the chunks: a Dask cluster at ``scheduler``, a new local Dask cluster of
    ``workers`` processes (``workers > 1``), or one thread in this process."""
    if scheduler:
        from prefect_dask import DaskTaskRunner

        return DaskTaskRunner(address=scheduler)
    if workers > 1:
        from prefect_dask import DaskTaskRunner

        return DaskTaskRunner(cluster_class=make_local_cluster,
                              cluster_kwargs={"n_workers": workers, "threads_per_worker": 1, "processes": True})
    from prefect.task_runners import ThreadPoolTaskRunner

    return ThreadPoolTaskRunner(max_workers=1)
