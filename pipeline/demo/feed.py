"""The feed: the generated market written as the inbox's files (bytes), with deliberate defects."""

from __future__ import annotations

import datetime as dt
import io
from dataclasses import dataclass, replace

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from pipeline.dates import as_days
from pipeline.demo.market import DemoMarket
from pipeline.demo.orvane import GOVT_TENORS, SWAP_TENORS


@dataclass(frozen=True)
class Defect:
    """One deliberate defect in the delivered files.

    ``file`` is the file name inside the inbox; ``line`` the 1-based line number in it (the header is
    line 1; ``None`` when the defect is an absence); values are in the file's units (percent for
    ``govt``). Kinds:

    - ``missing_day``: a business day absent from ``govt`` (still present in ``swap``);
    - ``wrong_units``: a cell 10x its true value, still inside a -5 %..40 % band (only a jump or
      outlier check sees it);
    - ``out_of_range``: a cell 100x its true value;
    - ``duplicate_row``: a line repeated verbatim on the next line (its text in ``written_value``);
    - ``conflicting_duplicate``: a day sent again at the end of its file with one tenor changed
      (``true_value`` is the first copy's, ``written_value`` the second's);
    - ``garbled_line``: an extra unreadable line (its text in ``written_value``);
    - ``restated_value``: a wrong first publication of one tenor; ``restatement``: the line of the
      later restatement file that corrects it (both values are the true one);
    - ``stale_curve``: the whole curve copied from the previous business day;
    - ``missing_tenor``: an empty cell.
    """

    kind: str
    file: str
    line: int | None
    date: dt.date | None
    tenor: str | None
    true_value: float | None
    written_value: float | str | None
    note: str = ""


# target dates of the defects (each rolled to the next business day), well apart from each other
_DEFECT_DATES = {
    "wrong_units": "2003-03-03",  # where the search for a suitable cell starts
    "garbled_line": "2003-07-15",
    "missing_day": "2004-03-10",
    "duplicate_row": "2007-11-14",
    "restated_value": "2009-06-16",
    "stale_curve": "2015-02-18",
    "conflicting_duplicate": "2017-08-23",
    "missing_tenor": "2019-05-22",
    "out_of_range": "2021-11-17",
}
_RESTATED = {"2Y": 0.0725, "5Y": -0.0410, "10Y": 0.1180}  # percent added to the first publication
_MISSING_TENOR = "7Y"
_CONFLICT = ("3Y", 0.0250)  # tenor and percent added in the second copy of the line
_OUT_OF_RANGE = ("20Y", 100.0)  # tenor and factor: a percent figure multiplied by 100 again
_UNITS_FACTOR = 10.0
_UNITS_BAND = (1.5, 3.0)  # percent: ten times this is 15 %-30 %, inside any plausible-rate band


def iso_date(day: np.datetime64) -> str:
    """``YYYY-MM-DD`` text of a day."""
    return str(as_days(day))


def _pydate(day: np.datetime64) -> dt.date:
    return dt.date.fromisoformat(iso_date(day))


def _month_slices(days: np.ndarray) -> list[tuple[str, slice]]:
    """``(YYYY-MM, slice)`` for each run of one month in the sorted ``days``."""
    months = days.astype("datetime64[M]")
    starts = np.flatnonzero(np.r_[True, months[1:] != months[:-1]])
    ends = np.r_[starts[1:], days.size]
    return [(str(months[s]), slice(s, e)) for s, e in zip(starts, ends, strict=True)]


def _units_cell(values: np.ndarray, start: int, taken: set[int]) -> tuple[int, int]:
    """First (row, tenor) from row ``start`` whose value lies in :data:`_UNITS_BAND`.

    Ten times such a value still looks like a rate, so a plausible-band check passes it and only a
    day-on-day jump or cross-tenor outlier check can catch it.
    """
    ok = (values[start:] >= _UNITS_BAND[0]) & (values[start:] <= _UNITS_BAND[1])
    ok[[i - start for i in taken if i >= start], :] = False
    hits = np.argwhere(ok)
    if hits.size == 0:  # no such cell: the first cell is still a units error, only a bigger one
        return start, 0
    return start + int(hits[0, 0]), int(hits[0, 1])


