"""The steps of afterward's jobs, callable with or without Prefect.

Each step takes typed settings and paths (never an open connection, so Prefect can hash its
arguments), opens the store through the one connection factory, and returns a small summary.
Computation lives in ``pipeline``; storage in ``warehouse``; a step only wires them together.
"""

from __future__ import annotations

import dataclasses
import hashlib
import itertools
import multiprocessing
import os
import signal
import stat
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import ProcessPoolExecutor
from datetime import datetime
from pathlib import Path

import duckdb

from pipeline.config import Config
from pipeline.errors import UserError
from pipeline.intake import load_findings, prepare_many, route_curve, validate_intakes
from pipeline.readers import ReadLimits, ReadResult, read_rate_file
from warehouse.connect import one_thread, writer_for
from warehouse.loads import FileBatch, Loader, LoadOutcome, file_batch

__all__ = ["UserError", "load_files", "prepare_files"]


class _NotRegular(UserError):
    """A path that exists but is no regular file (a named pipe, a device, a socket)."""


def _read_regular_file(path: Path, max_bytes: int) -> bytes:
    """The bytes of a regular file, at most ``max_bytes + 1`` of them (the reader refuses a longer one).

    Opened without blocking and checked before reading: a named pipe would wait forever for a writer
    and a link to a device such as /dev/zero would never end.
    """
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    with os.fdopen(fd, "rb") as f:
        mode = os.fstat(f.fileno()).st_mode
        if stat.S_ISDIR(mode):
            raise IsADirectoryError(path)
        if not stat.S_ISREG(mode):
            raise _NotRegular(f"{path.name} is not a regular file (a named pipe, device or socket); "
                              "only regular files are read")
        return f.read(max_bytes + 1)


def _read(path: Path, cfg: Config, curve: str | None) -> tuple[dict, ReadResult, str | None]:
    """Read and route one file (no store access): its lineage fields, what was read, its refusal."""
    try:
        data = _read_regular_file(path, ReadLimits().max_bytes)
    except _NotRegular as exc:
        # it is there but cannot be read as a file: recorded as refused with its reason (nothing
        # read, so the checksum is of no bytes), never skipped without a trace
        refused = dataclasses.replace(read_rate_file(b"", path.name), error=str(exc))
        base = dict(source_file=str(path.absolute()), file_name=path.name, sha256=hashlib.sha256(b"").hexdigest(),
                    size_bytes=0, curve=route_curve(cfg, path.name, curve), layout=None)
        return base, refused, refused.error
    except IsADirectoryError:
        raise UserError(f"{path} is a directory, not a rate file") from None
    except FileNotFoundError:
        raise UserError(f"file not found: {path}") from None
    except PermissionError:
        raise UserError(f"cannot read {path}: permission denied") from None
    except OSError as exc:
        raise UserError(f"cannot read {path}: {exc.strerror or exc}") from None
    routed = route_curve(cfg, path.name, curve)
    # a file no curve's glob routes (a long layout naming its curves) is read with the defaults
    date_format = cfg.curves[routed].date_format if routed else "iso"
    options = cfg.curves[routed].read if routed else None
    result = read_rate_file(data, path.name, date_format=date_format, options=options)
    base = dict(source_file=str(path.resolve()), file_name=path.name, sha256=hashlib.sha256(data).hexdigest(),
                size_bytes=len(data), curve=routed, layout=result.layout)
    error = result.error
    if error is None and routed is None and not result.rows["curve"].notna().any():
        # no glob matched and no row names its curve: refused whole, so the real cause is what the user sees
        patterns = ", ".join(f"{c.files} ({n})" for n, c in cfg.curves.items())
        error = f"matches no curve: the name fits none of the files patterns {patterns}; use --curve NAME"
    return base, result, error


def _gx_validator(rows, cfg):  # noqa: ANN001, ANN202 - the RowValidator of pipeline.intake
    from pipeline.expectations import validate_rows

    v = validate_rows(rows, cfg)
    return v.ok, v.reasons, v.check_name, v.summary


