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

Nothing here raises on bad data: a file that cannot be read at all comes back with ``error`` set.
"""

from __future__ import annotations

import csv
import io
import math
import re
import zipfile
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from pipeline.tenors import TenorError, parse_tenor

__all__ = ["DEFAULT_MISSING", "ReadLimits", "ReadOptions", "ReadResult", "read_rate_file", "to_decimal",
           "UNIT_DIVISORS"]

UNIT_DIVISORS = {"percent": 100.0, "decimal": 1.0, "bp": 10_000.0}
_DATE_NAMES = ("date", "as_of", "asof", "as of", "observation_date")
_ROW_COLUMNS = ["line", "as_of", "tenor", "value", "curve", "raw"]
_REJECT_COLUMNS = ["line", "raw", "reason"]
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,3})?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


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
        return frozenset(float(m) for m in (x.strip() for x in self.missing) if _NUMBER.match(m))


_DEFAULT_OPTIONS = ReadOptions()


@dataclass(frozen=True)
class ReadLimits:
    """Bounds that keep a hostile file from using unbounded time or memory."""

    max_bytes: int = 256 * 1024 * 1024
    max_columns: int = 2_000
    max_field_chars: int = 10_000
    max_xlsx_uncompressed: int = 512 * 1024 * 1024
    max_xlsx_ratio: float = 200.0
    max_lines: int = 2_000_000          # data lines (rows of a sheet or Parquet file); a longer file is refused


def _too_many_lines(limits: ReadLimits) -> str:
    return f"more than {limits.max_lines:,} data lines; at most {limits.max_lines:,} are read (split the file)"


@dataclass
class ReadResult:
    """What a reader found in one file.

    ``rows``: ``line`` (int), ``as_of`` (datetime64[D]), ``tenor`` (canonical label), ``value``
    (float, in the file's units), ``curve`` (str or None, from a long layout's ``curve`` column),
    ``raw`` (the source line). ``rejected``: ``line``, ``raw``, ``reason``. ``error`` is set when the
    file could not be read at all; then both frames are empty.
    """

    rows: pd.DataFrame
    rejected: pd.DataFrame
    layout: str | None = None
    error: str | None = None
    columns: list[str] = field(default_factory=list)

    @property
    def rows_read(self) -> int:
        return len(self.rows) + len(self.rejected)


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


_EMPTY_ROWS: pd.DataFrame | None = None
_EMPTY_REJECTED: pd.DataFrame | None = None


def _empty_rows() -> pd.DataFrame:
    global _EMPTY_ROWS
    if _EMPTY_ROWS is None:
        _EMPTY_ROWS = _new_empty_rows()
    return _EMPTY_ROWS.copy()


def _empty_rejected() -> pd.DataFrame:
    # most files have no rejected rows, and building an empty frame costs about a millisecond
    global _EMPTY_REJECTED
    if _EMPTY_REJECTED is None:
        _EMPTY_REJECTED = _new_empty_rejected()
    return _EMPTY_REJECTED.copy()


def _new_empty_rows() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "line": pd.Series([], dtype="int64"),
            "as_of": pd.Series([], dtype="datetime64[s]"),
            "tenor": pd.Series([], dtype="object"),
            "value": pd.Series([], dtype="float64"),
            "curve": pd.Series([], dtype="object"),
            "raw": pd.Series([], dtype="object"),
        }
    )


def _new_empty_rejected() -> pd.DataFrame:
    return pd.DataFrame(
        {"line": pd.Series([], dtype="int64"), "raw": pd.Series([], dtype="object"),
         "reason": pd.Series([], dtype="object")}
    )


def _refuse(reason: str) -> ReadResult:
    return ReadResult(_empty_rows(), _empty_rejected(), None, reason)


# --- turning bytes into a grid of text cells ----------------------------------------------------

@dataclass
class _Grid:
    header: list[str]
    records: list[list[str]]
    lines: list[int]
    raws: list[str]
    decimal_comma: bool = False


def _decode(data: bytes) -> str:
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    elif data.startswith((b"\xff\xfe", b"\xfe\xff")):
        # a truncated or odd-length UTF-16 file: the broken tail becomes U+FFFD and fails as a cell
        return data.decode("utf-16", errors="replace")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        # files from older spreadsheet exports are often Windows-1252; latin-1 never fails
        try:
            return data.decode("cp1252")
        except UnicodeDecodeError:
            return data.decode("latin-1")


_DELIMITERS = ",;\t|"


def _plain_delimiter(sample: str) -> str | None:
    """The delimiter of a sample that leaves no doubt, or None: no quote characters, and exactly one
    candidate delimiter, found the same number of times on every non-empty line. There ``csv.Sniffer``
    finds that same one (its quote rule needs a quote; its count rule sees one consistent candidate),
    at a fraction of the cost; a property test holds the two equal."""
    if '"' in sample or "'" in sample:
        return None
    present = [d for d in _DELIMITERS if d in sample]
    if len(present) != 1:
        return None
    d = present[0]
    counts = {line.count(d) for line in sample.split("\n") if line}
    return d if len(counts) == 1 else None


def _sniff_delimiter(sample: str) -> str:
    return _plain_delimiter(sample) or _sniffed_delimiter(sample)


def _sniffed_delimiter(sample: str) -> str:
    try:
        return csv.Sniffer().sniff(sample, delimiters=_DELIMITERS).delimiter
    except csv.Error:
        first = sample.split("\n", 1)[0]
        counts = {d: first.count(d) for d in ",;\t|"}
        best = max(counts, key=lambda d: counts[d])
        return best if counts[best] else ","


def _csv_grid(data: bytes, limits: ReadLimits, skip_rows: int = 0) -> _Grid | str:
    if b"\x00" in data[:8192] and not data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "binary file: not a CSV, Parquet or .xlsx rate file"
    text = _decode(data).replace("\r\n", "\n").replace("\r", "\n")
    if not text.strip():
        return "empty file: no header and no rows"
    if skip_rows:
        # title lines go before sniffing: their commas and words would mislead the delimiter
        parts = text.split("\n", skip_rows)
        if len(parts) <= skip_rows or not parts[skip_rows].strip():
            return f"no header after the {skip_rows} line(s) read.skip_rows skips"
        text = parts[skip_rows]
    first_lines = "\n".join(text.split("\n", 20)[:20])
    delimiter = _sniff_delimiter(first_lines)
    physical = text.split("\n")
    reader = csv.reader(io.StringIO(text), delimiter=delimiter, quotechar='"', skipinitialspace=True)
    header: list[str] | None = None
    records: list[list[str]] = []
    lines: list[int] = []
    raws: list[str] = []
    start = 1
    try:
        for record in reader:
            end = reader.line_num
            if not any(c.strip() for c in record):
                # a blank line (or one of bare delimiters) holds no quote: not a row, not a rejection
                start = end + 1
                continue
            if header is None:
                if len(record) > limits.max_columns:
                    return f"header has {len(record):,} columns; at most {limits.max_columns:,} are read"
                header = [c.strip() for c in record]
                start = end + 1
                continue
            if len(records) >= limits.max_lines:
                return _too_many_lines(limits)
            if any(len(c) > limits.max_field_chars for c in record) or len(record) > limits.max_columns:
                records.append(["\x00too-long"])
            else:
                records.append(record)
            lines.append(start + skip_rows)
            raw = "\n".join(physical[start - 1:end])
            raws.append(raw if len(raw) <= 500 else raw[:500] + "...")
            start = end + 1
    except csv.Error as exc:
        return f"line {start + skip_rows}: cannot be split into fields ({exc})"
    if header is None:
        return "empty file: no header and no rows"
    return _Grid(header, records, lines, raws, decimal_comma=delimiter == ";")


def _cell_text(v: object) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        if math.isnan(v):
            return ""
        return repr(v)
    if hasattr(v, "isoformat"):
        return v.isoformat()[:10]
    return str(v)


def _parquet_table(data: bytes, limits: ReadLimits):  # noqa: ANN202 - a pyarrow Table, or the refusal
    import pyarrow.parquet as pq

    try:
        # the footer's counts first: a small file can declare (and RLE-pack) billions of rows
        meta = pq.ParquetFile(io.BytesIO(data)).metadata
        if meta.num_columns > limits.max_columns:
            return f"{meta.num_columns:,} columns; at most {limits.max_columns:,} are read"
        if meta.num_rows > limits.max_lines:
            return _too_many_lines(limits)
        table = pq.read_table(io.BytesIO(data))
    except Exception as exc:  # pyarrow raises several unrelated types for corrupt files
        return f"not a readable Parquet file ({type(exc).__name__}: {str(exc).splitlines()[0][:200]})"
    if table.num_columns > limits.max_columns:
        return f"{table.num_columns:,} columns; at most {limits.max_columns:,} are read"
    return table


def _table_grid(table) -> _Grid:  # noqa: ANN001 - a pyarrow Table
    header = [str(c).strip() for c in table.column_names]
    cols = [[_cell_text(v) for v in col.to_pylist()] for col in table.columns]
    records = [list(r) for r in zip(*cols, strict=True)] if cols else []
    lines = list(range(2, len(records) + 2))
    raws = [",".join(r) for r in records]
    return _Grid(header, records, lines, raws)


# date32 day numbers of 1000-01-01 and 9999-12-31: inside these, ISO text and the date parser agree
_TYPED_DAYS = (-354285, 2932896)


def _typed_long(table) -> ReadResult | None:  # noqa: ANN001 - a pyarrow Table
    """A long-layout Parquet table with typed, clean columns, read column-wise without text cells.

    The same rows, values and raw text as reading every cell as text (a property test holds the two
    equal). Returns None whenever any row would need that path: a null date or tenor, a tenor that is
    not a label, an infinite rate, a column of another type or name. The text path then reads it.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    header = [str(c).strip() for c in table.column_names]
    lowered = [h.lower() for h in header]
    date_cols = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if (len(date_cols) != 1 or lowered.count("tenor") != 1 or lowered.count("rate") != 1
            or lowered.count("curve") > 1 or not set(lowered) <= {"tenor", "rate", "curve", *_DATE_NAMES}):
        return None
    cols = [c.combine_chunks() for c in table.columns]
    n = table.num_rows
    d, t, r = cols[date_cols[0]], cols[lowered.index("tenor")], cols[lowered.index("rate")]
    c = cols[lowered.index("curve")] if "curve" in lowered else None
    strings = (pa.types.is_string(t.type) or pa.types.is_large_string(t.type))
    if not strings or not pa.types.is_floating(r.type) or d.null_count or t.null_count:
        return None
    if c is not None and not (pa.types.is_string(c.type) or pa.types.is_large_string(c.type)):
        return None
    if pa.types.is_date32(d.type):
        day = d.to_numpy(zero_copy_only=False).astype("datetime64[D]")
    elif pa.types.is_timestamp(d.type) and d.type.tz is None:
        day = d.to_numpy(zero_copy_only=False).astype("datetime64[D]")   # floors, as the ISO text's date does
    else:
        return None
    day_no = day.view(np.int64)
    if n and (day_no.min() < _TYPED_DAYS[0] or day_no.max() > _TYPED_DAYS[1]):
        return None
    enc = pc.dictionary_encode(t)
    labels: list[str | None] = []
    for text in enc.dictionary.to_pylist():
        try:
            labels.append(parse_tenor(text).label)
        except TenorError:
            return None
    value = r.cast(pa.float64()).to_numpy(zero_copy_only=False)   # nulls come back as NaN
    if np.isinf(value).any():
        return None
    # the raw line: each cell as the text path writes it, joined in the file's column order
    texts: list[list[str]] = []
    for i, col in enumerate(cols):
        if i == date_cols[0]:
            texts.append(day.astype(str).tolist())
        elif col is r:
            texts.append(["" if v is None or v != v else repr(v) for v in col.to_pylist()])
        else:
            texts.append(["" if v is None else v for v in col.to_pylist()])
    keep = ~np.isnan(value)            # an empty rate is a missing quote, not a row
    raws = np.array(list(map(",".join, zip(*texts, strict=True))) if texts else [], dtype=object)
    tenor = np.array(labels, dtype=object)[enc.indices.to_numpy(zero_copy_only=False)]
    if c is not None:
        curve = np.array([(v.strip() or None) if v is not None else None for v in c.to_pylist()], dtype=object)
    else:
        curve = np.full(n, None, dtype=object)
    if not keep.all():
        day, tenor, value, curve, raws = day[keep], tenor[keep], value[keep], curve[keep], raws[keep]
    if not len(value):
        return ReadResult(_empty_rows(), _empty_rejected(), "long", None, header)
    rows = pd.DataFrame({
        "line": (np.flatnonzero(keep) + 2).astype(np.int64), "as_of": day.astype("datetime64[s]"),
        "tenor": pd.Series(tenor, dtype=object), "value": value, "curve": pd.Series(curve, dtype=object),
        "raw": pd.Series(raws, dtype=object),
    })
    return ReadResult(rows, _empty_rejected(), "long", None, header)


