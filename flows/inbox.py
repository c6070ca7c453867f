"""The inbox: which files are ready to take, and where they go once loaded.

A file is taken only once its size and modification time stayed the same between two looks a short
interval apart; files still changing are looked at again with a growing interval, and any still
changing after that are left in the inbox for the next run. Loaded files move to ``[inbox] loaded``,
refused ones to ``[inbox] refused``; a name already there gets a ``.N`` before its suffix.
"""

from __future__ import annotations

import shutil
import time
from collections.abc import Callable
from pathlib import Path

from pipeline.config import Config
from warehouse.loads import LoadOutcome

__all__ = ["PATIENCE_SECONDS", "SETTLE_SECONDS", "file_away", "inbox_candidates", "stable_files"]

SETTLE_SECONDS = 1.0      # a file must keep its size this long before it is taken
PATIENCE_SECONDS = 8.0    # how long a run keeps looking at files that are still changing
# names that mark a file still being delivered by common copy tools
_PARTIAL_SUFFIXES = (".part", ".partial", ".tmp", ".crdownload", ".filepart", ".download")


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
