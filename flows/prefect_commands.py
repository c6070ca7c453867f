"""The Prefect side of the command line: ``afterward run``, ``backfill`` and ``serve``.

Prefect is imported here, inside the commands that need it, after its settings are put in the
environment: no telemetry (the machines are often offline), a start-up timeout that a cold machine
can meet, and Prefect's console logging at errors only (its full log still goes to its API and
UI). Without ``PREFECT_API_URL`` a run starts Prefect's temporary local server first; that start-up
is timed and reported apart from the job's own work. Output is plain lines and, on a terminal, a
progress bar; when not on a terminal the progress bar is off.

Exit status: 0 completed; 1 completed with findings (a refused file, rejected rows, new reject or
warn findings) or the job failed; 2 bad usage (e.g. ``serve`` without a Prefect server).
"""

from __future__ import annotations

import contextlib
import os
import threading
import time
from collections.abc import Callable, Iterator
from pathlib import Path

__all__ = ["PrefectStartup", "cli_backfill", "cli_run", "cli_serve", "prefect_environment", "serve_options",
           "start_prefect"]

_DEFAULTS = {
    "PREFECT_SERVER_ANALYTICS_ENABLED": "false",
    "PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS": "90",
    # afterward prints its own summary lines; Prefect's full log goes to its API and UI
    "PREFECT_LOGGING_HANDLERS_CONSOLE_LEVEL": "ERROR",
    "PREFECT_CLI_PROMPT": "false",
}


def prefect_environment() -> None:
    """Put afterward's Prefect defaults into the environment (a value the user set wins)."""
    for key, value in _DEFAULTS.items():
        os.environ.setdefault(key, value)


class PrefectStartup:
    """How long Prefect took to be ready: importing it, and starting its temporary server if needed."""

    def __init__(self) -> None:
        self.import_seconds = 0.0
        self.server_seconds = 0.0
        self.api_url: str | None = None
        self.temporary = False
        self.alongside_seconds = 0.0  # work started alongside the server (libraries, a Dask cluster)

    @property
    def seconds(self) -> float:
        return self.import_seconds + self.server_seconds

    def describe(self) -> str:
        where = "temporary local server" if self.temporary else (self.api_url or "server")
        return f"Prefect start-up {self.seconds:.1f} s (import {self.import_seconds:.1f} s, {where} " \
               f"{self.server_seconds:.1f} s)"


@contextlib.contextmanager
def start_prefect(startup: PrefectStartup | None = None,
                  alongside: Callable[[], object] | None = None) -> Iterator[PrefectStartup]:
    """Import Prefect and make sure an API is there for the block: the configured ``PREFECT_API_URL``,
    else a temporary local server started here (stopped when the process exits), exported so that worker
    processes (Dask) use the same server instead of starting their own.

    ``alongside`` runs in this thread while the server starts in another (e.g. starting a Dask
    cluster); its time is kept apart in ``startup.alongside_seconds``.
    """
    startup = startup or PrefectStartup()
    prefect_environment()
    t = time.perf_counter()
    import prefect  # noqa: F401
    from prefect.settings import PREFECT_API_URL, temporary_settings

    startup.import_seconds = time.perf_counter() - t
    url = PREFECT_API_URL.value()
    if url:
        startup.api_url = url
        if alongside is not None:
            t = time.perf_counter()
            alongside()
            startup.alongside_seconds = time.perf_counter() - t
        yield startup
        return
    from prefect.server.api.server import SubprocessASGIServer

    server = SubprocessASGIServer()
    failed: list[BaseException] = []

    def launch() -> None:
        t = time.perf_counter()
        try:
            server.start()
        except BaseException as exc:  # noqa: BLE001 - handed to the calling thread
            failed.append(exc)
        startup.server_seconds = time.perf_counter() - t

    starter = threading.Thread(target=launch, name="prefect-server-start", daemon=True)
    starter.start()
    try:
        if alongside is not None:
            t = time.perf_counter()
            alongside()
            startup.alongside_seconds = time.perf_counter() - t
    finally:
        starter.join()
    if failed:
        raise failed[0]
    startup.api_url, startup.temporary = server.api_url, True
    before = os.environ.get("PREFECT_API_URL")
    os.environ["PREFECT_API_URL"] = server.api_url
    try:
        with temporary_settings({PREFECT_API_URL: server.api_url}):
            yield startup
    finally:
        if before is None:
            os.environ.pop("PREFECT_API_URL", None)
        else:
            os.environ["PREFECT_API_URL"] = before
        # the server stays up until the process exits: Prefect stops it at exit, after its event and
        # log workers have sent what they hold (stopping it here would lose them), and a second run
        # in the same process reuses it