def _xlsx_grid(data: bytes, limits: ReadLimits, skip_rows: int = 0, sheet: str | int = 0) -> _Grid | str:
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            total = sum(i.file_size for i in zf.infolist())
            packed = max(sum(i.compress_size for i in zf.infolist()), 1)
    except zipfile.BadZipFile:
        return "not a readable .xlsx file (not a zip archive)"
    if total > limits.max_xlsx_uncompressed or total / packed > limits.max_xlsx_ratio:
        return f"refused .xlsx: it unpacks to {total:,} bytes from {packed:,} (a compression bomb?)"
    import openpyxl

    try:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
        try:
            ws = _pick_sheet(wb, sheet)
            if isinstance(ws, str):
                return ws
            return _sheet_grid(ws, limits, skip_rows)
        finally:
            wb.close()
    except Exception as exc:  # openpyxl surfaces many error types for malformed workbooks
        return f"not a readable .xlsx file ({type(exc).__name__}: {str(exc).splitlines()[0][:200] if str(exc) else ''})"


def _pick_sheet(wb, sheet: str | int):  # noqa: ANN001, ANN202 - an openpyxl workbook; a sheet or a refusal
    names = wb.sheetnames
    shown = ", ".join(repr(n) for n in names[:20]) + (", ..." if len(names) > 20 else "")
    if isinstance(sheet, int):
        if 0 <= sheet < len(names):
            return wb.worksheets[sheet]
        return f"no sheet number {sheet} (read.sheet counts from 0); the workbook's sheets: {shown}"
    for n in names:
        if n == sheet:
            return wb[n]
    for n in names:
        if n.strip().lower() == sheet.strip().lower():
            return wb[n]
    return f"no sheet named {sheet[:60]!r} (read.sheet); the workbook's sheets: {shown}"


