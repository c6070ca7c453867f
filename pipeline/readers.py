"""Readers: the bytes of a rate file in, a frame of quote rows and a frame of rejected rows out.

Formats: CSV (delimiter sniffed among ``, ; TAB |``, optional BOM, quoted fields), Parquet and Excel
``.xlsx`` (first sheet). Layouts, detected from the header:

* wide: a date column (``date``, ``as_of`` or else the first column) and one column per tenor label;
* long: columns ``date`` (or ``as_of``), ``tenor``, ``rate`` and optionally ``curve``.

A *row* is one quote: one date and tenor with a non-empty value. A line that cannot be split into
quotes (a garbled date, the wrong number of fields) counts as one rejected row. So for every file,
rows read = rows accepted + rows rejected. Empty cells are missing quotes, not zeros, and are not rows.
Line numbers count the header as line 1 in every format.

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

__all__ = ["ReadLimits", "ReadResult", "read_rate_file", "to_decimal", "UNIT_DIVISORS"]

UNIT_DIVISORS = {"percent": 100.0, "decimal": 1.0, "bp": 10_000.0}
_DATE_NAMES = ("date", "as_of", "asof", "as of", "observation_date")
_ROW_COLUMNS = ["line", "as_of", "tenor", "value", "curve", "raw"]
_REJECT_COLUMNS = ["line", "raw", "reason"]
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,3})?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


@dataclass(frozen=True)
class ReadLimits:
    """Bounds that keep a hostile file from using unbounded time or memory."""

    max_bytes: int = 256 * 1024 * 1024
    max_columns: int = 2_000
    max_field_chars: int = 10_000
    max_xlsx_uncompressed: int = 512 * 1024 * 1024
    max_xlsx_ratio: float = 200.0


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
    return out if divisor == 1.0 else np.round(out, 14)


def _empty_rows() -> pd.DataFrame:
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


def _empty_rejected() -> pd.DataFrame:
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
        return data.decode("utf-16")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        # files from older spreadsheet exports are often Windows-1252; latin-1 never fails
        try:
            return data.decode("cp1252")
        except UnicodeDecodeError:
            return data.decode("latin-1")


def _sniff_delimiter(sample: str) -> str:
    try:
        return csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        first = sample.split("\n", 1)[0]
        counts = {d: first.count(d) for d in ",;\t|"}
        best = max(counts, key=lambda d: counts[d])
        return best if counts[best] else ","


def _csv_grid(data: bytes, limits: ReadLimits) -> _Grid | str:
    if b"\x00" in data[:8192] and not data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "binary file: not a CSV, Parquet or .xlsx rate file"
    text = _decode(data).replace("\r\n", "\n").replace("\r", "\n")
    if not text.strip():
        return "empty file: no header and no rows"
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
            if header is None:
                if not any(c.strip() for c in record):
                    start = end + 1
                    continue
                if len(record) > limits.max_columns:
                    return f"header has {len(record):,} columns; at most {limits.max_columns:,} are read"
                header = [c.strip() for c in record]
                start = end + 1
                continue
            if any(len(c) > limits.max_field_chars for c in record) or len(record) > limits.max_columns:
                records.append(["\x00too-long"])
            else:
                records.append(record)
            lines.append(start)
            raw = "\n".join(physical[start - 1:end])
            raws.append(raw if len(raw) <= 500 else raw[:500] + "...")
            start = end + 1
    except csv.Error as exc:
        return f"line {start}: cannot be split into fields ({exc})"
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


def _parquet_grid(data: bytes, limits: ReadLimits) -> _Grid | str:
    import pyarrow.parquet as pq

    try:
        table = pq.read_table(io.BytesIO(data))
    except Exception as exc:  # pyarrow raises several unrelated types for corrupt files
        return f"not a readable Parquet file ({type(exc).__name__}: {str(exc).splitlines()[0][:200]})"
    if table.num_columns > limits.max_columns:
        return f"{table.num_columns:,} columns; at most {limits.max_columns:,} are read"
    header = [str(c).strip() for c in table.column_names]
    cols = [[_cell_text(v) for v in col.to_pylist()] for col in table.columns]
    records = [list(r) for r in zip(*cols, strict=True)] if cols else []
    lines = list(range(2, len(records) + 2))
    raws = [",".join(r) for r in records]
    return _Grid(header, records, lines, raws)


def _xlsx_grid(data: bytes, limits: ReadLimits) -> _Grid | str:
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
        ws = wb.worksheets[0]
        rows = [list(r) for r in ws.iter_rows(values_only=True)]
        wb.close()
    except Exception as exc:  # openpyxl surfaces many error types for malformed workbooks
        return f"not a readable .xlsx file ({type(exc).__name__}: {str(exc).splitlines()[0][:200] if str(exc) else ''})"
    first = 0
    while first < len(rows) and not any(_cell_text(c).strip() for c in rows[first]):
        first += 1
    if first == len(rows):
        return "empty workbook: no header and no rows"
    header = [_cell_text(c).strip() for c in rows[first]]
    while header and not header[-1]:
        header.pop()
    if len(header) > limits.max_columns:
        return f"{len(header):,} columns; at most {limits.max_columns:,} are read"
    records, lines, raws = [], [], []
    for i, r in enumerate(rows[first + 1:], start=first + 2):
        cells = [_cell_text(c) for c in r[: len(header)]]
        if not any(c.strip() for c in cells):
            continue
        records.append(cells)
        lines.append(i)
        raws.append(",".join(cells))
    return _Grid(header, records, lines, raws)


# --- parsing text cells ------------------------------------------------------------------------

_FORMATS = {
    "iso": ("%Y-%m-%d", "%Y/%m/%d", "%Y%m%d"),
    "day_first": ("%d/%m/%Y", "%d.%m.%Y", "%d-%m-%Y"),
    "month_first": ("%m/%d/%Y", "%m-%d-%Y"),
}


def parse_dates(text: pd.Series, date_format: str) -> pd.Series:
    """Parse date text; ISO forms are always accepted, day-/month-first only when configured.

    Returns ``datetime64`` with ``NaT`` where a cell is not a real date (2031-02-30 is not)."""
    s = text.astype(str).str.strip().str.slice(0, 10)
    formats = _FORMATS["iso"] + (_FORMATS[date_format] if date_format != "iso" else ())
    out = pd.Series(pd.NaT, index=s.index, dtype="datetime64[s]")
    for fmt in formats:
        todo = out.isna()
        if not todo.any():
            break
        parsed = pd.to_datetime(s[todo], format=fmt, errors="coerce")
        out.loc[todo] = parsed.astype("datetime64[s]")
    return out


def _parse_values(text: pd.Series, decimal_comma: bool) -> tuple[np.ndarray, np.ndarray]:
    """Numbers from text cells: (values, reason-or-empty). Rejects NaN, inf, thousands separators."""
    s = text.str.strip().str.replace("%", "", regex=False).str.strip()
    if decimal_comma:
        comma = s.str.match(_DECIMAL_COMMA)
        s = s.where(~comma, s.str.replace(",", ".", regex=False))
    ok = s.str.match(_NUMBER).fillna(False).to_numpy(dtype=bool, copy=True)
    values = np.full(len(s), np.nan)
    if ok.any():
        values[ok] = pd.to_numeric(s[ok], errors="coerce").to_numpy(dtype=float)
    finite = np.isfinite(values)
    ok = ok & finite
    reasons = np.where(ok, "", "unparseable: rate " + text.str.slice(0, 40).map(repr).to_numpy(dtype=object)
                       + " is not a finite number")
    return values, reasons


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


def _wide(grid: _Grid, date_format: str) -> ReadResult:
    header = grid.header
    lowered = [h.lower() for h in header]
    date_cols = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if len(date_cols) > 1:
        names = ", ".join(header[i] for i in date_cols)
        return _refuse(f"two date columns in the header ({names}); keep one")
    date_col = date_cols[0] if date_cols else 0
    tenor_cols = [i for i in range(len(header)) if i != date_col]
    if not tenor_cols:
        return _refuse("header has no tenor columns (expected e.g. date,3M,1Y,10Y or date,tenor,rate)")
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
    widths = np.fromiter((len(r) for r in grid.records), dtype=np.int64, count=len(grid.records))
    too_long = np.fromiter((r[:1] == ["\x00too-long"] for r in grid.records), dtype=bool,
                           count=len(grid.records))
    padded = [r + [""] * (n_cols - len(r)) if len(r) < n_cols else r[:n_cols] for r in grid.records]
    cells = pd.DataFrame(padded, columns=range(n_cols), dtype=object) if padded else pd.DataFrame(
        columns=range(n_cols), dtype=object)
    lines = np.asarray(grid.lines, dtype=np.int64)
    raws = np.asarray(grid.raws, dtype=object)

    dates = parse_dates(cells[date_col].fillna(""), date_format) if len(cells) else pd.Series(
        [], dtype="datetime64[s]")
    # a record with more fields than the header is garbled, not a set of quotes
    line_bad = np.where(too_long, "unparseable: a field is longer than the reader accepts", "")
    line_bad = np.where((line_bad == "") & (widths > n_cols),
                        "unparseable: " + pd.Series(widths).astype(str).to_numpy(dtype=object)
                        + f" fields where the header has {n_cols}", line_bad)
    date_text = cells[date_col].fillna("").astype(str).str.strip() if len(cells) else pd.Series([], dtype=str)
    line_bad = np.where((line_bad == "") & dates.isna().to_numpy(),
                        "unparseable: date " + date_text.str.slice(0, 30).map(repr).to_numpy(dtype=object)
                        + " is not a valid date", line_bad)
    line_rejected = line_bad != ""

    rows_parts, rej_parts = [], []
    if line_rejected.any():
        rej_parts.append(pd.DataFrame({"line": lines[line_rejected], "raw": raws[line_rejected],
                                       "reason": line_bad[line_rejected]}))
    keep = ~line_rejected
    for i, lab in zip(tenor_cols, labels, strict=True):
        col = cells[i].fillna("").astype(str)
        present = keep & (col.str.strip() != "").to_numpy()
        if not present.any():
            continue
        if lab is None:
            rej_parts.append(pd.DataFrame({"line": lines[present], "raw": raws[present],
                                           "reason": f"unparseable: column {header[i]!r} is not a tenor label"}))
            continue
        values, reasons = _parse_values(col[present], grid.decimal_comma)
        good = reasons == ""
        idx = np.flatnonzero(present)
        if (~good).any():
            rej_parts.append(pd.DataFrame({"line": lines[idx[~good]], "raw": raws[idx[~good]],
                                           "reason": [f"{r} (tenor {lab})" for r in reasons[~good]]}))
        if good.any():
            rows_parts.append(pd.DataFrame({
                "line": lines[idx[good]],
                "as_of": dates.to_numpy()[idx[good]],
                "tenor": lab,
                "value": values[good],
                "curve": None,
                "raw": raws[idx[good]],
            }))
    rows = pd.concat(rows_parts, ignore_index=True) if rows_parts else _empty_rows()
    rejected = pd.concat(rej_parts, ignore_index=True) if rej_parts else _empty_rejected()
    rows = rows.sort_values(["line", "tenor"], kind="stable").reset_index(drop=True)
    rejected = rejected.sort_values("line", kind="stable").reset_index(drop=True)
    return ReadResult(rows[_ROW_COLUMNS], rejected[_REJECT_COLUMNS], "wide", None, header)


def _long(grid: _Grid, date_format: str) -> ReadResult:
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
    ci = {name: lowered.index(name) for name in ("tenor", "rate", "curve") if name in lowered}
    ci["date"] = date_cols[0]
    n_cols = len(grid.header)
    padded = [r + [""] * (n_cols - len(r)) if len(r) < n_cols else r for r in grid.records]
    widths = np.fromiter((len(r) for r in grid.records), dtype=np.int64, count=len(grid.records))
    cells = pd.DataFrame([r[:n_cols] for r in padded], columns=range(n_cols), dtype=object)
    lines = np.asarray(grid.lines, dtype=np.int64)
    raws = np.asarray(grid.raws, dtype=object)
    if not len(cells):
        return ReadResult(_empty_rows(), _empty_rejected(), "long", None, grid.header)

    rate_text = cells[ci["rate"]].fillna("").astype(str)
    present = (rate_text.str.strip() != "").to_numpy()
    dates = parse_dates(cells[ci["date"]].fillna(""), date_format)
    tenor_text = cells[ci["tenor"]].fillna("").astype(str)
    uniq = {t: None for t in tenor_text.unique()}
    for t in uniq:
        try:
            uniq[t] = parse_tenor(t).label
        except TenorError:
            uniq[t] = None
    tenors = tenor_text.map(uniq).to_numpy(dtype=object)
    values, value_reason = _parse_values(rate_text, grid.decimal_comma)

    reason = np.full(len(cells), "", dtype=object)
    reason = np.where(widths > n_cols, "unparseable: more fields than the header", reason)
    reason = np.where((reason == "") & dates.isna().to_numpy(), "unparseable: date "
                      + cells[ci["date"]].fillna("").astype(str).str.slice(0, 30).map(repr).to_numpy(dtype=object)
                      + " is not a valid date", reason)
    reason = np.where((reason == "") & pd.isna(tenors), "unparseable: tenor "
                      + tenor_text.str.slice(0, 30).map(repr).to_numpy(dtype=object) + " is not a tenor label", reason)
    reason = np.where((reason == "") & present & (value_reason != ""), value_reason, reason)
    # an empty rate is a missing quote (not a row) unless the line is garbled otherwise
    counted = present | (reason != "")
    bad = counted & (reason != "")
    good = counted & ~bad
    curve = cells[ci["curve"]].fillna("").astype(str).str.strip().replace("", None) if "curve" in ci else None
    rows = pd.DataFrame({
        "line": lines[good],
        "as_of": dates.to_numpy()[good],
        "tenor": tenors[good],
        "value": values[good],
        "curve": curve.to_numpy(dtype=object)[good] if curve is not None else None,
        "raw": raws[good],
    })
    rejected = pd.DataFrame({"line": lines[bad], "raw": raws[bad], "reason": reason[bad]})
    return ReadResult(rows[_ROW_COLUMNS] if len(rows) else _empty_rows(),
                      rejected if len(rejected) else _empty_rejected(), "long", None, grid.header)


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
                   limits: ReadLimits | None = None) -> ReadResult:
    """Parse one rate file's bytes. Never raises on bad data (see the module docstring).

    ``date_format`` is ``iso`` (always accepted), ``day_first`` or ``month_first``.
    Values are returned in the file's own units; convert them with :func:`to_decimal`.
    """
    limits = limits or ReadLimits()
    if len(data) > limits.max_bytes:
        return _refuse(f"file is {len(data):,} bytes; at most {limits.max_bytes:,} are read")
    if not data:
        return _refuse("empty file: no header and no rows")
    kind = sniff_format(data, name)
    if kind == "xlsx" and name.lower().endswith(".xls"):
        return _refuse("old .xls workbooks are not read; save it as .xlsx or CSV")
    try:
        grid = {"parquet": _parquet_grid, "xlsx": _xlsx_grid, "csv": _csv_grid}[kind](data, limits)
        if isinstance(grid, str):
            return _refuse(grid)
        lowered = {h.lower() for h in grid.header}
        if "tenor" in lowered and "rate" in lowered:
            return _long(grid, date_format)
        return _wide(grid, date_format)
    except MemoryError:
        return _refuse("file too large to read in memory")
    except RecursionError:
        return _refuse("file nests too deeply to read")
