"""Readers: every format and layout, and the rule that every row ends in exactly one place.

The expected values below are read off the literal file texts in each test (no external source is
needed: the reference is the file itself)."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from pipeline.readers import read_rate_file, to_decimal

WIDE = b"date,3M,1Y,10 Yr\n2031-01-02,4.25,4.50,5.00\n2031-01-03,4.30,,5.10\n"


def _quotes(result) -> list[tuple[str, str, float]]:
    r = result.rows
    return sorted(zip(r["as_of"].dt.strftime("%Y-%m-%d"), r["tenor"], r["value"], strict=True))


def test_wide_csv_reads_every_non_empty_cell():
    res = read_rate_file(WIDE, "govt_2031-01.csv")
    assert res.error is None and res.layout == "wide"
    assert _quotes(res) == [
        ("2031-01-02", "10Y", 5.0), ("2031-01-02", "1Y", 4.5), ("2031-01-02", "3M", 4.25),
        ("2031-01-03", "10Y", 5.1), ("2031-01-03", "3M", 4.3),
    ]
    # the empty 1Y cell on 3 Jan is a missing quote, not a zero and not a row
    assert res.rows_read == 5 and res.rejected.empty


@pytest.mark.parametrize(
    "data",
    [
        pytest.param(WIDE.replace(b",", b";"), id="semicolon"),
        pytest.param(WIDE.replace(b",", b"\t"), id="tab"),
        pytest.param(WIDE.replace(b",", b"|"), id="pipe"),
        pytest.param(b"\xef\xbb\xbf" + WIDE, id="utf8-bom"),
        pytest.param(WIDE.replace(b"\n", b"\r\n"), id="crlf"),
        pytest.param(WIDE.decode().encode("utf-16"), id="utf16"),
        pytest.param(b'"date","3M","1Y","10 Yr"\n"2031-01-02","4.25","4.50","5.00"\n'
                     b'"2031-01-03","4.30","","5.10"\n', id="quoted-fields"),
        pytest.param(WIDE.replace(b"3M,1Y,10 Yr", b"3 Mo,12 months,10 years"), id="spelled-tenors"),
        pytest.param(WIDE.replace(b"date", b"as_of"), id="as_of-column"),
    ],
)
def test_csv_dialects_give_the_same_quotes(data):
    assert _quotes(read_rate_file(data, "x.csv")) == _quotes(read_rate_file(WIDE, "x.csv"))


def test_semicolon_files_may_use_decimal_commas():
    res = read_rate_file(b"date;3M\n2031-01-02;4,25\n", "x.csv")
    assert _quotes(res) == [("2031-01-02", "3M", 4.25)]


def test_long_layout_with_curve_column():
    data = b"date,tenor,rate,curve\n2031-01-02,3M,0.0425,swap\n2031-01-02,1Y,,swap\n2031-01-02,5Y,0.05,swap\n"
    res = read_rate_file(data, "x.csv")
    assert res.layout == "long"
    assert _quotes(res) == [("2031-01-02", "3M", 0.0425), ("2031-01-02", "5Y", 0.05)]
    assert list(res.rows["curve"]) == ["swap", "swap"]


def test_parquet_long_layout():
    table = pa.table({
        "date": pa.array(np.array(["2031-01-02", "2031-01-03"], dtype="datetime64[D]"), type=pa.date32()),
        "tenor": ["3M", "1y"], "rate": [0.04, 0.045],
    })
    buf = io.BytesIO()
    pq.write_table(table, buf)
    res = read_rate_file(buf.getvalue(), "swap_2031-01.parquet")
    assert res.error is None and res.layout == "long"
    assert _quotes(res) == [("2031-01-02", "3M", 0.04), ("2031-01-03", "1Y", 0.045)]


def test_xlsx_wide_layout():
    import datetime

    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["date", "3M", "1Y"])
    ws.append([datetime.date(2031, 1, 2), 4.25, 4.5])
    ws.append([datetime.date(2031, 1, 3), None, 4.6])
    buf = io.BytesIO()
    wb.save(buf)
    res = read_rate_file(buf.getvalue(), "govt.xlsx")
    assert res.error is None
    assert _quotes(res) == [("2031-01-02", "1Y", 4.5), ("2031-01-02", "3M", 4.25), ("2031-01-03", "1Y", 4.6)]
    assert sorted(res.rows["line"].unique()) == [2, 3]


@pytest.mark.parametrize(
    ("fmt", "text"),
    [
        pytest.param("day_first", "02/01/2031", id="day-first"),
        pytest.param("day_first", "02.01.2031", id="day-first-dots"),
        pytest.param("month_first", "01/02/2031", id="month-first"),
        pytest.param("iso", "2031/01/02", id="iso-slashes"),
        pytest.param("day_first", "2031-01-02", id="iso-always-accepted"),
    ],
)
def test_date_formats(fmt, text):
    res = read_rate_file(f"date,3M\n{text},4.0\n".encode(), "x.csv", date_format=fmt)
    assert _quotes(res) == [("2031-01-02", "3M", 4.0)]


@pytest.mark.parametrize(
    ("line", "reason_part"),
    [
        pytest.param("2031-02-30,4.0,4.1", "not a valid date", id="impossible-date"),
        pytest.param("2031-01-0?,4.0,4.1", "not a valid date", id="garbled-date"),
        pytest.param("2031-01-02,4.0,4.1,9,9", "fields where the header has 3", id="too-many-fields"),
    ],
)
def test_garbled_lines_are_one_rejected_row_each(line, reason_part):
    res = read_rate_file(f"date,3M,1Y\n2031-01-01,4.0,4.1\n{line}\n".encode(), "x.csv")
    assert len(res.rows) == 2
    assert list(res.rejected["line"]) == [3]
    assert reason_part in res.rejected["reason"].iloc[0]
    assert res.rejected["raw"].iloc[0] == line


@pytest.mark.parametrize("cell", ["abc", "NaN", "inf", "-inf", "1e308e", "1,234.5", "4..5", "1e999"])
def test_bad_rate_cells_are_rejected_with_the_tenor_named(cell):
    res = read_rate_file(f'date,3M,1Y\n2031-01-02,"{cell}",4.1\n'.encode(), "x.csv")
    assert _quotes(res) == [("2031-01-02", "1Y", 4.1)]
    assert len(res.rejected) == 1 and "tenor 3M" in res.rejected["reason"].iloc[0]


@pytest.mark.parametrize(
    ("data", "message"),
    [
        pytest.param(b"", "empty file", id="empty"),
        pytest.param(b"\n\n  \n", "empty file", id="blank-lines"),
        pytest.param(b"\x00\x01\x02PNG\x00binary", "binary file", id="binary"),
        pytest.param(b"date,as_of,3M\n2031-01-02,2031-01-02,4\n", "two date columns", id="two-date-columns"),
        pytest.param(b"date,foo,bar\n2031-01-02,1,2\n", "no column of the header is a tenor", id="no-tenors"),
        pytest.param(b"date,3M,3 months\n2031-01-02,1,2\n", "names tenor 3M twice", id="duplicate-tenor-header"),
        pytest.param(b"PK\x03\x04garbage", "not a readable .xlsx", id="broken-xlsx"),
        pytest.param(b"PAR1garbage", "not a readable Parquet", id="broken-parquet"),
    ],
)
def test_unreadable_files_are_refused_with_a_reason(data, message):
    res = read_rate_file(data, "x.csv")
    assert res.error is not None and message in res.error
    assert "\n" not in res.error
    assert res.rows.empty and res.rejected.empty


def test_header_only_file_has_no_rows_and_no_error():
    res = read_rate_file(b"date,3M,1Y\n", "x.csv")
    assert res.error is None and res.rows_read == 0


def test_unknown_tenor_column_cells_are_rejected_not_dropped():
    res = read_rate_file(b"date,3M,45Q\n2031-01-02,4.0,5.0\n", "x.csv")
    assert _quotes(res) == [("2031-01-02", "3M", 4.0)]
    assert "'45Q' is not a tenor label" in res.rejected["reason"].iloc[0]


@pytest.mark.parametrize(("units", "factor"), [("percent", 0.01), ("decimal", 1.0), ("bp", 1e-4)])
def test_units_to_decimal(units, factor):
    np.testing.assert_allclose(to_decimal(np.array([425.0]), units), [425.0 * factor], rtol=1e-15)


MISSING = {m.lower() for m in ("", "N/A", "#N/A", "NA", "-", "--", "null")}  # README's default, written out


def _rows_in_text(text: str, n_fields: int) -> int:
    import csv
    import datetime

    def is_day(x: str) -> bool:
        try:
            datetime.date.fromisoformat(x.strip())
        except ValueError:
            return False
        return len(x.strip()) == 10

    n = 0
    for record in list(csv.reader(io.StringIO(text)))[1:]:
        if not any(c.strip() for c in record):
            continue
        if len(record) != n_fields or not is_day(record[0]):
            n += 1
        else:
            # a missing marker (README: `read.missing`, any case) is an empty cell, not a quote
            n += sum(1 for c in record[1:] if c.strip() and c.strip().lower() not in MISSING)
    return n


cell = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    # NUL bytes make a file binary, which the refusal tests cover
    st.text(alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"), max_size=8),
    st.just(""),
)


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.dates().map(str) | cell, cell, cell), max_size=12))
@example([("2000-01-01", "", "NULL")])  # a missing marker in another case: found by Hypothesis
def test_every_row_lands_in_exactly_one_place(records):
    """Property: rows read = accepted + rejected, whatever the cells hold, and nothing raises."""
    buf = io.StringIO()
    import csv

    w = csv.writer(buf)
    w.writerow(["date", "3M", "1Y"])
    w.writerows(records)
    text = buf.getvalue()
    res = read_rate_file(text.encode(), "x.csv")
    assert res.error is None
    # rows counted from the file's text by the README's rule, with the standard library's csv reader:
    # each data line gives one row per non-empty tenor cell, or one rejected row when it cannot be
    # split into quotes (a date that is not a date, the wrong number of fields); a blank line none
    want = _rows_in_text(text, n_fields=3)
    assert len(res.rows) + len(res.rejected) == want
    assert res.rows_read == want
    assert np.isfinite(res.rows["value"].to_numpy(dtype=float)).all()
    assert pd.Series(res.rows["line"]).ge(2).all()