def _sheet_grid(ws, limits: ReadLimits, skip_rows: int = 0) -> _Grid | str:  # noqa: ANN001 - an openpyxl read-only worksheet
    # The sheet's declared size is the file's claim, not a fact: a 5 KB workbook can declare
    # A1:XFD1048576 and openpyxl would pad every row to it (17 G cells). Ignore it, find the header
    # with rows cut at max_columns + 1 cells, then read data rows only as wide as the header.
    ws.reset_dimensions()
    header: list[str] | None = None
    first = 0
    rows = ws.iter_rows(min_row=skip_rows + 1, max_col=limits.max_columns + 1, values_only=True)
    for i, r in enumerate(rows, start=skip_rows + 1):
        if any(_cell_text(c).strip() for c in r):
            header, first = [_cell_text(c).strip() for c in r], i
            break
    if header is None:
        if skip_rows:
            return f"no header after the {skip_rows} row(s) read.skip_rows skips"
        return "empty workbook: no header and no rows"
    while header and not header[-1]:
        header.pop()
    if len(header) > limits.max_columns:
        return f"more than {limits.max_columns:,} columns; at most {limits.max_columns:,} are read"
    records, lines, raws = [], [], []
    for i, r in enumerate(ws.iter_rows(min_row=first + 1, max_col=len(header), values_only=True), start=first + 1):
        if all(c is None for c in r):
            continue
        cells = [_cell_text(c) for c in r]
        if not any(c.strip() for c in cells):
            continue
        if len(records) >= limits.max_lines:
            return _too_many_lines(limits)
        records.append(cells)
        lines.append(i)
        raws.append(",".join(cells))
    return _Grid(header, records, lines, raws)