def render_feed(market: DemoMarket) -> tuple[dict[str, bytes], tuple[Defect, ...]]:
    """The inbox files as bytes (name -> content, sorted by name) and the defects planted in them.

    ``govt_YYYY-MM.csv``: wide, header ``date,1M,...,30Y``, ISO dates, percent with 4 decimals,
    ``\\n`` line ends. ``govt_restatement_YYYY-MM-DD.csv``: the same layout, one restated day, named by
    its publication date (a week after the end of the month it corrects). ``swap_YYYY-MM.parquet``:
    long, columns ``date`` (date32), ``tenor`` (string), ``rate`` (float64, decimal, rounded to
    1e-8), ``curve`` (string ``"swap"``). Only the ``govt`` files carry defects (see :class:`Defect`).
    """
    cal = market.calendar
    days = market.days
    n = days.size
    tenors = list(GOVT_TENORS)
    col = {t: j for j, t in enumerate(tenors)}
    pct = np.round(market.quotes["govt"].to_numpy() * 100.0, 4)
    cells = np.char.mod("%.4f", pct).astype(object)
    pos = {kind: int(np.searchsorted(days, cal.roll(np.datetime64(d), "following")))
           for kind, d in _DEFECT_DATES.items()}
    on_row: list[tuple[int, Defect]] = []  # defects inside an existing line: (row, defect)

    def mark(kind: str, i: int, tenor: str | None, true: float | None, written: float | str | None,
             note: str) -> Defect:
        return Defect(kind, "", None, _pydate(days[i]), tenor, true, written, note)

    i = pos["restated_value"]  # the first publication is wrong in a few tenors
    for t, delta in _RESTATED.items():
        written = round(float(pct[i, col[t]]) + delta, 4)
        cells[i, col[t]] = f"{written:.4f}"
        on_row.append((i, mark("restated_value", i, t, float(pct[i, col[t]]), written,
                               "first publication; corrected by the restatement file")))
    i = pos["stale_curve"]  # yesterday's curve sent again
    cells[i, :] = cells[i - 1, :]
    on_row.append((i, mark("stale_curve", i, None, None, None, f"all tenors copied from {iso_date(days[i - 1])}")))
    i, j = pos["missing_tenor"], col[_MISSING_TENOR]
    cells[i, j] = ""
    on_row.append((i, mark("missing_tenor", i, _MISSING_TENOR, float(pct[i, j]), None, "empty cell")))
    t, factor = _OUT_OF_RANGE
    i, j = pos["out_of_range"], col[t]
    written = round(float(pct[i, j]) * factor, 4)
    cells[i, j] = f"{written:.4f}"
    on_row.append((i, mark("out_of_range", i, t, float(pct[i, j]), written,
                           f"{factor:g}x the true value, outside any plausible band")))
    taken = set(pos.values()) | {pos["stale_curve"] - 1}
    i, j = _units_cell(pct, pos["wrong_units"], taken - {pos["wrong_units"]})
    written = round(float(pct[i, j]) * _UNITS_FACTOR, 4)
    cells[i, j] = f"{written:.4f}"
    on_row.append((i, mark("wrong_units", i, tenors[j], float(pct[i, j]), written,
                           f"{_UNITS_FACTOR:g}x the true value, still inside a plausible band")))

    lines = days.astype(str).astype(object)
    for j in range(len(tenors)):  # a loop over tenors: each step appends one column for all days
        lines = lines + "," + cells[:, j]

    # extra lines: (insert before this row position, duplicated row, text, defect)
    extras: list[tuple[int, int, str, Defect]] = []
    i = pos["duplicate_row"]
    extras.append((i + 1, i, lines[i], mark("duplicate_row", i, None, None, lines[i],
                                            "the line repeated verbatim on the next line")))
    i = pos["garbled_line"]
    garbled = f"{iso_date(days[i])[:-1]}?,{cells[i, 0][:3]},abc,,,"
    extras.append((i + 1, i, garbled, mark("garbled_line", i, None, None, garbled,
                                           "an unreadable copy of the line before it")))
    i = pos["conflicting_duplicate"]
    t, delta = _CONFLICT
    other = cells[i].copy()
    second = round(float(pct[i, col[t]]) + delta, 4)
    other[col[t]] = f"{second:.4f}"
    month_end = int(np.searchsorted(days, (days[i].astype("datetime64[M]") + 1).astype("datetime64[D]")))
    extras.append((month_end, i, ",".join([iso_date(days[i]), *other]),
                   mark("conflicting_duplicate", i, t, float(pct[i, col[t]]), second,
                        "the day sent again at the end of its file with one tenor changed")))

    before = np.array([e[0] for e in extras])
    text = np.insert(lines, before, np.array([e[2] for e in extras], dtype=object))
    origin = np.insert(np.arange(n), before, np.array([e[1] for e in extras]))
    tag = np.insert(np.full(n, -1), before, np.arange(len(extras)))
    gone = pos["missing_day"]
    keep = origin != gone
    text, origin, tag = text[keep], origin[keep], tag[keep]
    month = days.astype("datetime64[M]")[origin]

    files: dict[str, bytes] = {}
    header = "date," + ",".join(tenors)
    first_pos: dict[str, int] = {}
    for m, sl in _month_slices(month.astype("datetime64[D]")):  # one file per month
        files[f"govt_{m}.csv"] = (header + "\n" + "\n".join(text[sl]) + "\n").encode("ascii")
        first_pos[m] = sl.start

    def place(p: int, d: Defect) -> Defect:
        m = str(month[p])
        return replace(d, file=f"govt_{m}.csv", line=int(p - first_pos[m] + 2))

    row_pos = np.full(n, -1)
    normal = tag == -1
    row_pos[origin[normal]] = np.flatnonzero(normal)
    placed = [place(int(row_pos[i]), d) for i, d in on_row]
    placed += [place(int(np.flatnonzero(tag == k)[0]), e[3]) for k, e in enumerate(extras)]
    gone_month = str(days[gone].astype("datetime64[M]"))
    placed.append(replace(mark("missing_day", gone, None, None, None, "the whole day is absent"),
                          file=f"govt_{gone_month}.csv"))

    i = pos["restated_value"]  # the restatement, a week after the end of the month it corrects
    next_month = (days[i].astype("datetime64[M]") + 1).astype("datetime64[D]")
    published = cal.roll(next_month + np.timedelta64(7, "D"), "following")
    rname = f"govt_restatement_{iso_date(published)}.csv"
    files[rname] = (header + "\n" + ",".join([iso_date(days[i]), *np.char.mod("%.4f", pct[i])]) + "\n").encode()
    for t in _RESTATED:
        true = float(pct[i, col[t]])
        placed.append(replace(mark("restatement", i, t, true, true, f"restates {iso_date(days[i])}"),
                              file=rname, line=2))

    files.update(_swap_files(market))
    order = {k: n for n, k in enumerate(_DEFECT_DATES)}
    placed.sort(key=lambda d: (d.date or dt.date.min, order.get(d.kind, 99), d.file, d.tenor or ""))
    return dict(sorted(files.items())), tuple(placed)


def _swap_files(market: DemoMarket) -> dict[str, bytes]:
    days = market.days
    k = len(SWAP_TENORS)
    rates = np.round(market.quotes["swap"].to_numpy(), 8)
    table = pa.table({
        "date": pa.array(np.repeat(days, k), type=pa.date32()),
        "tenor": pa.array(np.tile(np.array(SWAP_TENORS, dtype=object), days.size), type=pa.string()),
        "rate": pa.array(rates.ravel(), type=pa.float64()),
        "curve": pa.array(np.full(days.size * k, "swap", dtype=object), type=pa.string()),
    })
    out = {}
    for month, sl in _month_slices(days):
        sink = io.BytesIO()
        pq.write_table(table.slice(sl.start * k, (sl.stop - sl.start) * k), sink)
        out[f"swap_{month}.parquet"] = sink.getvalue()
    return out
