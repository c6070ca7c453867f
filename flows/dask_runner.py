"""The Dask side of the backfill: task runners, the local cluster and its warm-up, and sending work.

Chunks of days are pure computation, so on Prefect's Dask task runner they go to the cluster as plain
Dask tasks through the runner's own client (:func:`submit`): each Prefect task sent to Dask costs the
flow process about 0.1 s of serialising Prefect's settings and context, and each worker the task
engine's API calls, which on two cores cost more than a second worker gains (measured by
``benchmarks/bench_daily.py``). Workers never open the store.
"""

from __future__ import annotations

import contextlib
import sys
import uuid
from collections.abc import Callable, Iterator

import numpy as np
import pandas as pd
from prefect.context import FlowRunContext
from prefect.futures import as_completed

from pipeline.audit.refresh import audit_record

__all__ = ["completed", "dask_client", "local_cluster", "make_local_cluster", "submit", "task_runner_for"]


def dask_client():  # noqa: ANN201
    """The Dask client of the running flow's task runner, or None when the flow runs on another runner."""
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


def submit(client, fn: Callable, *args: object, name: str, priority: int = 0, **kwargs: object):  # noqa: ANN001, ANN201
    """``fn(*args, **kwargs)`` as a plain Dask task on ``client`` (see the module notes), keyed ``name``."""
    return client.submit(fn, *args, pure=False, priority=priority, key=f"afterward-{name}-{uuid.uuid4().hex[:12]}",
                         **kwargs)


def completed(futures: list) -> Iterator[tuple[int, object]]:
    """``(position, result)`` of each future in the order they finish (Dask or Prefect futures; a
    failed one raises)."""
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


def _warm_up() -> None:
    """Get a worker ready before the first chunk arrives (while the cluster starts, not in the job's
    time): import the chunk computation's modules and build one small chunk so that the libraries'
    first-call costs are paid too."""
    from pipeline.config import CurveConfig
    from pipeline.surfaces import compute_days
    from pipeline.tenors import parse_tenor

    def tenors(*labels: str) -> tuple:
        return tuple(parse_tenor(x) for x in labels)

    days = np.arange(np.datetime64("2001-01-01"), np.datetime64("2001-01-11"))
    for kind, compounding in (("zero", "continuous"), ("par", "semiannual")):
        for method in ("linear_zero", "monotone_convex"):
            c = CurveConfig("warm-up", quote=kind, compounding=compounding, interpolation=method,
                            tenors=tenors("3M", "1Y", "2Y", "5Y", "10Y"), forward_starts=tenors("3M", "1Y"),
                            forward_tenors=tenors("3M", "1Y"))
            compute_days(days, list(c.tenor_labels), np.full((days.size, len(c.tenors)), 0.03), c,
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