# --- parsing text cells ------------------------------------------------------------------------
#
# Rate files are small and many (a month of one curve is a few hundred cells), so parsing is one
# plain pass over the cells with a per-file cache of date strings: per-column pandas string
# operations cost more in call overhead than the whole file takes this way.

_FORMATS = {
    "iso": ("%Y-%m-%d", "%Y/%m/%d", "%Y%m%d"),
    "day_first": ("%d/%m/%Y", "%d.%m.%Y", "%d-%m-%Y"),
    "month_first": ("%m/%d/%Y", "%m-%d-%Y"),
}


class _DateParser:
    """Date text to ``datetime64[D]`` (or ``None``); ISO forms always, day-/month-first if configured."""

    def __init__(self, date_format: str) -> None:
        self.formats = _FORMATS["iso"] + (_FORMATS[date_format] if date_format != "iso" else ())
        self.cache: dict[str, np.datetime64 | None] = {}

    def __call__(self, text: str) -> np.datetime64 | None:
        try:
            return self.cache[text]
        except KeyError:
            pass
        from datetime import datetime

        value = None
        t = text.strip()
        if "T" in t[10:11] or " " in t[10:11]:
            t = t[:10]           # a timestamp at midnight from a spreadsheet or Parquet file
        for fmt in self.formats:
            try:
                value = np.datetime64(datetime.strptime(t, fmt).date(), "D")
                break
            except ValueError:
                continue
        if len(self.cache) < 100_000:
            self.cache[text] = value
        return value


