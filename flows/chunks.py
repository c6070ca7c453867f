"""The backfill's chunks of days: planned in the flow's process, computed anywhere, stored by one writer.

A chunk is pure computation (:func:`compute_chunk`: curves, zero rates, forwards and shape checks for
its days, returned as arrays, which travel between processes far more cheaply than frames of rows).
Which days are due is the build step's own rule (:func:`warehouse.builds.due_days`). Only the flow's
process writes: :func:`write_chunks` stores each chunk as it arrives, one transaction per chunk,
through the build's writer (:func:`warehouse.builds.write_built`), so a chunk stores exactly the rows
``afterward build`` would.

Parametric fits (``nss``) start every chunk from the last stored fit before the range, not from the
previous chunk's last day as ``afterward build`` does, so chunks stay independent; the other methods
give the same rows either way.
"""

from __future__ import annotations

import contextlib
import dataclasses
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field

import duckdb
import numpy as np
import pandas as pd
from prefect import task
from prefect.cache_policies import NO_CACHE

from flows.build_step import code_version, scenario_name
from flows.dask_runner import completed, dask_client, submit
from flows.tasks import RETRY
from pipeline.config import Config, CurveConfig
from pipeline.forwards import ForwardGrid, ZeroGrid
from pipeline.surfaces import compute_days
from warehouse import builds
from warehouse.connect import one_thread, transaction, writer_for
from warehouse.loads import utc_now

__all__ = ["CHUNK_DAYS", "ChunkArrivals", "ChunkJob", "ChunkResult", "compute_chunk", "costliest_first", "empty_counts",
           "plan_chunks", "progress_hook", "report", "submit_chunks", "write_chunk", "write_chunks"]

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


def report(stage: str, done: int, total: int) -> None:
    if _progress is not None:
        _progress(stage, done, total)


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
    """A built chunk: per-day ``ok`` and what the build's writer stores (see
    :class:`pipeline.surfaces.BuiltDays`)."""

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


def plan_chunks(cfg: Config, first: str | None = None, last: str | None = None, chunk_days: int = CHUNK_DAYS,
                rebuild: bool = False, curve: str | None = None, *,
                con: duckdb.DuckDBPyConnection | None = None) -> list[ChunkJob]:
    """Cut each curve's days due in ``[first, last]`` (the build step's rule) into chunks, reading
    only those days' quotes. ``con``: the store to use (default: open one for the call)."""
    with writer_for(cfg.store_path, con) as con:
        return [job for name in ([curve] if curve else list(cfg.curves))
                for job in _curve_chunks(con, cfg.curve(name), first, last, chunk_days, rebuild)]


def _curve_chunks(con: duckdb.DuckDBPyConnection, c: CurveConfig, first: str | None, last: str | None,
                  chunk_days: int, rebuild: bool) -> list[ChunkJob]:
    scenario = scenario_name(c, None)
    due, _ = builds.due_days(con, c.name, scenario, first, last, rebuild)
    panel = builds.read_due_quotes(con, c.name, list(c.tenor_labels), due)
    warm = builds.last_params(con, c.name, scenario) if c.interpolation == "nss" else None
    return [ChunkJob(c.name, k, c, c.interpolation, scenario, tuple(panel.tenors), panel.as_of[sl], panel.rates[sl],
                     panel.recorded_at[sl], warm)
            for k, sl in enumerate(slice(s, s + chunk_days) for s in range(0, len(panel), chunk_days))]


def compute_chunk(job: ChunkJob) -> ChunkResult:
    """Build one chunk exactly as the build step builds a batch of days. Pure: no store, no Prefect.

    Rates are decimals in the curve's own compounding and day count (``*_cc``: continuous).
    """
    t = time.perf_counter()
    b = compute_days(job.as_of, list(job.tenors), job.rates, job.config, job.method, job.warm)
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
    """Start every chunk on the flow's task runner; returns their futures in ``jobs``' order: plain
    Dask tasks on a Dask runner (see :mod:`flows.dask_runner`), Prefect tasks on any other."""
    client = dask_client()
    if client is not None:
        return [submit(client, compute_chunk, job, name=f"chunk-{job.curve}-{job.index}") for job in jobs]
    return [compute_chunk_task.submit(job) for job in jobs]


def empty_counts() -> dict:
    return {"days_built": 0, "failed": 0, "forwards": 0, "chunks": 0, "compute_seconds": 0.0, "fetch_seconds": 0.0,
            "write_seconds": 0.0, "reasons": {}}


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
        info = self.counts.setdefault(res.curve, empty_counts())
        info["fetch_seconds"] += fetched
        info["write_seconds"] += wrote
        info["days_built"] += int(res.ok.sum())
        info["failed"] += int((~res.ok).sum())
        info["forwards"] += len(res.forwards)
        info["chunks"] += 1
        info["compute_seconds"] += res.seconds
        for r, n in res.reasons.items():
            info["reasons"][r] = info["reasons"].get(r, 0) + n


def write_chunk(con: duckdb.DuckDBPyConnection, cfg: Config, result: ChunkResult, version: str) -> None:
    """Store one computed chunk in one transaction, as the build step stores a batch: every day of the
    chunk loses its previous build of the same scenario; the days built (``ok``) get their zero rates,
    forwards, fits and shape findings."""
    c = cfg.curve(result.curve)
    with transaction(con):
        builds.write_built(con, result.curve, result.scenario, result.method, version, result.as_of,
                           result.recorded_at, result.ok, result.zeros, result.forwards, result.shape, result.params,
                           set(c.tenor_labels), utc_now())


@task(name="write chunks", cache_policy=NO_CACHE, **RETRY)
def write_chunks(cfg: Config, arrivals: ChunkArrivals, con: duckdb.DuckDBPyConnection | None = None) -> list[str]:
    """The one writer: store each chunk as its computation finishes, until the last chunk of some
    curve is stored (or every chunk is); returns the curves whose chunks are now all stored.

    Runs in the flow's own process (called, not submitted), so only this process opens the store.
    Returning when a curve is complete lets the flow realise and audit that curve while the other
    curves' chunks are still being computed.
    """
    version = code_version()
    pending = [i for i in range(len(arrivals.jobs)) if i not in arrivals.stored]
    complete: list[str] = []
    # one DuckDB thread: the cores belong to the chunks' computation, and a chunk's writes are small
    with writer_for(cfg.store_path, con) as con, one_thread(con):
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
            report("build", arrivals.days_stored, arrivals.total_days)
            if not arrivals.left(res.curve):
                complete.append(res.curve)
    return complete
