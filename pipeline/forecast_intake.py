"""A user's forecast file, from bytes to forecast rows ready for the store (pure: no store, no printing).

A forecast file holds one contender's forecasts in the long layout::

    as_of, start, tenor, rate[, curve]

``as_of`` (or ``date``) is the day the forecast was made; ``start`` (``0M``, ``6M``, ``1Y``...) how far
ahead the forecast rate starts and ``tenor`` (``3M``, ``2Y``...) its length, both tenor labels of whole
months or years (:func:`pipeline.tenors.parse_tenor`; ``12M`` and ``1Y`` are the same); ``rate`` the
forecast of the zero rate for ``tenor`` on the target date (the roll of as-of + start, as for forwards),
in the curve's own compounding and day count, in the file's units; ``curve`` (optional) the curve each
row forecasts. Bytes are opened by the rate readers (:mod:`pipeline.readers.decode`: CSV, Parquet,
``.xlsx``, the same size limits and read options), so a forecast file may be anything a rate file may be.

Every data line ends up as exactly one accepted row or one rejected row with a one-line reason and
a check name, except a line whose rate is empty or a missing marker: like a missing quote, that is no
forecast and no row. So rows read = accepted + rejected. Check names: ``unparseable`` (a date,
start, tenor or rate that cannot be read), ``out_of_range`` (a start or tenor not in whole months, a
rate outside the plausible band of zero rates), ``unknown_curve`` and ``duplicate`` (the same
(curve, as_of, start, tenor) twice in one file: identical repeats keep the first line, conflicting
values keep none, as for quotes).

Parsing works on each column's distinct texts (a file repeats its dates, starts and tenors), so the
cost is one pass to split the lines plus a small one per distinct cell.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from pipeline.config import Config
from pipeline.expectations import RATE_BANDS
from pipeline.readers import ReadLimits, ReadOptions, to_decimal
from pipeline.readers.cells import DateParser, NumberParser
from pipeline.readers.decode import Grid, csv_grid, parquet_table, sniff_format, table_grid, xlsx_grid
from pipeline.readers.options import DEFAULT_OPTIONS
from pipeline.tenors import TenorError, parse_tenor
from pipeline.wording import SHOWN, band_text, first_items, more_text, number_text, units_name

__all__ = ["ForecastIntake", "ForecastRead", "ROW_COLUMNS", "REJECT_COLUMNS", "month_label", "prepare_forecasts",
           "read_forecast_file"]

ROW_COLUMNS = ["curve", "as_of", "start_months", "tenor_months", "forecast_rate", "value", "line"]
REJECT_COLUMNS = ["line", "raw", "reason", "check_name"]
_DATE_NAMES = ("as_of", "date", "asof", "as of")
_KNOWN = {"start", "tenor", "rate", "curve", *_DATE_NAMES}
# a forecast is of a zero rate whatever the curve is quoted in (par yields, discount factors)
_BAND = RATE_BANDS["zero"]


def month_label(months: int) -> str:
    """``0M``, ``6M``, ``1Y``, ``18M``, ``2Y``: whole years in years, else months."""
    return f"{months // 12}Y" if months and months % 12 == 0 else f"{months}M"


@dataclass
class ForecastRead:
    """What reading one forecast file found.

    ``rows``: ``line``, ``as_of`` (datetime64), ``start_months``, ``tenor_months`` (int64), ``value``
    (float, the file's units), ``curve`` (object: the row's ``curve`` cell, ``None`` where blank or
    absent), ``raw``. ``rejected``: :data:`REJECT_COLUMNS`. ``error``: the file could not be read at
    all (then both are empty). ``has_curve_column``: the header names a ``curve`` column.
    """

    rows: pd.DataFrame
    rejected: pd.DataFrame
    error: str | None = None
    has_curve_column: bool = False

    @property
    def rows_read(self) -> int:
        return len(self.rows) + len(self.rejected)


@dataclass
class ForecastIntake:
    """One file's forecast rows after the config's rules: ``rows`` (:data:`ROW_COLUMNS`, rates decimal,
    sorted by curve, as_of, start, tenor) and ``rejected`` (:data:`REJECT_COLUMNS`, by line)."""

    rows: pd.DataFrame
    rejected: pd.DataFrame
    curves: tuple[str, ...] = field(default_factory=tuple)

    @property
    def rows_read(self) -> int:
        return len(self.rows) + len(self.rejected)


def _empty_rows() -> pd.DataFrame:
    return pd.DataFrame({"line": pd.Series([], dtype="int64"), "as_of": pd.Series([], dtype="datetime64[s]"),
                         "start_months": pd.Series([], dtype="int64"), "tenor_months": pd.Series([], dtype="int64"),
                         "value": pd.Series([], dtype="float64"), "curve": pd.Series([], dtype=object),
                         "raw": pd.Series([], dtype=object)})


def _empty_rejected() -> pd.DataFrame:
    return pd.DataFrame({"line": pd.Series([], dtype="int64"), **{c: pd.Series([], dtype=object)
                                                                  for c in REJECT_COLUMNS[1:]}})


def _refuse(reason: str) -> ForecastRead:
    return ForecastRead(_empty_rows(), _empty_rejected(), reason)


def _grid(data: bytes, name: str, limits: ReadLimits, options: ReadOptions) -> Grid | str:
    if len(data) > limits.max_bytes:
        return f"file is {len(data):,} bytes; at most {limits.max_bytes:,} are read"
    if not data:
        return "empty file: no header and no rows"
    kind = sniff_format(data, name)
    if kind == "xlsx" and name.lower().endswith(".xls"):
        return "old .xls workbooks are not read; save it as .xlsx or CSV"
    try:
        if kind == "parquet":
            table = parquet_table(data, limits)
            return table if isinstance(table, str) else table_grid(table)
        if kind == "xlsx":
            return xlsx_grid(data, limits, options.skip_rows, options.sheet)
        return csv_grid(data, limits, options.skip_rows)
    except MemoryError:
        return "file too large to read in memory"
    except RecursionError:
        return "file nests too deeply to read"


def _months_of(texts: np.ndarray, *, allow_zero: bool, what: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each text's whole months, and for the rest a reason and a check name (None where it parsed)."""
    uniq, inverse = np.unique(texts.astype(str), return_inverse=True)
    months = np.zeros(len(uniq), dtype=np.int64)
    reason = np.full(len(uniq), None, dtype=object)
    check = np.full(len(uniq), None, dtype=object)
    for i, t in enumerate(uniq.tolist()):      # distinct labels only: a handful a file
        shown = t.strip()[:30]
        try:
            tenor = parse_tenor(t, allow_zero=allow_zero)
        except TenorError:
            reason[i], check[i] = f"unparseable: {what} {shown!r} is not a tenor label (e.g. 0M, 6M, 1Y)", "unparseable"
            continue
        if tenor.months is None:
            reason[i] = f"out of range: {what} {shown!r} is not whole months or years (forecasts use nM or nY)"
            check[i] = "out_of_range"
            continue
        months[i] = tenor.months
    return months[inverse], reason[inverse], check[inverse]