def parse_dates(text: pd.Series, date_format: str) -> pd.Series:
    """Parse a Series of date text; ``NaT`` where a cell is not a real date (2031-02-30 is not)."""
    parse = _DateParser(date_format)
    values = [parse(str(t)) for t in text]
    return pd.Series(np.array([v if v is not None else np.datetime64("NaT") for v in values],
                              dtype="datetime64[D]"), index=text.index).astype("datetime64[s]")


class _NumberParser:
    """:func:`_parse_number` with a per-file cache of cell texts: a rate file repeats its numbers (a
    flood of one line repeats every one), and the cache spares the pattern match for each repeat."""

    def __init__(self, decimal_comma: bool) -> None:
        self.decimal_comma = decimal_comma
        self.cache: dict[str, float | str] = {}

    def __call__(self, cell: str) -> float | str:
        try:
            return self.cache[cell]
        except KeyError:
            pass
        v = _parse_number(cell, self.decimal_comma)
        if len(self.cache) < 100_000:
            self.cache[cell] = v
        return v


def _parse_number(cell: str, decimal_comma: bool) -> float | str:
    """A finite number from a text cell, or the reason it is not one (a string)."""
    t = cell.strip().rstrip("%").strip()
    if decimal_comma and _DECIMAL_COMMA.match(t):
        t = t.replace(",", ".")
    if not _NUMBER.match(t):
        return f"unparseable: rate {cell[:40]!r} is not a finite number"
    v = float(t)
    if not math.isfinite(v):
        return f"unparseable: rate {cell[:40]!r} is not a finite number"
    return v


def _tenor_labels(names: list[str]) -> tuple[list[str | None], list[str]]:
    labels: list[str | None] = []
    bad: list[str] = []
    for n in names:
        try:
            labels.append(parse_tenor(n).label)
        except TenorError:
            labels.append(None)
            bad.append(n)
    return labels, bad


class _Collector:
    """Accumulates accepted quotes and rejected rows as plain lists, framed once at the end."""

    def __init__(self) -> None:
        self.line: list[int] = []
        self.as_of: list[np.datetime64] = []
        self.tenor: list[str] = []
        self.value: list[float] = []
        self.curve: list[str | None] = []
        self.raw: list[str] = []
        self.rej: list[tuple[int, str, str]] = []

    def accept(self, line: int, as_of: np.datetime64, tenor: str, value: float, curve: str | None,
               raw: str) -> None:
        self.line.append(line)
        self.as_of.append(as_of)
        self.tenor.append(tenor)
        self.value.append(value)
        self.curve.append(curve)
        self.raw.append(raw)

    def reject(self, line: int, raw: str, reason: str) -> None:
        self.rej.append((line, raw, reason))

    def result(self, layout: str, header: list[str]) -> ReadResult:
        if self.line:
            rows = pd.DataFrame({
                "line": np.asarray(self.line, dtype=np.int64),
                "as_of": np.asarray(self.as_of, dtype="datetime64[D]").astype("datetime64[s]"),
                "tenor": pd.Series(self.tenor, dtype=object),
                "value": np.asarray(self.value, dtype=float),
                "curve": pd.Series(self.curve, dtype=object),
                "raw": pd.Series(self.raw, dtype=object),
            })
        else:
            rows = _empty_rows()
        if self.rej:
            line, raw, reason = zip(*self.rej, strict=True)
            rejected = pd.DataFrame({"line": np.asarray(line, dtype=np.int64), "raw": pd.Series(raw, dtype=object),
                                     "reason": pd.Series(reason, dtype=object)})
        else:
            rejected = _empty_rejected()
        return ReadResult(rows, rejected, layout, None, header)


