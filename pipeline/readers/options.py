"""How a curve's files are read, and the units their values come in.

:class:`ReadOptions` (the ``read.*`` config keys), :class:`ReadLimits` (bounds against hostile files),
the default missing markers, and the conversion of file units to decimals. Imported by the config
loader, so it imports nothing else of the readers.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

UNIT_DIVISORS = {"percent": 100.0, "decimal": 1.0, "bp": 10_000.0}
# a finite decimal number as written in a text cell (a missing marker such as -999 included)
NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,3})?$")


# Cells that mean "no quote today" in spreadsheet and database exports, matched after trimming and
# ignoring case. Not among them: NaN and inf (a program's arithmetic failed: rejected, so it is seen)
# and spreadsheet errors such as #VALUE!, #REF!, #DIV/0! (a broken formula: rejected likewise).
DEFAULT_MISSING = ("", "N/A", "#N/A", "NA", "-", "--", "null")


@dataclass(frozen=True)
class ReadOptions:
    """How to read one curve's files (``read.*`` in the config).

    ``skip_rows``: lines (sheet rows) above the header to skip, blank ones included (CSV and
    ``.xlsx``; Parquet has no title lines). ``sheet``: the ``.xlsx`` sheet, by name or 0-based
    number. ``missing``: rate cells holding one of these (trimmed, any case) are missing quotes; an
    empty cell always is.
    """

    skip_rows: int = 0
    sheet: str | int = 0
    missing: tuple[str, ...] = DEFAULT_MISSING

    @property
    def missing_set(self) -> frozenset[str]:
        return frozenset(m.strip().lower() for m in self.missing) | {""}

    @property
    def missing_numbers(self) -> frozenset[float]:
        """The markers that read as numbers (``-999``): a rate equal to one is missing, however it
        is written (``-999``, ``-999.0``, a float cell)."""
        return frozenset(float(m) for m in (x.strip() for x in self.missing) if NUMBER.match(m))


DEFAULT_OPTIONS = ReadOptions()


@dataclass(frozen=True)
class ReadLimits:
    """Bounds that keep a hostile file from using unbounded time or memory."""

    max_bytes: int = 256 * 1024 * 1024
    max_columns: int = 2_000
    max_field_chars: int = 10_000
    max_xlsx_uncompressed: int = 512 * 1024 * 1024
    max_xlsx_ratio: float = 200.0
    max_lines: int = 2_000_000          # data lines (rows of a sheet or Parquet file); a longer file is refused


def to_decimal(values: np.ndarray, units: str) -> np.ndarray:
    """File units (``percent``, ``decimal`` or ``bp``) to decimals (0.0525 = 5.25 %).

    Percent and bp are rounded to 14 decimals after dividing, so that 4.10 % is stored as 0.041 and
    not 0.040999999999999995 (far below any quoted precision: 1e-10 bp)."""
    divisor = UNIT_DIVISORS[units]
    out = np.asarray(values, dtype=float) / divisor
    if divisor == 1.0:
        return out
    # rounding scales by 1e14 first, which overflows above ~1.8e294: such values are kept unrounded
    # (and later refused as out of range with their true size, not as inf)
    with np.errstate(over="ignore", invalid="ignore"):
        rounded = np.round(out, 14)
    return np.where(np.isfinite(rounded), rounded, out)

