"""The daily job as a Prefect flow: take the new files from the inbox, load, check, build, realize, audit.

Each task is one step of :mod:`flows.steps` and its siblings, called unchanged, so the same work runs
without Prefect (``afterward load``, ``check``, ``build``, ``realize``, ``audit``). Tasks take the
typed settings and paths, never an open connection, and skip Prefect's input hashing (``NO_CACHE``):
every step writes to the store, so a cached result would be wrong.

Reliability:

* a file is taken only once its size and modification time stayed the same between two looks a
  short interval apart; files still changing are looked at again with a growing interval, and any
  still changing after that are left in the inbox for the next run;
* loading retries with exponential backoff, but only on a locked store or an I/O error; every file
  is its own transaction, so a run that fails part-way leaves each finished file committed and
  the others untouched, and a rerun skips what was loaded (same checksum: "already loaded");
* a file that could not be read at all is refused (its reason is in ``rejected_rows`` at line 0
  and in ``loads``) and moved to ``[inbox] refused``; the run goes on and ends
  "completed with findings", not failed.

The flow returns a :class:`DailySummary` and publishes two table artifacts: ``afterward-daily``
(one row per curve and a total) and ``afterward-daily-files`` (one row per file).
"""

from __future__ import annotations

import shutil
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path

import duckdb
from prefect import flow, get_run_logger, task
from prefect.artifacts import create_table_artifact
from prefect.cache_policies import NO_CACHE
from prefect.tasks import exponential_backoff

from flows.audit_step import refresh_audit_incremental, run_audit
from flows.build_step import BuildSummary, run_build
from flows.check_step import CheckSummary, note_late_curves, run_checks
from flows.realize_step import RealizeSummary, run_realize
from flows.steps import load_files
from pipeline.config import Config, load_config
from warehouse.connect import StoreLocked, writer
from warehouse.loads import LoadOutcome, utc_now
from warehouse.run_lock import run_lock

__all__ = [
    "COMPLETED",
    "COMPLETED_WITH_FINDINGS",
    "DailySummary",
    "daily",
    "file_away",
    "inbox_candidates",
    "is_retryable",
    "stable_files",
]

COMPLETED = "completed"
COMPLETED_WITH_FINDINGS = "completed with findings"

SETTLE_SECONDS = 1.0      # a file must keep its size this long before it is taken
PATIENCE_SECONDS = 8.0    # how long a run keeps looking at files that are still changing
# names that mark a file still being delivered by common copy tools
_PARTIAL_SUFFIXES = (".part", ".partial", ".tmp", ".crdownload", ".filepart", ".download")

# what the load task retries on: a store locked by another process, or the disk / network
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


# --- the inbox ----------------------------------------------------------------------------------

def inbox_candidates(inbox: Path) -> list[Path]:
    """Entries directly in ``inbox`` (not its sub-folders) that are not folders, sorted by name.

    Hidden files and names that copy tools use for a delivery in progress are skipped. A named pipe,
    socket or device is taken too (and never opened in a way that blocks): the load records it as
    refused, so nothing that arrives is ignored without a trace.
    """
    if not inbox.is_dir():
        return []
    out = []
    for p in inbox.iterdir():
        name = p.name
        if name.startswith((".", "~")) or name.lower().endswith(_PARTIAL_SUFFIXES):
            continue
        if p.is_file() or (p.exists() and not p.is_dir()):
            out.append(p)
    return sorted(out, key=lambda p: p.name)


def _look(paths: list[Path]) -> dict[Path, tuple[int, int]]:
    seen = {}
    for p in paths:
        try:
            st = p.stat()
        except FileNotFoundError:  # moved away between listing and looking
            continue
        seen[p] = (st.st_size, st.st_mtime_ns)
    return seen


