"""Bytes to a grid of text cells: the first half of reading a rate file.

What the bytes are (:func:`sniff_format`: Parquet, ``.xlsx`` or CSV), and each format opened within
:class:`~pipeline.readers.options.ReadLimits`: CSV text decoded (BOM, UTF-8, UTF-16, Windows-1252)
with its delimiter sniffed, a binary file refused; ``.xlsx`` unpacked after its zip sizes are checked
against a compression bomb; Parquet opened after its footer's counts are checked. Each gives a
:class:`Grid` (header and records of text cells) or the reason it cannot, as a string; the layouts
(:mod:`pipeline.readers.layouts`) turn the grid into quote rows.
"""

from __future__ import annotations

import csv
import io
import math
import zipfile
from dataclasses import dataclass

from pipeline.readers.options import ReadLimits


def _too_many_lines(limits: ReadLimits) -> str:
    return f"more than {limits.max_lines:,} data lines; at most {limits.max_lines:,} are read (split the file)"


@dataclass
class Grid:
    """A file's cells as text: the ``header``, and per data line its ``records`` (cells), its line
    number in the file (``lines``) and its source text (``raws``; a CSV line's is cut at 500 characters).
    ``decimal_comma``: the file is ``;``-delimited, so ``4,25`` may be a decimal comma."""

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


def csv_grid(data: bytes, limits: ReadLimits, skip_rows: int = 0) -> Grid | str:
    """A CSV file's grid, after ``skip_rows`` title lines; or why it cannot be read (a string).

    A field longer than ``limits.max_field_chars`` (or a line with more than ``max_columns`` fields)
    becomes the one-cell record ``["\\x00too-long"]``, which the layouts reject as a row."""
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
    return Grid(header, records, lines, raws, decimal_comma=delimiter == ";")


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


def parquet_table(data: bytes, limits: ReadLimits):  # noqa: ANN202 - a pyarrow Table, or the refusal
    """A Parquet file as a pyarrow Table, or why it cannot be read (a string)."""
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


def table_grid(table) -> Grid:  # noqa: ANN001 - a pyarrow Table
    """A table's cells as text (the header is line 1, so data rows count from 2)."""
    header = [str(c).strip() for c in table.column_names]
    cols = [[_cell_text(v) for v in col.to_pylist()] for col in table.columns]
    records = [list(r) for r in zip(*cols, strict=True)] if cols else []
    lines = list(range(2, len(records) + 2))
    raws = [",".join(r) for r in records]
    return Grid(header, records, lines, raws)


def xlsx_grid(data: bytes, limits: ReadLimits, skip_rows: int = 0, sheet: str | int = 0) -> Grid | str:
    """One sheet of an ``.xlsx`` workbook as a grid (lines are sheet row numbers), or why it cannot
    be read (a string)."""
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


def _sheet_grid(ws, limits: ReadLimits, skip_rows: int = 0) -> Grid | str:  # noqa: ANN001 - an openpyxl read-only worksheet
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
    return Grid(header, records, lines, raws)


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

