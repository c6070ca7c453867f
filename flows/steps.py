"""The steps of afterward's jobs, callable with or without Prefect.

Each step takes typed settings and paths (never an open connection, so Prefect can hash its
arguments), opens the store through the one connection factory, and returns a small summary.
Computation lives in ``pipeline``; storage in ``warehouse``; a step only wires them together.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable
from pathlib import Path

from pipeline.config import Config
from pipeline.intake import prepare_quotes, route_curve
from pipeline.readers import read_rate_file
from warehouse.connect import writer
from warehouse.loads import FileBatch, LoadOutcome, record_load

__all__ = ["UserError", "prepare_file", "load_files"]


class UserError(RuntimeError):
    """A mistake in what the user asked for; the message is one line."""


def prepare_file(path: Path, cfg: Config, curve: str | None = None) -> FileBatch:
    """Read, route and validate one file into a batch (no store access)."""
    try:
        data = path.read_bytes()
    except IsADirectoryError:
        raise UserError(f"{path} is a directory, not a rate file") from None
    except FileNotFoundError:
        raise UserError(f"file not found: {path}") from None
    except PermissionError:
        raise UserError(f"cannot read {path}: permission denied") from None
    sha = hashlib.sha256(data).hexdigest()
    routed = route_curve(cfg, path.name, curve)
    date_format = cfg.curves[routed].date_format if routed else "iso"
    result = read_rate_file(data, path.name, date_format=date_format)
    base = dict(source_file=str(path.resolve()), file_name=path.name, sha256=sha, size_bytes=len(data), curve=routed,
                layout=result.layout)
    if result.error is not None:
        return FileBatch(rows=result.rows, rejected=result.rejected, error=result.error, **base)
    intake = prepare_quotes(result, cfg, routed, validator=_row_validator())
    return FileBatch(rows=intake.rows, rejected=intake.rejected, validations=intake.validations, **base)


def _row_validator():  # noqa: ANN202 - returns the pipeline's validator when it is available
    try:
        from pipeline.expectations import validator_for_intake
    except ImportError:
        return None
    return validator_for_intake


def load_files(cfg: Config, paths: Iterable[Path], curve: str | None = None,
               on_file: Callable[[LoadOutcome], None] | None = None) -> list[LoadOutcome]:
    """Load each file in its own transaction; returns one outcome per file, in order."""
    outcomes: list[LoadOutcome] = []
    with writer(cfg.store_path) as con:
        for p in paths:
            try:
                batch = prepare_file(Path(p), cfg, curve)
            except UserError as exc:
                # nothing to record: there are no bytes to checksum
                outcome = LoadOutcome(str(p), "missing", detail=str(exc))
            else:
                outcome = record_load(con, batch)
            outcomes.append(outcome)
            if on_file is not None:
                on_file(outcome)
    return outcomes
