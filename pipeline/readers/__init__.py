"""Readers: the bytes of a rate file in, a frame of quote rows and a frame of rejected rows out.

Formats: CSV (delimiter sniffed among ``, ; TAB |``, optional BOM, quoted fields), Parquet and Excel
``.xlsx`` (the first sheet, or the one :class:`ReadOptions` names). Layouts, detected from the header:

* wide: a date column (``date``, ``as_of`` or else the first column) and one column per tenor label;
* long: columns ``date`` (or ``as_of``), ``tenor``, ``rate`` and optionally ``curve``.

A *row* is one quote: one date and tenor with a non-empty value. A line that cannot be split into
quotes (a garbled date, the wrong number of fields) counts as one rejected row. So for every file,
rows read = rows accepted + rows rejected. Empty rate cells, and rate cells holding one of the
missing markers of :class:`ReadOptions` (``N/A``, ``#N/A``, ``-`` ... by default), are missing
quotes, not zeros, and are not rows. Line numbers count the header as line 1 in every format, unless
title lines are skipped above it (``skip_rows``): then they are the file's own line (sheet row)
numbers, the ones a user finds in an editor.

The modules, in the order a file goes through them:

* :mod:`~pipeline.readers.read`: :func:`read_rate_file`, the entry;
* :mod:`~pipeline.readers.decode`: bytes to a grid of text cells (format, encoding, delimiter,
  ``.xlsx`` and Parquet opening, size limits);
* :mod:`~pipeline.readers.layouts`: the grid to quote rows (wide and long layouts);
* :mod:`~pipeline.readers.cells`: text cells to dates, numbers and tenor labels;
* :mod:`~pipeline.readers.options` (:class:`ReadOptions`, :class:`ReadLimits`, units) and
  :mod:`~pipeline.readers.result` (:class:`ReadResult`).

Nothing here raises on bad data: a file that cannot be read at all comes back with ``error`` set.
"""

from __future__ import annotations

from pipeline.readers.options import DEFAULT_MISSING, UNIT_DIVISORS, ReadLimits, ReadOptions, to_decimal
from pipeline.readers.read import read_rate_file
from pipeline.readers.result import ReadResult

__all__ = ["DEFAULT_MISSING", "ReadLimits", "ReadOptions", "ReadResult", "read_rate_file", "to_decimal",
           "UNIT_DIVISORS"]