def read_forecast_file(data: bytes, name: str = "", *, date_format: str = "iso",
                       options: ReadOptions | None = None, limits: ReadLimits | None = None) -> ForecastRead:
    """Parse one forecast file's bytes (see the module docstring). Never raises on bad data.

    ``date_format`` and ``options`` as for :func:`pipeline.readers.read_rate_file`. Values stay in
    the file's units; :func:`prepare_forecasts` converts them.
    """
    options = options or DEFAULT_OPTIONS
    grid = _grid(data, name, limits or ReadLimits(), options)
    if isinstance(grid, str):
        return _refuse(grid)
    lowered = [h.lower() for h in grid.header]
    dates = [i for i, h in enumerate(lowered) if h in _DATE_NAMES]
    if len(dates) != 1:
        return _refuse("a forecast file needs exactly one date column (as_of or date) beside start, tenor and rate")
    for col in ("start", "tenor", "rate", "curve"):
        if lowered.count(col) > 1:
            return _refuse(f"header has two {col!r} columns")
    missing = [c for c in ("start", "tenor", "rate") if c not in lowered]
    if missing:
        return _refuse(f"a forecast file needs the columns as_of, start, tenor, rate (and optionally curve); "
                       f"missing: {', '.join(missing)}")
    extra = [h for h in grid.header if h and h.lower() not in _KNOWN]
    if extra:
        return _refuse(f"unexpected column {extra[0]!r} in a forecast file (as_of, start, tenor, rate, curve)")
    has_curve = "curve" in lowered
    width = len(grid.header)
    n = len(grid.records)
    line = np.asarray(grid.lines, dtype=np.int64)
    raw = np.asarray(grid.raws, dtype=object)
    reason = np.full(n, None, dtype=object)
    check = np.full(n, None, dtype=object)
    too_long = np.zeros(n, dtype=bool)
    too_wide = np.zeros(n, dtype=bool)
    padded = []
    blank = [""] * width
    for i, r in enumerate(grid.records):     # one pass to split the lines into columns
        if len(r) == width:
            padded.append(r)
        elif r[:1] == ["\x00too-long"]:
            too_long[i] = True
            padded.append(blank)
        elif len(r) > width:
            too_wide[i] = True
            padded.append(blank)
        else:
            padded.append(r + [""] * (width - len(r)))
    reason[too_long] = "unparseable: a field is longer than the reader accepts"
    reason[too_wide] = "unparseable: more fields than the header"
    check[too_long | too_wide] = "unparseable"
    cols = [np.asarray(c, dtype=object) for c in zip(*padded, strict=True)] if n else \
        [np.zeros(0, dtype=object) for _ in range(width)]

    def column(label: str) -> np.ndarray:
        return cols[lowered.index(label)]

    def fail(mask: np.ndarray, text: np.ndarray | str, name_: np.ndarray | str) -> None:
        sel = mask & pd.isna(reason)
        reason[sel] = text[sel] if isinstance(text, np.ndarray) else text
        check[sel] = name_[sel] if isinstance(name_, np.ndarray) else name_

    # dates: each distinct text parsed once
    date_text = cols[dates[0]].astype(str)
    d_uniq, d_inv = np.unique(date_text, return_inverse=True)
    parse = DateParser(date_format)
    d_vals = np.array([parse(t) or np.datetime64("NaT") for t in d_uniq.tolist()], dtype="datetime64[D]")
    as_of = d_vals[d_inv] if n else np.zeros(0, dtype="datetime64[D]")
    bad_date = np.isnat(as_of)
    fail(bad_date, np.array([f"unparseable: date {t.strip()[:30]!r} is not a valid date" for t in d_uniq.tolist()],
                            dtype=object)[d_inv] if n else np.zeros(0, dtype=object), "unparseable")
    start, s_reason, s_check = _months_of(column("start"), allow_zero=True, what="start")
    fail(pd.notna(s_reason), s_reason, s_check)
    tenor, t_reason, t_check = _months_of(column("tenor"), allow_zero=False, what="tenor")
    fail(pd.notna(t_reason), t_reason, t_check)
    # rates: a blank cell or a missing marker is no forecast; anything else must be a finite number
    rate_text = column("rate").astype(str)
    r_uniq, r_inv = np.unique(rate_text, return_inverse=True)
    marker, marker_numbers = options.missing_set, options.missing_numbers
    to_number = NumberParser(grid.decimal_comma)
    parsed = [to_number(t) for t in r_uniq.tolist()]
    r_missing = np.array([t.strip().lower() in marker or (not isinstance(v, str) and v in marker_numbers)
                          for t, v in zip(r_uniq.tolist(), parsed, strict=True)], dtype=bool)
    r_value = np.array([np.nan if isinstance(v, str) else v for v in parsed], dtype=float)
    r_reason = np.array([v if isinstance(v, str) else None for v in parsed], dtype=object)
    value = r_value[r_inv] if n else np.zeros(0)
    no_rate = (r_missing[r_inv] if n else np.zeros(0, dtype=bool)) & pd.isna(reason)
    rate_reason = r_reason[r_inv] if n else np.zeros(0, dtype=object)
    fail(~no_rate & pd.notna(rate_reason), rate_reason, "unparseable")
    if has_curve:
        c_uniq, c_inv = np.unique(column("curve").astype(str), return_inverse=True)
        curve = np.array([c.strip() or None for c in c_uniq.tolist()], dtype=object)[c_inv]
    else:
        curve = np.full(n, None, dtype=object)
    ok = pd.isna(reason) & ~no_rate
    rows = pd.DataFrame({
        "line": line[ok], "as_of": as_of[ok].astype("datetime64[s]"), "start_months": start[ok],
        "tenor_months": tenor[ok], "value": value[ok], "curve": pd.Series(curve[ok], dtype=object),
        "raw": pd.Series(raw[ok], dtype=object),
    })
    bad = pd.notna(reason)
    rejected = pd.DataFrame({"line": line[bad], "raw": pd.Series(raw[bad], dtype=object),
                             "reason": pd.Series(reason[bad], dtype=object),
                             "check_name": pd.Series(check[bad], dtype=object)})
    return ForecastRead(rows, rejected, None, has_curve)