def stable_files(inbox: Path, settle_seconds: float = SETTLE_SECONDS, patience_seconds: float = PATIENCE_SECONDS,
                 sleep: Callable[[float], None] = time.sleep) -> tuple[list[Path], list[Path]]:
    """Files of ``inbox`` whose size and modification time did not change between two looks.

    The second look comes ``settle_seconds`` after the newest modification among the files (so
    files that have been quiet for longer are not waited for). Files that changed are looked at
    again with a doubling interval for up to ``patience_seconds``. Returns ``(taken, still_changing)``.
    """
    taken: list[Path] = []
    pending = inbox_candidates(inbox)
    first = _look(pending)
    pending = [p for p in pending if p in first]
    if not pending:
        return [], []
    newest_ns = max(m for _, m in first.values())
    quiet = time.time() - newest_ns / 1e9
    wait = max(settle_seconds - quiet, min(0.05, settle_seconds))
    spent = 0.0
    while pending:
        sleep(wait)
        spent += wait
        second = _look(pending)
        changed = []
        for p in pending:
            if p not in second:
                continue  # gone: someone else took it
            if second[p] == first[p]:
                taken.append(p)
            else:
                changed.append(p)
        first, pending = second, changed
        if spent >= patience_seconds:
            break
        wait = min(max(wait * 2, settle_seconds), max(patience_seconds - spent, 0.05))
    return sorted(taken, key=lambda p: p.name), pending


def _unique_target(folder: Path, name: str) -> Path:
    """``folder/name``, or ``folder/stem.N.suffix`` with the first free N when that name is taken."""
    target = folder / name
    if not target.exists():
        return target
    stem, suffix = Path(name).stem, Path(name).suffix
    n = 1
    while (folder / f"{stem}.{n}{suffix}").exists():
        n += 1
    return folder / f"{stem}.{n}{suffix}"


def file_away(cfg: Config, outcomes: list[LoadOutcome]) -> list[dict]:
    """Move each file to ``cfg.loaded`` (loaded, or already loaded) or ``cfg.refused`` (unreadable).

    A file that could not be opened (``missing``) stays where it is. An existing file of the same
    name in the target folder is kept; the newcomer gets a ``.N`` before its suffix. Returns one
    record per file: ``file``, ``status``, ``moved_to`` (None when not moved).
    """
    moves = []
    for o in outcomes:
        src = Path(o.source_file)
        folder = {"loaded": cfg.loaded, "already loaded": cfg.loaded, "refused": cfg.refused}.get(o.status)
        moved_to = None
        if folder is not None and src.exists():
            folder.mkdir(parents=True, exist_ok=True)
            target = _unique_target(folder, src.name)
            shutil.move(str(src), str(target))
            moved_to = str(target)
        moves.append({"file": src.name, "status": o.status, "moved_to": moved_to})
    return moves


# --- the summary --------------------------------------------------------------------------------

@dataclass
class DailySummary:
    """What one daily run did. ``status``: "completed" or "completed with findings".

    ``findings`` counts the findings raised during the run by severity (load-time and curve-level);
    ``seconds`` the wall time of each step; ``work_seconds`` the whole flow body (Prefect's own
    start-up excluded).
    """

    status: str = COMPLETED
    files: list[dict] = field(default_factory=list)
    still_changing: list[str] = field(default_factory=list)
    curves: dict[str, dict] = field(default_factory=dict)
    findings: dict[str, int] = field(default_factory=dict)
    seconds: dict[str, float] = field(default_factory=dict)
    work_seconds: float = 0.0

    def _count(self, status: str) -> int:
        return sum(1 for f in self.files if f["status"] == status)

    @property
    def files_loaded(self) -> int:
        return self._count("loaded")

    @property
    def files_refused(self) -> int:
        return self._count("refused")

    @property
    def files_already_loaded(self) -> int:
        return self._count("already loaded")

    @property
    def rows_accepted(self) -> int:
        return sum(f["rows_accepted"] for f in self.files)

    @property
    def rows_rejected(self) -> int:
        return sum(f["rows_rejected"] for f in self.files)

    @property
    def new_findings(self) -> int:
        return sum(self.findings.values())

    @property
    def forwards_built(self) -> int:
        return sum(c.get("forwards_built", 0) for c in self.curves.values())

    @property
    def outcomes_realized(self) -> int:
        return sum(c.get("outcomes_realized", 0) for c in self.curves.values())

    def as_dict(self) -> dict:
        out = asdict(self)
        for name in ("files_loaded", "files_refused", "files_already_loaded", "rows_accepted", "rows_rejected",
                     "new_findings", "forwards_built", "outcomes_realized"):
            out[name] = getattr(self, name)
        return out