def _wide(grid: _Grid, date_format: str, options: ReadOptions = _DEFAULT_OPTIONS) -> ReadResult:
    header = grid.header
    lowered = [h.lower() for h in header]
    date_cols = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if len(date_cols) > 1:
        names = ", ".join(header[i] for i in date_cols)
        return _refuse(f"two date columns in the header ({names}); keep one")
    date_col = date_cols[0] if date_cols else 0
    tenor_cols = [i for i in range(len(header)) if i != date_col]
    if not tenor_cols:
        return _refuse("header has no tenor columns (expected e.g. date,3M,1Y,10Y or date,tenor,rate; "
                       "title lines above the header are skipped with read.skip_rows)")
    labels, bad = _tenor_labels([header[i] for i in tenor_cols])
    seen: dict[str, str] = {}
    for i, lab in zip(tenor_cols, labels, strict=True):
        if lab is not None and lab in seen:
            return _refuse(f"header names tenor {lab} twice ({seen[lab]!r} and {header[i]!r})")
        if lab is not None:
            seen[lab] = header[i]
    if len(bad) == len(labels):
        shown = ", ".join(repr(b) for b in bad[:3])
        return _refuse(f"no column of the header is a tenor label ({shown}...)")

    n_cols = len(header)
    columns = list(zip(tenor_cols, labels, strict=True))
    missing, numbers = options.missing_set, options.missing_numbers
    parse_date = _DateParser(date_format)
    parse_number = _NumberParser(grid.decimal_comma)
    out = _Collector()
    for record, line, raw in zip(grid.records, grid.lines, grid.raws, strict=True):
        if record[:1] == ["\x00too-long"]:
            out.reject(line, raw, "unparseable: a field is longer than the reader accepts")
            continue
        if len(record) > n_cols:
            out.reject(line, raw, f"unparseable: {len(record)} fields where the header has {n_cols}")
            continue
        day = parse_date(record[date_col]) if date_col < len(record) else None
        if day is None:
            text = record[date_col].strip() if date_col < len(record) else ""
            out.reject(line, raw, f"unparseable: date {text[:30]!r} is not a valid date")
            continue
        width = len(record)
        for i, lab in columns:
            if i >= width:
                continue
            cell = record[i]
            if not cell:
                continue
            if lab is None:
                if cell.strip().lower() not in missing:
                    out.reject(line, raw, f"unparseable: column {header[i]!r} is not a tenor label")
                continue
            v = parse_number(cell)
            if isinstance(v, str):
                # markers are looked up only for cells that are not numbers (most cells are)
                if cell.strip().lower() not in missing:
                    out.reject(line, raw, f"{v} (tenor {lab})")
            elif not (numbers and v in numbers):
                out.accept(line, day, lab, v, None, raw)
    return out.result("wide", header)