def _reject(frame: pd.DataFrame, mask: np.ndarray, reason: np.ndarray | str, check: str) -> pd.DataFrame:
    out = frame.loc[mask, ["line", "raw"]].copy()
    out["reason"] = pd.Series(reason[mask] if isinstance(reason, np.ndarray) else reason, index=out.index,
                              dtype=object)
    out["check_name"] = pd.Series(check, index=out.index, dtype=object)
    return out


def _duplicates(part: pd.DataFrame, units: np.ndarray) -> tuple[np.ndarray, list[pd.DataFrame]]:
    """Rows to drop for repeating a (curve, as_of, start, tenor) of the file, and their rejections.

    Identical repeats keep the first line; conflicting values keep none. A conflict's reason names
    at most :data:`~pipeline.wording.SHOWN` distinct values with their first line. ``units``: each
    row's units (for the reason)."""
    key = ["curve", "as_of", "start_months", "tenor_months"]
    dup = part.duplicated(key, keep=False).to_numpy()
    drop = np.zeros(len(part), dtype=bool)
    if not dup.any():
        return drop, []
    d = part.loc[dup].assign(_pos=np.flatnonzero(dup), _units=units[dup]).sort_values([*key, "line"], kind="stable")
    gid = d.groupby(key, sort=False).ngroup().to_numpy()
    # ngroup numbers groups in order of appearance, and d is sorted by the key: gid is sorted
    rate = d["forecast_rate"].to_numpy(dtype=float)
    lo = pd.Series(rate).groupby(gid).transform("min").to_numpy()
    hi = pd.Series(rate).groupby(gid).transform("max").to_numpy()
    conflict = (hi - lo) > 1e-12
    first = np.r_[True, gid[1:] != gid[:-1]]
    line = d["line"].to_numpy()
    rejected = []
    n_g = int(gid[-1]) + 1
    if conflict.any():
        distinct = ~pd.DataFrame({"g": gid, "v": d["value"].to_numpy(dtype=float)}).duplicated().to_numpy()
        items = number_text(d["value"].to_numpy()[distinct]) + " on line " + line[distinct].astype(str).astype(object)
        listed, n_distinct = first_items(gid[distinct], items, n_g)
        size = np.bincount(gid, minlength=n_g)
        more = more_text(size, np.minimum(n_distinct, SHOWN), "lines")
        heads = np.flatnonzero(first)
        label = np.array([f"start {month_label(s)}, tenor {month_label(t)} on {str(a)[:10]}" for s, t, a in zip(
            d["start_months"].to_numpy()[heads].tolist(), d["tenor_months"].to_numpy()[heads].tolist(),
            d["as_of"].to_numpy()[heads], strict=True)], dtype=object)
        unit_g = np.array([units_name(u) for u in d["_units"].to_numpy()[heads].tolist()], dtype=object)
        said = ("duplicate: conflicting values (" + unit_g + ") for " + label + " on "
                + np.array([f"{s:,}" for s in size.tolist()], dtype=object) + " lines: " + listed + more
                + "; none is kept")
        rejected.append(_reject(d, conflict, said[gid], "duplicate"))
    repeat = ~conflict & ~first
    if repeat.any():
        head_line = line[np.flatnonzero(first)]
        said = "duplicate: repeats line " + head_line.astype(str).astype(object) + " with the same value"
        rejected.append(_reject(d, repeat, said[gid], "duplicate"))
    drop[d["_pos"].to_numpy()[conflict | repeat]] = True
    return drop, rejected


