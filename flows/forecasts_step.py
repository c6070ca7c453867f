"""``afterward forecasts load`` and ``forecasts list``: a user's forecast files as a contender.

Read -> compute -> write: each file is read whole (as rate files are, :mod:`flows.load_step`: regular
files only, the readers' size limit), parsed and checked by :mod:`pipeline.forecast_intake`, and
recorded in its own transaction by :func:`warehouse.forecasts.record_forecast_file`.

The request is checked before the store is touched: the name (``[a-z][a-z0-9_]*``, not a built-in
contender), ``--curve``, ``--units`` and every file (there, a regular file, readable; the file needs
``--curve`` unless it has a ``curve`` column). Any of them wrong refuses the whole command with a
one-line :class:`ForecastRequestError` (exit 2) and nothing changes.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import duckdb
import pyarrow as pa

from flows.load_step import _NotRegular, _read_regular_file
from pipeline.config import Config
from pipeline.errors import ForecastRequestError
from pipeline.forecast_intake import ForecastRead, prepare_forecasts, read_forecast_file
from pipeline.readers import UNIT_DIVISORS, ReadLimits
from warehouse.connect import reader, writer_for
from warehouse.forecasts import forecast_listing, record_forecast_file
from warehouse.loads import LoadOutcome

__all__ = ["list_forecasts", "load_forecasts"]




@dataclass
class _Staged:
    path: Path
    data: bytes
    read: ForecastRead


def _check_request(cfg: Config, name: str, curve: str | None, units: str | None) -> None:
    from pipeline.contenders.forecasts import BUILTIN, is_user_name

    if not is_user_name(name):
        if name in BUILTIN:
            raise ForecastRequestError(f"--name {name!r} is a built-in contender ({', '.join(BUILTIN)}); "
                                       "choose another name")
        raise ForecastRequestError(f"--name {name[:40]!r} is not allowed: a lower-case letter, then lower-case "
                                   "letters, digits or _")
    if curve is not None and curve not in cfg.curves:
        raise ForecastRequestError(f"--curve {curve!r} is not a configured curve; configured: "
                                   f"{', '.join(sorted(cfg.curves))}")
    if units is not None and units not in UNIT_DIVISORS:
        raise ForecastRequestError(f"--units {units!r} is not allowed; allowed: {', '.join(UNIT_DIVISORS)}")


def _stage(path: Path, cfg: Config, curve: str | None) -> _Staged:
    try:
        data = _read_regular_file(path, ReadLimits().max_bytes)
    except _NotRegular as exc:
        raise ForecastRequestError(str(exc)) from None
    except IsADirectoryError:
        raise ForecastRequestError(f"{path} is a directory, not a forecast file") from None
    except FileNotFoundError:
        raise ForecastRequestError(f"file not found: {path}") from None
    except PermissionError:
        raise ForecastRequestError(f"cannot read {path}: permission denied") from None
    except OSError as exc:
        raise ForecastRequestError(f"cannot read {path}: {exc.strerror or exc}") from None
    c = cfg.curves[curve] if curve is not None else None
    read = read_forecast_file(data, path.name, date_format=c.date_format if c else "iso",
                              options=c.read if c else None)
    if read.error is None and curve is None and not read.has_curve_column:
        raise ForecastRequestError(f"{path.name} has no curve column: give --curve CURVE (configured: "
                                   f"{', '.join(sorted(cfg.curves))})")
    return _Staged(path, data, read)


def load_forecasts(cfg: Config, paths: Sequence[Path], name: str, curve: str | None = None,
                   units: str | None = None, *, con: duckdb.DuckDBPyConnection | None = None,
                   on_file: Callable[[LoadOutcome], None] | None = None) -> list[LoadOutcome]:
    """Load forecast files as the contender ``name``, each file in its own transaction.

    ``curve``: the curve of rows without a ``curve`` cell; ``units``: the files' units (default: each
    row's curve's ``units``). Raises :class:`ForecastRequestError` before any change for a bad
    request (see the module docstring). Returns one outcome per file, in order (``loaded``,
    ``refused`` for a file that cannot be read as a forecast file, ``already loaded``).
    """
    _check_request(cfg, name, curve, units)
    if not paths:
        raise ForecastRequestError("no forecast file given")
    staged = [_stage(Path(p), cfg, curve) for p in paths]
    outcomes = []
    with writer_for(cfg.store_path, con) as con:
        for s in staged:
            lineage = dict(contender=name, source_file=str(s.path.resolve()), file_name=s.path.name,
                           sha256=hashlib.sha256(s.data).hexdigest(), size_bytes=len(s.data), units=units,
                           curve=curve)
            if s.read.error is not None:
                outcome = record_forecast_file(con, rows=s.read.rows.iloc[0:0], rejected=s.read.rejected.iloc[0:0],
                                               error=s.read.error, **lineage)
            else:
                intake = prepare_forecasts(s.read, cfg, curve, units)
                outcome = record_forecast_file(con, rows=intake.rows, rejected=intake.rejected, **lineage)
            outcomes.append(outcome)
            if on_file is not None:
                on_file(outcome)
    return outcomes


def list_forecasts(cfg: Config) -> pa.Table:
    """What is loaded, per (contender, curve): :data:`warehouse.forecasts.LISTING_COLUMNS`."""
    with reader(cfg.store_path) as con:
        return forecast_listing(con)