def prepare_files(paths: Sequence[Path], cfg: Config, curve: str | None = None
                  ) -> list[FileBatch | LoadOutcome]:
    """Read, route and validate files into batches (no store access).

    A file that cannot be opened at all yields a ``missing`` outcome instead of a batch. The
    row-level expectations run once per curve over all the files given.
    """
    staged: list[tuple[dict, ReadResult, str | None] | LoadOutcome] = []
    for p in paths:
        try:
            staged.append(_read(Path(p), cfg, curve))
        except UserError as exc:
            staged.append(LoadOutcome(str(p), "missing", detail=str(exc)))
    readable = [s for s in staged if not isinstance(s, LoadOutcome) and s[2] is None]
    intakes = prepare_many([s[1] for s in readable], cfg, [s[0]["curve"] for s in readable])
    validate_intakes(intakes, cfg, _gx_validator)
    by_id = {id(s): it for s, it in zip(readable, intakes, strict=True)}
    out: list[FileBatch | LoadOutcome] = []
    for s in staged:
        if isinstance(s, LoadOutcome):
            out.append(s)
            continue
        base, _result, error = s
        intake = by_id.get(id(s))
        if intake is None:
            out.append(file_batch(error=error, **base))
        else:
            out.append(file_batch(rows=intake.rows, rejected=intake.rejected, validations=intake.validations,
                                  findings=load_findings(intake, cfg), **base))
    return out


READ_AHEAD_MIN_FILES = 64


def reader_process() -> ProcessPoolExecutor | None:
    """One forked process that reads and validates files while this one records, or None where fork is missing.

    DuckDB holds the interpreter lock while it runs a statement, so a thread would not overlap with the
    store's work; a forked process does, and starts at once with everything already imported. It is
    made before the store is opened, so it never inherits the connection.
    """
    if "fork" not in multiprocessing.get_all_start_methods():
        return None
    return ProcessPoolExecutor(max_workers=1, mp_context=multiprocessing.get_context("fork"),
                               initializer=_quiet_reader)


def _quiet_reader() -> None:
    # Ctrl-C is the recording process's to handle; the reader just stops when that one does
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def load_files(cfg: Config, paths: Iterable[Path], curve: str | None = None,
               on_file: Callable[[LoadOutcome], None] | None = None, chunk: int = 120,
               read_ahead: bool | None = None, reprocess: bool = False, *, known_since: datetime | None = None,
               con: duckdb.DuckDBPyConnection | None = None,
               reader: ProcessPoolExecutor | None = None) -> list[LoadOutcome]:
    """Load each file in its own transaction; returns one outcome per file, in order.

    ``con``: the store to use (default: open one for the call). ``reader``: a reading process made
    by :func:`reader_process` before the store was opened, used to read ahead (a process forked
    while the store is open would inherit it, so none is made here when ``con`` is given).

    ``reprocess`` loads files whose content was already loaded into the same curve once more, as new
    loads that say so (for a file read under a config since corrected). ``known_since`` (naive UTC,
    not after now) records when the files' data was first available, for history loaded later than
    it was known; the load time stays recorded beside it (``as-known-at`` reads the earlier of them).

    Files are read and validated in chunks, then recorded one transaction per file through the one
    writer, so a failure part-way leaves every earlier file committed and the rest untouched. With
    ``read_ahead`` (by default: from :data:`READ_AHEAD_MIN_FILES` files up), a second process reads
    and validates the next chunks while this one records; the outcome is the same either way.
    """
    files = list(paths)
    if read_ahead is None:
        read_ahead = len(files) >= READ_AHEAD_MIN_FILES
    # reading ahead, the first chunk is read here before anything can be recorded: keep it short
    first = min(chunk, 24) if read_ahead else chunk
    chunks = [files[:first]] + [files[i:i + chunk] for i in range(first, len(files), chunk)] if files else []
    outcomes: list[LoadOutcome] = []
    own = reader is None and con is None and read_ahead and len(chunks) > 1
    ahead = reader_process() if own else (reader if read_ahead and len(chunks) > 1 else None)
    try:
        if ahead is not None:
            # the first chunk is read here while the reader starts on the second
            later = [ahead.submit(prepare_files, c, cfg, curve) for c in chunks[1:]]
            parts: Iterable = itertools.chain([prepare_files(chunks[0], cfg, curve)], (f.result() for f in later))
        else:
            parts = (prepare_files(c, cfg, curve) for c in chunks)
        with writer_for(cfg.store_path, con) as con, one_thread(con):
            loader = Loader(con, known_since)
            for items in parts:
                loader.prefetch([i for i in items if isinstance(i, FileBatch)])
                for item in items:
                    outcome = item if isinstance(item, LoadOutcome) else loader.record(item, reprocess)
                    outcomes.append(outcome)
                    if on_file is not None:
                        on_file(outcome)
    except BaseException:
        if ahead is not None and own:
            ahead.shutdown(wait=False, cancel_futures=True)
            ahead = None
        raise
    finally:
        if ahead is not None and own:  # a reader given by the caller is the caller's to stop
            ahead.shutdown(wait=True)
    return outcomes
