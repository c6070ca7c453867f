"""Property-based tests of the readers (hypothesis): whatever bytes come in, ``read_rate_file`` returns
(never raises), with one-line reasons, finite values, real dates and every row traced to a data line
of the file. The number of rows is counted apart from the reader, from the text it was given: for
grids of simple cells by ``corpus.count_rows`` (the README's rule: one row per non-empty tenor cell,
one for a line that cannot be split into quotes), for one-quote lines one per line."""

from __future__ import annotations

import io
import math

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pipeline.readers import ReadLimits, read_rate_file, to_decimal
from tests.hardening.corpus import count_rows
from tests.hardening.harness import TALLY

SETTINGS = settings(max_examples=250, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
NAMES = st.sampled_from(["f.csv", "f.parquet", "f.xlsx", "f.xls", "f", "f.txt"])
PREFIXES = st.sampled_from([b"", b"PK\x03\x04", b"PAR1", b"\xef\xbb\xbf", b"\xff\xfe", b"\xfe\xff", b"date,3M\n",
                            b"date,tenor,rate\n", b"\x00"])


def _check(result, limits: ReadLimits | None = None, text: str | None = None, end: str = "\n") -> None:  # noqa: ANN001
    """``text``: the file's text when the test made one; every row must then come from one of its
    data lines (line 1 is the header), so no row is invented from nothing."""
    TALLY.property_examples += 1
    if result.error is not None:
        assert isinstance(result.error, str) and result.error.strip()
        assert "\n" not in result.error and "\r" not in result.error
        assert len(result.rows) == 0 and len(result.rejected) == 0
        return
    for reason in result.rejected["reason"]:
        assert isinstance(reason, str) and reason.strip() and "\n" not in reason and "\r" not in reason
    values = result.rows["value"].to_numpy(dtype=float)
    assert np.isfinite(values).all()
    assert not result.rows["as_of"].isna().any()
    assert (result.rows["line"] >= 2).all() and (result.rejected["line"] >= 2).all()
    if limits is not None:
        assert len(set(result.rows["line"]) | set(result.rejected["line"])) <= limits.max_lines
    if text is not None:
        n_lines = len(text.split(end)) - (1 if text.endswith(end) else 0)
        assert (result.rows["line"] <= n_lines).all() and (result.rejected["line"] <= n_lines).all()


@SETTINGS
@given(prefix=PREFIXES, body=st.binary(max_size=3000), name=NAMES)
def test_any_bytes_never_raise(prefix, body, name):
    _check(read_rate_file(prefix + body, name))


_LABELS = ["date", "as_of", "3M", "1Y", "10y", "12M", "3 Mo", "tenor", "rate", "curve", "7Q", "", " ", "=1+1", "日本",
           "\ufeffdate", "DATE", "1W", "ON", "0M", "99999Y"]
_CELLS = ["4.1", "-0.5", "0", "1e308", "1e309", "NaN", "inf", "", " ", "2031-01-02", "2031-02-30", "2031-13-01",
          "3M", "1Y", "abc", "=A1", "+4", "@x", "4,1", "1.234,5", "%", "4.1%", "０", "٤", "\u00a0", "\x00", "\ufffd",
          '"', "'", "20310102", "2031/01/02", "31/01/2031", "9" * 60, "-", "."]


@SETTINGS
@given(header=st.lists(st.sampled_from(_LABELS), min_size=0, max_size=8),
       rows=st.lists(st.lists(st.sampled_from(_CELLS), max_size=9), max_size=25),
       sep=st.sampled_from([",", ";", "\t", "|"]), end=st.sampled_from(["\n", "\r\n", "\r"]), name=NAMES)
def test_grids_of_hostile_cells(header, rows, sep, end, name):
    text = end.join([sep.join(header), *(sep.join(r) for r in rows)]) + end
    _check(read_rate_file(text.encode("utf-8"), name), text=text, end=end)


_DAYS = ["2031-01-02", "2031-1-3", "2031/01/06", "20310107", "2031-02-30", "2031-13-01", "x", "", "0000-01-01"]
_RATES = ["4.1", "-0.25", "", " ", "1e3", "abc", "NaN", "inf", "0.0001", "7"]


@SETTINGS
@given(days=st.lists(st.sampled_from(_DAYS), max_size=30, unique=False),
       data=st.data(), n_tenors=st.integers(1, 5))
def test_rows_read_match_the_cells(days, data, n_tenors):
    """Clean-shaped wide grids: rows read is exactly the count from the cells, none lost or invented."""
    header = ["date", "3M", "1Y", "2Y", "5Y", "10Y"][: n_tenors + 1]
    rows = []
    for d in days:
        width = data.draw(st.integers(1, n_tenors + 2), label="width")
        rows.append([d, *data.draw(st.lists(st.sampled_from(_RATES), min_size=width - 1, max_size=width - 1))])
    text = "\n".join([",".join(header), *(",".join(r) for r in rows)]) + "\n"
    result = read_rate_file(text.encode(), "g.csv")
    _check(result, text=text)
    want = count_rows(header, rows)
    assert len(result.rows) + len(result.rejected) == want
    assert result.rows_read == want


@SETTINGS
@given(cut=st.integers(0, 10_000), flips=st.lists(st.tuples(st.integers(0, 10_000), st.integers(0, 255)),
                                                 max_size=6), kind=st.sampled_from(["parquet", "xlsx"]))
def test_damaged_parquet_and_xlsx(cut, flips, kind):
    data = bytearray(_GOOD[kind])
    for pos, byte in flips:
        data[pos % len(data)] = byte
    data = data[: max(1, cut % (len(data) + 1))] if cut % 3 == 0 else data
    _check(read_rate_file(bytes(data), f"f.{kind}"))


@SETTINGS
@given(n=st.integers(0, 40), limit=st.integers(1, 30))
def test_line_limit(n, limit):
    limits = ReadLimits(max_lines=limit)
    text = "date,3M\n" + "".join(f"2031-01-{1 + k % 28:02d},4.{k}\n" for k in range(n))
    result = read_rate_file(text.encode(), "f.csv", limits=limits)
    _check(result, limits, text=text)
    assert (result.error is not None) == (n > limit)
    if n <= limit:
        # each data line holds one quote (counted from the text: n lines after the header)
        assert len(result.rows) + len(result.rejected) == result.rows_read == n


@SETTINGS
@given(x=st.floats(allow_nan=False, allow_infinity=False), units=st.sampled_from(["percent", "bp", "decimal"]))
def test_to_decimal_stays_finite(x, units):
    divisor = {"percent": 100.0, "bp": 10_000.0, "decimal": 1.0}[units]
    y = float(to_decimal(np.array([x]), units)[0])
    TALLY.property_examples += 1
    assert math.isfinite(y)
    # rounding to 14 decimals moves a value by at most 5e-15 (plain division is the reference)
    assert abs(y - x / divisor) <= 5e-15 + 1e-15 * abs(x / divisor)


def _good_bytes() -> dict[str, bytes]:
    import openpyxl

    buf = io.BytesIO()
    pq.write_table(pa.table({"date": ["2031-01-02", "2031-01-03"], "3M": [4.1, 4.2], "1Y": [4.3, None]}), buf)
    wb = openpyxl.Workbook()
    ws = wb.active
    for r in (["date", "3M", "1Y"], ["2031-01-02", 4.1, 4.2], ["2031-01-03", 4.1, "x"]):
        ws.append(r)
    out = io.BytesIO()
    wb.save(out)
    return {"parquet": buf.getvalue(), "xlsx": out.getvalue()}


_GOOD = _good_bytes()


# --- the column-wise Parquet path against the cell-by-cell one ------------------------------------
#
# A long-layout Parquet file with typed columns is read column-wise (pipeline.readers.layouts.read_typed_long);
# any other goes cell by cell through text. The reference here is that text path run on the same
# table: both must give the same rows, values, lines and raw text, whatever the table holds.

_TENOR_TEXT = ["1W", "1M", "3M", " 6M", "1Y", "10y", "30Y", "12M", "7Q", "", "ON", "abc"]
_DATE_TYPES = st.sampled_from([pa.date32(), pa.timestamp("us"), pa.timestamp("ns"), pa.timestamp("s", tz="UTC"),
                               pa.string()])


@SETTINGS
@given(n=st.integers(0, 25), data=st.data(), date_type=_DATE_TYPES,
       rate_type=st.sampled_from([pa.float64(), pa.float32(), pa.int64()]),
       names=st.sampled_from([("date", "tenor", "rate"), ("As_Of", "Tenor", "RATE"), (" date", "tenor ", "rate"),
                              ("observation_date", "tenor", "rate")]),
       with_curve=st.booleans(), order=st.permutations(range(4)))
def test_typed_parquet_reads_as_the_text_path_does(n, data, date_type, rate_type, names, with_curve, order):
    import datetime as dt

    import pandas as pd

    from pipeline.readers.decode import table_grid
    from pipeline.readers.layouts import read_long, read_typed_long

    days = data.draw(st.lists(st.one_of(st.none(), st.integers(-30_000, 40_000)), min_size=n, max_size=n))
    if not data.draw(st.booleans()):
        days = [0 if d is None else d for d in days]           # mostly, dates are all present
    tenors = data.draw(st.lists(st.sampled_from(_TENOR_TEXT[:7] if data.draw(st.booleans()) else _TENOR_TEXT),
                                min_size=n, max_size=n))
    rates = data.draw(st.lists(st.one_of(st.none(), st.floats(width=32 if rate_type == pa.float32() else 64),
                                         st.floats(-0.05, 0.2)), min_size=n, max_size=n))
    curves = data.draw(st.lists(st.one_of(st.none(), st.sampled_from(["swap", " swap ", "", "govt"])),
                                min_size=n, max_size=n))
    base = dt.date(1970, 1, 1)
    as_dates = [None if d is None else base + dt.timedelta(days=d) for d in days]
    if pa.types.is_timestamp(date_type):
        hours = data.draw(st.lists(st.integers(0, 23), min_size=n, max_size=n))
        stamps = [None if x is None else dt.datetime.combine(x, dt.time(h))
                  for x, h in zip(as_dates, hours, strict=True)]
        col = pa.array(stamps, type=pa.timestamp("us")).cast(date_type)
    elif date_type == pa.string():
        col = pa.array([None if x is None else x.isoformat() for x in as_dates])
    else:
        col = pa.array(as_dates, type=pa.date32())
    if rate_type == pa.int64():
        whole = [None if r is None or not math.isfinite(r) or abs(r) > 1e12 else int(r * 1000) for r in rates]
        rate_col = pa.array(whole, pa.int64())
    else:
        rate_col = pa.array(rates, type=pa.float64()).cast(rate_type) if n else pa.array([], rate_type)
    columns = [(names[0], col), (names[1], pa.array(tenors, pa.string())), (names[2], rate_col),
               ("curve", pa.array(curves, pa.string()))]
    columns = [columns[i] for i in order if with_curve or i != 3]
    table = pa.table({k: v for k, v in columns})
    buf = io.BytesIO()
    pq.write_table(table, buf)
    got = read_rate_file(buf.getvalue(), "f.parquet")
    table = pq.read_table(io.BytesIO(buf.getvalue()))
    want = read_long(table_grid(table), "iso")
    TALLY.property_examples += 1
    assert got.error == want.error and got.layout == want.layout and got.columns == want.columns
    pd.testing.assert_frame_equal(got.rows, want.rows, check_dtype=True, check_exact=True)
    pd.testing.assert_frame_equal(got.rejected, want.rejected, check_dtype=True, check_exact=True)
    # the column-wise path must really be the one taken for clean typed tables
    clean = (date_type == pa.date32() and rate_type != pa.int64() and None not in days
             and set(tenors) <= set(_TENOR_TEXT[:7]) and all(r is None or math.isfinite(r) for r in rates)
             and all(-354285 <= d <= 2932896 for d in days))
    if clean:
        assert read_typed_long(table) is not None


_SAMPLE_CHARS = st.sampled_from([",", ";", "\t", "|", "\n", "\n", " ", "a", "3M", "4.1", "2031-01-02", '"', "'", "",
                                 '"x"', ",,", "\n\n"])


@SETTINGS
@given(parts=st.lists(_SAMPLE_CHARS, max_size=60), repeat=st.integers(1, 6))
def test_plain_delimiter_agrees_with_the_sniffer(parts, repeat):
    # csv.Sniffer (the standard library) is the reference; the shortcut may decline, never disagree
    from pipeline.readers.decode import _plain_delimiter, _sniffed_delimiter

    line = "".join(parts)
    for sample in (line, "\n".join([line] * repeat)):
        TALLY.property_examples += 1
        plain = _plain_delimiter(sample)
        if plain is not None:
            assert plain == _sniffed_delimiter(sample)


def test_plain_delimiter_takes_the_usual_files():
    from pipeline.readers.decode import _plain_delimiter

    assert _plain_delimiter("date,3M,1Y\n2031-01-02,4.1,4.2\n2031-01-03,4.1,4.3") == ","
    assert _plain_delimiter("date;3M\n2031-01-02;4,1") is None      # a decimal comma: the sniffer decides
