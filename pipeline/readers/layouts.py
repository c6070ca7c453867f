"""A grid of text cells to quote rows: the second half of reading a rate file.

Two layouts, told apart by the header (a ``tenor`` and a ``rate`` column make it long):

* wide (:func:`read_wide`): a date column (``date``, ``as_of`` or else the first column) and one
  column per tenor label;
* long (:func:`read_long`): columns ``date`` (or ``as_of``), ``tenor``, ``rate`` and optionally
  ``curve``; a Parquet table of that layout with typed, clean columns is read column-wise
  (:func:`read_typed_long`), with the same result as through text cells.

Each data line gives its quotes (one per non-empty, non-missing rate cell) or one rejected row with
its reason; a header that cannot be read in the layout refuses the whole file.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipeline.readers.cells import DateParser, NumberParser, tenor_labels
from pipeline.readers.decode import Grid
from pipeline.readers.options import DEFAULT_OPTIONS, ReadOptions
from pipeline.readers.result import ReadResult, empty_rejected, empty_rows, refuse
from pipeline.tenors import TenorError, parse_tenor

_DATE_NAMES = ("date", "as_of", "asof", "as of", "observation_date")


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
            rows = empty_rows()
        if self.rej:
            line, raw, reason = zip(*self.rej, strict=True)
            rejected = pd.DataFrame({"line": np.asarray(line, dtype=np.int64), "raw": pd.Series(raw, dtype=object),
                                     "reason": pd.Series(reason, dtype=object)})
        else:
            rejected = empty_rejected()
        return ReadResult(rows, rejected, layout, None, header)


def read_wide(grid: Grid, date_format: str, options: ReadOptions = DEFAULT_OPTIONS) -> ReadResult:
    """The quotes of a wide-layout grid (values in the file's units), its rejected lines, or the
    refusal of its header. ``date_format``: ``iso``, ``day_first`` or ``month_first``."""
    header = grid.header
    lowered = [h.lower() for h in header]
    date_cols = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if len(date_cols) > 1:
        names = ", ".join(header[i] for i in date_cols)
        return refuse(f"two date columns in the header ({names}); keep one")
    date_col = date_cols[0] if date_cols else 0
    tenor_cols = [i for i in range(len(header)) if i != date_col]
    if not tenor_cols:
        return refuse("header has no tenor columns (expected e.g. date,3M,1Y,10Y or date,tenor,rate; "
                       "title lines above the header are skipped with read.skip_rows)")
    labels, bad = tenor_labels([header[i] for i in tenor_cols])
    seen: dict[str, str] = {}
    for i, lab in zip(tenor_cols, labels, strict=True):
        if lab is not None and lab in seen:
            return refuse(f"header names tenor {lab} twice ({seen[lab]!r} and {header[i]!r})")
        if lab is not None:
            seen[lab] = header[i]
    if len(bad) == len(labels):
        shown = ", ".join(repr(b) for b in bad[:3])
        return refuse(f"no column of the header is a tenor label ({shown}...)")

    n_cols = len(header)
    columns = list(zip(tenor_cols, labels, strict=True))
    missing, numbers = options.missing_set, options.missing_numbers
    parse_date = DateParser(date_format)
    parse_number = NumberParser(grid.decimal_comma)
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


def read_long(grid: Grid, date_format: str, options: ReadOptions = DEFAULT_OPTIONS) -> ReadResult:
    """The quotes of a long-layout grid (values in the file's units), its rejected lines, or the
    refusal of its header. ``date_format`` as for :func:`read_wide`."""
    lowered = [h.lower() for h in grid.header]
    date_cols = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if len(date_cols) != 1:
        return refuse("a long-layout file needs exactly one date column (date or as_of) beside tenor and rate")
    for name in ("tenor", "rate"):
        if lowered.count(name) > 1:
            return refuse(f"header has two {name!r} columns")
    known = {"tenor", "rate", "curve", *_DATE_NAMES}
    extra = [h for h in grid.header if h.lower() not in known and h]
    if extra:
        return refuse(f"unexpected column {extra[0]!r} in a long-layout file (date, tenor, rate, curve)")
    i_date, i_tenor, i_rate = date_cols[0], lowered.index("tenor"), lowered.index("rate")
    i_curve = lowered.index("curve") if "curve" in lowered else None
    n_cols = len(grid.header)
    missing, numbers = options.missing_set, options.missing_numbers
    parse_date = DateParser(date_format)
    parse_number = NumberParser(grid.decimal_comma)
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


# date32 day numbers of 1000-01-01 and 9999-12-31: inside these, ISO text and the date parser agree
_TYPED_DAYS = (-354285, 2932896)


def read_typed_long(table) -> ReadResult | None:  # noqa: ANN001 - a pyarrow Table
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
        return ReadResult(empty_rows(), empty_rejected(), "long", None, header)
    rows = pd.DataFrame({
        "line": (np.flatnonzero(keep) + 2).astype(np.int64), "as_of": day.astype("datetime64[s]"),
        "tenor": pd.Series(tenor, dtype=object), "value": value, "curve": pd.Series(curve, dtype=object),
        "raw": pd.Series(raws, dtype=object),
    })
    return ReadResult(rows, empty_rejected(), "long", None, header)