def _file_record(o: LoadOutcome, moved_to: str | None) -> dict:
    def day(x: object) -> str | None:
        return None if x is None else str(x)[:10]

    return {"file": Path(o.source_file).name, "status": o.status, "curves": ",".join(o.curves),
            "rows_read": o.rows_read, "rows_accepted": o.rows_accepted, "rows_revised": o.rows_revised,
            "rows_rejected": o.rows_rejected, "first_day": day(o.first_day), "last_day": day(o.last_day),
            "detail": o.detail or "", "moved_to": moved_to or ""}


def curve_rows(summary: DailySummary) -> list[dict]:
    """The ``afterward-daily`` table: one row per curve and a total row (JSON-ready: no dates)."""
    rows = []
    keys = ("files_loaded", "rows_accepted", "rows_rejected", "new_findings", "days_built", "forwards_built",
            "outcomes_realized")
    for name, c in summary.curves.items():
        rows.append({"curve": name, **{k: int(c.get(k, 0)) for k in keys},
                     "first_new_day": c.get("first_new_day") or "", "last_new_day": c.get("last_new_day") or ""})
    total = {"curve": "all", **{k: sum(r[k] for r in rows) for k in keys}}
    # files refused have no curve, but the total must count their rows
    total["files_loaded"] = summary.files_loaded
    total["rows_accepted"] = summary.rows_accepted
    total["rows_rejected"] = summary.rows_rejected
    total["new_findings"] = summary.new_findings
    total["first_new_day"] = min((r["first_new_day"] for r in rows if r["first_new_day"]), default="")
    total["last_new_day"] = max((r["last_new_day"] for r in rows if r["last_new_day"]), default="")
    rows.append(total)
    return rows


# --- tasks --------------------------------------------------------------------------------------

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


@task(name="load files", cache_policy=NO_CACHE, retries=3, retry_delay_seconds=exponential_backoff(backoff_factor=1),
      retry_jitter_factor=0.5, retry_condition_fn=_retry_condition)
def load_new_files(cfg: Config, paths: list[Path]) -> list[LoadOutcome]:
    """Load each file in its own transaction (:func:`flows.steps.load_files`).

    Retried only on a locked store or an I/O error; a retry finds the files committed before the
    failure "already loaded" and goes on with the rest.
    """
    if not paths:
        return []
    log = get_run_logger()
    outcomes = load_files(cfg, paths)
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


@task(name="check", cache_policy=NO_CACHE, retries=2, retry_delay_seconds=exponential_backoff(backoff_factor=1),
      retry_condition_fn=_retry_condition)
def check_quotes(cfg: Config, first: str | None = None, last: str | None = None) -> CheckSummary:
    """Curve-level data checks of the days whose quotes changed (:func:`flows.check_step.run_checks`)."""
    return run_checks(cfg, None, first, last)


@task(name="late curves", cache_policy=NO_CACHE, retries=2,
      retry_delay_seconds=exponential_backoff(backoff_factor=1), retry_condition_fn=_retry_condition)
def note_late(cfg: Config) -> int:
    """A ``late_curve`` finding for each curve whose last due day has no curve yet
    (:func:`flows.check_step.note_late_curves`)."""
    return note_late_curves(cfg)


@task(name="build", cache_policy=NO_CACHE, retries=2, retry_delay_seconds=exponential_backoff(backoff_factor=1),
      retry_condition_fn=_retry_condition)
def build_days(cfg: Config, first: str | None = None, last: str | None = None) -> BuildSummary:
    """Zero curves and forward surfaces for the days not yet built (:func:`flows.build_step.run_build`)."""
    return run_build(cfg, None, first, last)


@task(name="realize", cache_policy=NO_CACHE, retries=2, retry_delay_seconds=exponential_backoff(backoff_factor=1),
      retry_condition_fn=_retry_condition)
def realize_forwards(cfg: Config, curve: str | None = None) -> RealizeSummary:
    """Outcomes for forwards whose target date has been observed (:func:`flows.realize_step.run_realize`),
    for one curve or (None) all."""
    return run_realize(cfg, curve)