def prepare_forecasts(read: ForecastRead, cfg: Config, curve: str | None = None,
                      units: str | None = None) -> ForecastIntake:
    """One file's forecast rows under the config: each row's curve (its ``curve`` cell, else
    ``curve``), converted to decimals (``units``, else the row's curve's ``units``), checked against
    the plausible band of zero rates (-5 % to 40 %) and for duplicates. See the module docstring."""
    rejected = [read.rejected] if len(read.rejected) else []
    rows = read.rows
    out_rows = pd.DataFrame({c: pd.Series([], dtype=t) for c, t in zip(
        ROW_COLUMNS, ("object", "datetime64[s]", "int64", "int64", "float64", "float64", "int64"), strict=True)})
    curves: tuple[str, ...] = ()
    if len(rows):
        named = rows["curve"].to_numpy(dtype=object)
        names = np.where(pd.isna(named), curve, named).astype(object)
        known = np.isin(names, np.array(list(cfg.curves), dtype=object))
        if (~known).any():
            shown = np.array(["" if c is None else repr(c) for c in names], dtype=object)
            said = np.where(shown == "", "no curve: the row names none and no --curve was given",
                            "unknown curve " + shown + "; configured: " + ", ".join(sorted(cfg.curves)))
            rejected.append(_reject(rows, ~known, said, "unknown_curve"))
        rows = rows.loc[known].assign(curve=names[known])
        row_units = (np.full(len(rows), units, dtype=object) if units is not None else
                     np.array([cfg.curves[c].units for c in rows["curve"].tolist()], dtype=object))
        rate = np.full(len(rows), np.nan)
        for u in pd.unique(row_units):
            sel = row_units == u
            rate[sel] = to_decimal(rows["value"].to_numpy()[sel], str(u))
        lo, hi, strict_min = _BAND
        inside = (rate > lo if strict_min else rate >= lo) & (rate <= hi)
        if (~inside).any():
            band = np.array([band_text(lo, hi, strict_min, u) for u in row_units.tolist()], dtype=object)
            unit = np.array([units_name(u) for u in row_units.tolist()], dtype=object)
            where = np.array([f"start {month_label(s)}, tenor {month_label(t)}" for s, t in zip(
                rows["start_months"].tolist(), rows["tenor_months"].tolist(), strict=True)], dtype=object)
            said = ("out of range: rate " + number_text(rows["value"].to_numpy()) + " (" + unit
                    + ") outside the plausible band " + band + " (" + where + ")")
            rejected.append(_reject(rows, ~inside, said, "out_of_range"))
        rows = rows.assign(forecast_rate=rate).loc[inside]
        row_units = row_units[inside]
        drop, dup_rejected = _duplicates(rows, row_units)
        rejected.extend(dup_rejected)
        rows = rows.loc[~drop]
        out_rows = rows[ROW_COLUMNS].sort_values(["curve", "as_of", "start_months", "tenor_months"], kind="stable",
                                                 ignore_index=True)
        curves = tuple(sorted(set(out_rows["curve"].tolist())))
    rej = (pd.concat(rejected, ignore_index=True).sort_values("line", kind="stable", ignore_index=True)[REJECT_COLUMNS]
           if rejected else _empty_rejected())
    return ForecastIntake(out_rows, rej, curves)
