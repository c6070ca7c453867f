"""The entry: one rate file's bytes to its quote rows (:func:`read_rate_file`)."""

from __future__ import annotations

from pipeline.readers.decode import csv_grid, parquet_table, sniff_format, table_grid, xlsx_grid
from pipeline.readers.layouts import read_long, read_typed_long, read_wide
from pipeline.readers.options import ReadLimits, ReadOptions
from pipeline.readers.result import ReadResult, refuse


def read_rate_file(data: bytes, name: str = "", *, date_format: str = "iso",
                   limits: ReadLimits | None = None, options: ReadOptions | None = None) -> ReadResult:
    """Parse one rate file's bytes. Never raises on bad data (see :mod:`pipeline.readers`).

    ``date_format`` is ``iso`` (always accepted), ``day_first`` or ``month_first``. ``options``:
    title lines to skip, the ``.xlsx`` sheet and the missing markers (default :class:`ReadOptions`).
    Values are returned in the file's own units; convert them with :func:`to_decimal`.
    """
    limits = limits or ReadLimits()
    options = options or ReadOptions()
    if len(data) > limits.max_bytes:
        return refuse(f"file is {len(data):,} bytes; at most {limits.max_bytes:,} are read")
    if not data:
        return refuse("empty file: no header and no rows")
    kind = sniff_format(data, name)
    if kind == "xlsx" and name.lower().endswith(".xls"):
        return refuse("old .xls workbooks are not read; save it as .xlsx or CSV")
    try:
        if kind == "parquet":
            table = parquet_table(data, limits)
            if isinstance(table, str):
                return refuse(table)
            # a typed rate column holds no marker text; a marker that reads as a number needs the cells
            typed = None if options.missing_numbers else read_typed_long(table)
            if typed is not None:
                return typed
            grid = table_grid(table)
        elif kind == "xlsx":
            grid = xlsx_grid(data, limits, options.skip_rows, options.sheet)
        else:
            grid = csv_grid(data, limits, options.skip_rows)
        if isinstance(grid, str):
            return refuse(grid)
        lowered = {h.lower() for h in grid.header}
        if "tenor" in lowered and "rate" in lowered:
            return read_long(grid, date_format, options)
        return read_wide(grid, date_format, options)
    except MemoryError:
        return refuse("file too large to read in memory")
    except RecursionError:
        return refuse("file nests too deeply to read")