def _long(grid: _Grid, date_format: str, options: ReadOptions = _DEFAULT_OPTIONS) -> ReadResult:
    lowered = [h.lower() for h in grid.header]
    date_cols = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if len(date_cols) != 1:
        return _refuse("a long-layout file needs exactly one date column (date or as_of) beside tenor and rate")
    for name in ("tenor", "rate"):
        if lowered.count(name) > 1:
            return _refuse(f"header has two {name!r} columns")
    known = {"tenor", "rate", "curve", *_DATE_NAMES}
    extra = [h for h in grid.header if h.lower() not in known and h]
    if extra:
        return _refuse(f"unexpected column {extra[0]!r} in a long-layout file (date, tenor, rate, curve)")
    i_date, i_tenor, i_rate = date_cols[0], lowered.index("tenor"), lowered.index("rate")
    i_curve = lowered.index("curve") if "curve" in lowered else None
    n_cols = len(grid.header)
    missing, numbers = options.missing_set, options.missing_numbers
    parse_date = _DateParser(date_format)
    parse_number = _NumberParser(grid.decimal_comma)
    tenor_cache: dict[str, str | None] = {}
    out = _Collector()
    for record, line, raw in zip(grid.records, grid.lines, grid.raws, strict=True):
        if record[:1] == ["\x00too-long"]:
            out.reject(line, raw, "unparseable: a field is longer than the reader accepts")
            continue
        if len(record) > n_cols:
            out.reject(line, raw, "unparseable: more fields than the header")
            continue
        cells = record + [""] * (n_cols - len(record))
        rate_text = cells[i_rate]
        day = parse_date(cells[i_date])
        if day is None:
            out.reject(line, raw, f"unparseable: date {cells[i_date].strip()[:30]!r} is not a valid date")
            continue
        t = cells[i_tenor]
        if t not in tenor_cache:
            try:
                tenor_cache[t] = parse_tenor(t).label
            except TenorError:
                tenor_cache[t] = None
        tenor = tenor_cache[t]
        if tenor is None:
            out.reject(line, raw, f"unparseable: tenor {t.strip()[:30]!r} is not a tenor label")
            continue
        if rate_text.strip().lower() in missing:
            continue        # an empty rate (or a missing marker) is a missing quote, not a row
        v = parse_number(rate_text)
        if isinstance(v, str):
            out.reject(line, raw, v)
            continue
        if numbers and v in numbers:
            continue
        curve = cells[i_curve].strip() or None if i_curve is not None else None
        out.accept(line, day, tenor, v, curve, raw)
    return out.result("long", grid.header)


def sniff_format(data: bytes, name: str) -> str:
    """``parquet``, ``xlsx`` or ``csv``, from the file's magic bytes first and its name second."""
    if data[:4] == b"PAR1":
        return "parquet"
    if data[:4] == b"PK\x03\x04":
        return "xlsx"
    lower = name.lower()
    if lower.endswith(".parquet") or lower.endswith(".pq"):
        return "parquet"
    if lower.endswith(".xlsx"):
        return "xlsx"
    return "csv"


def read_rate_file(data: bytes, name: str = "", *, date_format: str = "iso",
                   limits: ReadLimits | None = None, options: ReadOptions | None = None) -> ReadResult:
    """Parse one rate file's bytes. Never raises on bad data (see the module docstring).

    ``date_format`` is ``iso`` (always accepted), ``day_first`` or ``month_first``. ``options``:
    title lines to skip, the ``.xlsx`` sheet and the missing markers (default :class:`ReadOptions`).
    Values are returned in the file's own units; convert them with :func:`to_decimal`.
    """
    limits = limits or ReadLimits()
    options = options or ReadOptions()
    if len(data) > limits.max_bytes:
        return _refuse(f"file is {len(data):,} bytes; at most {limits.max_bytes:,} are read")
    if not data:
        return _refuse("empty file: no header and no rows")
    kind = sniff_format(data, name)
    if kind == "xlsx" and name.lower().endswith(".xls"):
        return _refuse("old .xls workbooks are not read; save it as .xlsx or CSV")
    try:
        if kind == "parquet":
            table = _parquet_table(data, limits)
            if isinstance(table, str):
                return _refuse(table)
            # a typed rate column holds no marker text; a marker that reads as a number needs the cells
            typed = None if options.missing_numbers else _typed_long(table)
            if typed is not None:
                return typed
            grid = _table_grid(table)
        elif kind == "xlsx":
            grid = _xlsx_grid(data, limits, options.skip_rows, options.sheet)
        else:
            grid = _csv_grid(data, limits, options.skip_rows)
        if isinstance(grid, str):
            return _refuse(grid)
        lowered = {h.lower() for h in grid.header}
        if "tenor" in lowered and "rate" in lowered:
            return _long(grid, date_format, options)
        return _wide(grid, date_format, options)
    except MemoryError:
        return _refuse("file too large to read in memory")
    except RecursionError:
        return _refuse("file nests too deeply to read")