def _failure(console, what: str, exc: BaseException) -> int:  # noqa: ANN001
    from pipeline.errors import AfterwardError

    if isinstance(exc, AfterwardError):
        message = str(exc)
    else:
        first = str(exc).splitlines()[0] if str(exc) else ""
        message = f"{type(exc).__name__}: {first}"
    console.print(f"{what} failed: {message}")
    return 1


def _preload_steps() -> None:
    """Import the steps' heavy libraries (the row expectations import Great Expectations, about 2 s)
    while Prefect's server starts, so that start-up is not counted as the job's work."""
    import flows.daily  # noqa: F401
    import pipeline.expectations  # noqa: F401


# --- afterward run ------------------------------------------------------------------------------

def cli_run(config_path: Path, console) -> int:  # noqa: ANN001
    """``afterward run``: the daily flow once, now. Prints what it did and the two timings."""
    total = time.perf_counter()
    with start_prefect(alongside=_preload_steps) as startup:
        from flows.daily import COMPLETED, daily

        t = time.perf_counter()
        try:
            summary = daily(config_path=str(config_path))
        except Exception as exc:  # a failed flow run: one line, no traceback
            return _failure(console, "daily run", exc)
        flow_seconds = time.perf_counter() - t
    for f in summary.files:
        if f["status"] in ("refused", "missing"):
            console.print(f"{f['file']}: {f['status']}: {f['detail']}")
    for name in summary.still_changing:
        console.print(f"{name}: still being written; left for the next run")
    for name, c in summary.curves.items():
        console.print(f"{name}: {c['files_loaded']} file(s) loaded, {c['rows_accepted']:,} rows accepted, "
                      f"{c['rows_rejected']:,} rejected, {c['new_findings']} new finding(s), "
                      f"{c['days_built']} day(s) built, {c['forwards_built']:,} forwards, "
                      f"{c['outcomes_realized']:,} outcomes realised")
    console.print(f"daily run {summary.status}: {summary.files_loaded} file(s) loaded, "
                  f"{summary.files_already_loaded} already loaded, {summary.files_refused} refused")
    console.print(f"{startup.describe()}, libraries loaded alongside {startup.alongside_seconds:.1f} s; "
                  f"the job's own work {summary.work_seconds:.2f} s "
                  f"(Prefect run overhead {max(flow_seconds - summary.work_seconds, 0):.1f} s; "
                  f"total {time.perf_counter() - total:.1f} s)")
    return 0 if summary.status == COMPLETED else 1


# --- afterward backfill -------------------------------------------------------------------------

def _progress_bar(console):  # noqa: ANN001, ANN202
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    return Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                    console=console, transient=True, disable=not console.is_terminal)


