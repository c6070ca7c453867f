"""One job at a time per store: the run lock beside the store file.

The store's own lock is taken and released many times during a job (each step opens and closes it), so
two daily runs started together would interleave: the second finds the inbox emptied under it and
reports files it could not find. A job therefore takes :func:`run_lock` for its whole length first; a
second job stops at once with :class:`RunInProgress`, naming the first. The lock is an advisory
``flock`` on ``<store>.run-lock``, released by the kernel when its process ends, so a killed run never
leaves it stuck.
"""

from __future__ import annotations

import json
import os
import socket
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from pipeline.errors import RunInProgress

__all__ = ["RunInProgress", "run_lock", "run_lock_path"]

try:
    import fcntl
except ImportError:  # pragma: no cover - not on the supported platforms
    fcntl = None  # type: ignore[assignment]

# re-entrant within one process: the command takes the lock before Prefect starts, the flow again inside
_HELD: dict[str, tuple[int, int]] = {}


def run_lock_path(store_path: str | os.PathLike[str]) -> Path:
    p = Path(store_path)
    return p.with_name(p.name + ".run-lock")


def _holder(fd: int) -> str:
    try:
        os.lseek(fd, 0, os.SEEK_SET)
        info = json.loads(os.read(fd, 4096).decode("utf-8") or "{}")
    except (OSError, ValueError):
        info = {}
    if not info:
        return "another afterward job"
    return (f"afterward {info.get('job', 'job')} (process {info.get('pid', '?')} on {info.get('host', '?')}, "
            f"started {info.get('started_at', '?')} UTC)")


@contextmanager
def run_lock(store_path: str | os.PathLike[str], job: str) -> Iterator[None]:
    """Hold the run lock of the store at ``store_path`` for the block; ``job`` names it for a second
    job's message. Raises :class:`RunInProgress` at once (no waiting) when another process holds it."""
    path = run_lock_path(store_path)
    key = str(path.resolve())
    if key in _HELD:
        fd, depth = _HELD[key]
        _HELD[key] = (fd, depth + 1)
        try:
            yield
        finally:
            fd, depth = _HELD[key]
            _HELD[key] = (fd, depth - 1)
        return
    path.parent.mkdir(parents=True, exist_ok=True)
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        if fcntl is not None:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                raise RunInProgress(f"{_holder(fd)} is already running on {store_path}; this {job} stopped "
                                    "without doing anything") from None
        from warehouse.loads import utc_now

        os.ftruncate(fd, 0)
        os.lseek(fd, 0, os.SEEK_SET)
        os.write(fd, json.dumps({"job": job, "pid": os.getpid(), "host": socket.gethostname(),
                                 "started_at": utc_now().isoformat(timespec="seconds")}).encode("utf-8"))
        _HELD[key] = (fd, 1)
        try:
            yield
        finally:
            del _HELD[key]
            os.ftruncate(fd, 0)
    finally:
        os.close(fd)