@task(name="audit", cache_policy=NO_CACHE, retries=2, retry_delay_seconds=exponential_backoff(backoff_factor=1),
      retry_condition_fn=_retry_condition)
def refresh_audit(cfg: Config, force: bool = False, curve: str | None = None) -> list[str]:
    """Bring the audit of one curve or (None) all up to date with the outcomes realised since the last
    one; returns the curves it changed.

    Incremental (:func:`flows.audit_step.refresh_audit_incremental`: only the new outcomes are folded into
    the stored running state, with the same rows as a full recompute); ``force`` recomputes every curve.
    """
    names = [curve] if curve else list(cfg.curves)
    if force:
        for name in names:
            run_audit(cfg, name)
        return names
    done = refresh_audit_incremental(cfg, curve)
    return [name for name, d in done.items() if d.mode != "unchanged"]


def findings_since(cfg: Config, since: object) -> dict[tuple[str, str], int]:
    """Findings raised at or after ``since`` (store clock, naive UTC), by (curve, severity)."""
    with writer(cfg.store_path) as con:
        rows = con.execute("SELECT curve, severity, count(*) FROM finding WHERE found_at >= ? GROUP BY ALL",
                           [since]).fetchall()
    return {(c, s): int(n) for c, s, n in rows}


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


# --- the flow -----------------------------------------------------------------------------------

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
    log = get_run_logger()
    summary = DailySummary()
    seconds = summary.seconds

    def timed(name: str, fn, *args, **kwargs):  # noqa: ANN001, ANN202
        t = time.perf_counter()
        out = fn(*args, **kwargs)
        seconds[name] = round(time.perf_counter() - t, 4)
        return out

    taken, changing = timed("scan", scan_inbox, cfg, settle_seconds, patience_seconds)
    summary.still_changing = [p.name for p in changing]
    outcomes = timed("load", load_new_files, cfg, taken)
    moves = timed("file away", file_away_task, cfg, outcomes)
    summary.files = [_file_record(o, m["moved_to"]) for o, m in zip(outcomes, moves, strict=True)]

    checks = timed("check", check_quotes, cfg)
    timed("late curves", note_late, cfg)
    built = timed("build", build_days, cfg)
    realized = timed("realize", realize_forwards, cfg)
    audited = timed("audit", refresh_audit, cfg)
    found = findings_since(cfg, started)

    for name in cfg.curves:
        mine = [f for f in summary.files if name in f["curves"].split(",")]
        b = built.curves.get(name, {})
        summary.curves[name] = {
            "files_loaded": sum(1 for f in mine if f["status"] == "loaded"),
            "rows_accepted": sum(f["rows_accepted"] for f in mine),
            "rows_rejected": sum(f["rows_rejected"] for f in mine),
            "new_findings": sum(n for (c, _), n in found.items() if c == name),
            "days_checked": checks.curves.get(name, {}).get("days_checked", 0),
            "days_built": b.get("days_built", 0),
            "days_held": b.get("held", 0),
            "forwards_built": b.get("forwards", 0),
            "outcomes_realized": realized.curves.get(name, {}).get("realized", 0),
            "pending_forwards": realized.curves.get(name, {}).get("pending", 0),
            "audited": name in audited,
            "first_new_day": min((f["first_day"] for f in mine if f["first_day"]), default=None),
            "last_new_day": max((f["last_day"] for f in mine if f["last_day"]), default=None),
        }
    for (_, severity), n in found.items():
        summary.findings[severity] = summary.findings.get(severity, 0) + n
    serious = summary.findings.get("reject", 0) + summary.findings.get("warn", 0)
    if summary.files_refused or summary.rows_rejected or serious:
        summary.status = COMPLETED_WITH_FINDINGS
    summary.work_seconds = round(time.perf_counter() - started_clock, 4)
    publish(summary)
    log.info("daily run %s: %d file(s) loaded, %d refused, %d rows accepted, %d rejected, %d new finding(s), "
             "%d forwards built, %d outcomes realised", summary.status, summary.files_loaded, summary.files_refused,
             summary.rows_accepted, summary.rows_rejected, summary.new_findings, summary.forwards_built,
             summary.outcomes_realized)
    return summary