def cli_backfill(config_path: Path, first: str | None, last: str | None, workers: int, scheduler: str | None,
                 console) -> int:  # noqa: ANN001
    """``afterward backfill``: the backfill flow over ``[first, last]`` with a progress bar.

    ``workers > 1`` starts a local Dask cluster (processes, one thread each) while Prefect starts;
    ``scheduler`` sends the chunks to an existing Dask cluster instead.
    """
    total = time.perf_counter()
    box: dict[str, object] = {"cluster": None, "cluster_seconds": 0.0}
    with contextlib.ExitStack() as stack:
        def start_cluster() -> None:
            from flows.dask_runner import local_cluster

            t = time.perf_counter()
            box["cluster"] = stack.enter_context(local_cluster(workers))
            box["cluster_seconds"] = time.perf_counter() - t

        # Prefect's server and the Dask workers start side by side: both are start-up, not the job
        want_cluster = workers > 1 and not scheduler
        try:
            startup = stack.enter_context(start_prefect(alongside=start_cluster if want_cluster else None))
        except Exception as exc:
            return _failure(console, "starting Prefect or Dask", exc)
        from flows.backfill import backfill
        from flows.chunks import progress_hook
        from flows.dask_runner import task_runner_for

        cluster = box["cluster"]
        address = scheduler or (getattr(cluster, "scheduler_address", None) if cluster is not None else None)
        runner = task_runner_for(workers, address)
        mode = f"Dask cluster at {address}" if address else "one worker thread"
        with _progress_bar(console) as progress:
            bars: dict[str, int] = {}

            def on_progress(stage: str, done: int, n: int) -> None:
                if stage not in bars:
                    label = {"build": "building days", "finish": "realising and auditing curves"}.get(stage, stage)
                    bars[stage] = progress.add_task(label, total=n)
                progress.update(bars[stage], completed=done, total=n)

            t = time.perf_counter()
            try:
                with progress_hook(on_progress):
                    summary = backfill.with_options(task_runner=runner)(config_path=str(config_path), first=first,
                                                                        last=last)
            except Exception as exc:
                return _failure(console, "backfill", exc)
            flow_seconds = time.perf_counter() - t
    for name, c in summary.curves.items():
        failed = f", {c['failed']} could not be built" if c.get("failed") else ""
        held = f", {c['held']:,} held back by reject findings" if c.get("held") else ""
        console.print(f"{name}: built {c['days_built']:,} day(s), {c['forwards']:,} forwards{failed}{held}, "
                      f"{c.get('realized', 0):,} outcomes realised")
    console.print(f"backfill {first or 'start'}..{last or 'end'} on {mode}: {summary.chunks} chunk(s), "
                  f"{summary.days_built:,} day(s) built")
    local = f", local Dask cluster {box['cluster_seconds']:.1f} s alongside" if cluster is not None else ""
    console.print(f"{startup.describe()}{local}; the job's own work {summary.work_seconds:.2f} s "
                  f"(Prefect run overhead {max(flow_seconds - summary.work_seconds, 0):.1f} s; "
                  f"total {time.perf_counter() - total:.1f} s)")
    stages = ", ".join(f"{k} {v:.2f}" for k, v in summary.seconds.items())
    compute = sum(c.get("compute_seconds", 0.0) for c in summary.curves.values())
    write = sum(c.get("write_seconds", 0.0) for c in summary.curves.values())
    console.print(f"stages (s): {stages}; chunks computed in {compute:.2f} s of task time, written in {write:.2f} s")
    return 1 if any(c.get("failed") for c in summary.curves.values()) else 0


# --- afterward serve ----------------------------------------------------------------------------

def serve_options(config_path: Path, cron: str | None = None) -> dict:
    """The keyword arguments of ``daily.serve``: the schedule and time zone from the config (``--cron``
    overrides the expression), the config path as the runs' parameter, and at most one run at a
    time, a new run being cancelled while one is going (so two runs never fight over the store)."""
    from prefect.client.schemas.objects import ConcurrencyLimitConfig, ConcurrencyLimitStrategy
    from prefect.flows import EntrypointType
    from prefect.schedules import Cron

    from pipeline.config import ConfigError, load_config

    cfg = load_config(config_path)
    expr = cron or cfg.schedule_cron
    if len(expr.split()) != 5:
        raise ConfigError(f"--cron {expr!r} must be a five-field cron expression (e.g. \"30 18 * * 1-5\")")
    try:
        schedule = Cron(expr, timezone=cfg.schedule_timezone)
    except ValueError:
        raise ConfigError(f"--cron {expr!r} is not a valid cron expression") from None
    return {
        "name": "afterward-daily",
        "schedule": schedule,
        "parameters": {"config_path": str(Path(config_path).resolve())},
        "global_limit": ConcurrencyLimitConfig(limit=1, collision_strategy=ConcurrencyLimitStrategy.CANCEL_NEW),
        "entrypoint_type": EntrypointType.MODULE_PATH,
        "description": "afterward's daily job: load the inbox, check, build, realize, audit.",
        "tags": ["afterward"],
    }


def cli_serve(config_path: Path, cron: str | None, console) -> int:  # noqa: ANN001
    """``afterward serve``: serve the daily flow on its schedule until interrupted.

    Needs a running Prefect server (``prefect server start``, then ``PREFECT_API_URL``): the
    temporary local server of ``afterward run`` does not fire schedules.
    """
    prefect_environment()
    from prefect.settings import PREFECT_API_URL

    from pipeline.config import ConfigError

    if not PREFECT_API_URL.value():
        console.print("afterward serve needs a Prefect server: start one with 'prefect server start' "
                      "(UI at http://127.0.0.1:4200), then set PREFECT_API_URL=http://127.0.0.1:4200/api")
        return 2
    try:
        options = serve_options(config_path, cron)
    except ConfigError as exc:
        console.print(f"config: {exc}")
        return 2
    from flows.daily import daily

    sched = options["schedule"]
    console.print(f"serving the daily job '{options['name']}' on '{sched.cron}' ({sched.timezone}) against "
                  f"{PREFECT_API_URL.value()}; at most one run at a time (a new run is cancelled while one is "
                  "going); Ctrl-C stops")
    try:
        daily.serve(**options, print_starting_message=False)
    except KeyboardInterrupt:
        console.print("stopped")
    return 0
