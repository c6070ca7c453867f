"""Files as users get them: title lines above the header, the data on a later sheet, N/A-style cells.

Real files on disk (CSV, .xlsx written by openpyxl, Parquet by pyarrow), read by ``read_rate_file``
with the curve's ``read.*`` options and compared with an independent reader of the same file
(pandas ``read_csv`` / ``read_excel`` with ``skiprows`` and ``na_values``, pyarrow)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import openpyxl
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from pipeline.readers import DEFAULT_MISSING, ReadOptions, read_rate_file
from pipeline.tenors import canonical_label

TITLE = [
    "Fictional Republic of Norvia - government par yields (percent)",
    "Source: invented test data; generated 2031-01-07",
]
HEADER = ["date", "1M", "3M", "1Y", "10Y"]
DATA = [
    ["2031-01-02", "4.01", "N/A", "4.20", "4.80"],
    ["2031-01-03", "#N/A", "4.11", "-", "4.81"],
    ["2031-01-06", "4.03", "4.12", "4.22", ""],
]
NA_TOKENS = ["N/A", "#N/A", "-"]   # the markers DATA uses; pandas is told the same ones


def _quotes(res) -> list[tuple[str, str, float]]:  # noqa: ANN001
    return sorted((str(np.datetime64(d, "D")), t, float(v))
                  for d, t, v in zip(res.rows["as_of"], res.rows["tenor"], res.rows["value"], strict=True))


def _melt(frame: pd.DataFrame) -> list[tuple[str, str, float]]:
    """Quotes of a wide frame read by pandas: one per non-missing cell."""
    long = frame.melt(id_vars="date", var_name="tenor", value_name="rate").dropna(subset=["rate"])
    return sorted((str(pd.Timestamp(d).date()), canonical_label(str(t)), float(r))
                  for d, t, r in zip(long["date"], long["tenor"], long["rate"], strict=True))


def _csv(path, lines: list[list[str]] | list[str]) -> bytes:  # noqa: ANN001
    text = "\n".join(x if isinstance(x, str) else ",".join(x) for x in lines) + "\n"
    path.write_text(text, encoding="utf-8")
    return path.read_bytes()


def test_csv_with_title_lines_is_refused_without_skip_rows_and_read_with_it(tmp_path):
    data = _csv(tmp_path / "govt_title.csv", [*TITLE, HEADER, *DATA])
    plain = read_rate_file(data, "govt_title.csv")
    assert plain.error is not None and "no tenor columns" in plain.error and "read.skip_rows" in plain.error
    res = read_rate_file(data, "govt_title.csv", options=ReadOptions(skip_rows=2))
    assert res.error is None and res.layout == "wide"
    # independent reader: pandas, skipping the same two lines and treating the same markers as missing
    ref = pd.read_csv(tmp_path / "govt_title.csv", skiprows=2, na_values=NA_TOKENS, keep_default_na=True,
                      dtype={"date": str})
    assert _quotes(res) == _melt(ref)
    assert len(res.rows) == 8 and res.rejected.empty   # 12 cells, 3 markers, 1 empty: 8 quotes, none rejected
    # line numbers are the file's own lines: the header is line 3, the first data line 4
    assert sorted(set(res.rows["line"])) == [4, 5, 6]


def test_na_style_cells_are_missing_quotes_not_rejected_rows(tmp_path):
    data = _csv(tmp_path / "govt_na.csv", [HEADER, *DATA])
    res = read_rate_file(data, "govt_na.csv")               # the default markers
    assert res.rejected.empty, res.rejected.to_dict("records")
    assert res.rows_read == 8
    ref = pd.read_csv(tmp_path / "govt_na.csv", na_values=NA_TOKENS, dtype={"date": str})
    assert _quotes(res) == _melt(ref)
    # with the markers switched off they are what they were before: unparseable rates, one row each
    strict = read_rate_file(data, "govt_na.csv", options=ReadOptions(missing=()))
    assert len(strict.rejected) == 3 and strict.rows_read == 11
    assert all("unparseable" in r for r in strict.rejected["reason"])


@pytest.mark.parametrize("cell", ["n/a", " NA ", "NULL", "--", "#n/a"])
def test_default_markers_match_ignoring_case_and_spaces(cell):
    res = read_rate_file(f'date,3M,1Y\n2031-01-02,"{cell}",4.1\n'.encode(), "x.csv")
    assert res.rejected.empty and _quotes(res) == [("2031-01-02", "1Y", 4.1)]


@pytest.mark.parametrize("cell", ["NaN", "inf", "#VALUE!", "#DIV/0!", "#REF!", "None"])
def test_broken_values_are_still_rejected(cell):
    # README: NaN/inf (failed arithmetic) and spreadsheet errors (broken formulas) are not "no quote"
    res = read_rate_file(f'date,3M,1Y\n2031-01-02,"{cell}",4.1\n'.encode(), "x.csv")
    assert len(res.rejected) == 1 and "tenor 3M" in res.rejected["reason"].iloc[0]


def test_a_numeric_marker_is_missing_however_written_and_in_every_format(tmp_path):
    # a feed writing -999 for "no quote": a rate equal to the marker is missing, in text or as a float
    opts = ReadOptions(missing=("", "-999"))
    csv_res = read_rate_file(b"date,tenor,rate\n2031-01-02,3M,4.1\n2031-01-02,1Y,-999.0\n2031-01-02,2Y,-999\n",
                             "x.csv", options=opts)
    assert _quotes(csv_res) == [("2031-01-02", "3M", 4.1)] and csv_res.rejected.empty
    table = pa.table({"date": pa.array([dt.date(2031, 1, 2)] * 2, pa.date32()),
                      "tenor": ["3M", "1Y"], "rate": [4.1, -999.0]})
    pq.write_table(table, tmp_path / "swap_typed.parquet")
    data = (tmp_path / "swap_typed.parquet").read_bytes()
    assert _quotes(read_rate_file(data, "swap_typed.parquet", options=opts)) == [("2031-01-02", "3M", 4.1)]
    # without the marker, -999 is a rate like any other (refused later as out of range, not here)
    assert len(read_rate_file(data, "swap_typed.parquet").rows) == 2


def test_parquet_text_rates_with_markers(tmp_path):
    table = pa.table({"date": ["2031-01-02", "2031-01-02", "2031-01-03"], "tenor": ["3M", "1Y", "3M"],
                      "rate": ["4.1", "N/A", "4.2"]})
    pq.write_table(table, tmp_path / "swap_text.parquet")
    res = read_rate_file((tmp_path / "swap_text.parquet").read_bytes(), "swap_text.parquet")
    ref = pq.read_table(tmp_path / "swap_text.parquet").to_pandas()          # pyarrow as the reader
    ref = ref[~ref["rate"].isin(NA_TOKENS)]
    assert _quotes(res) == sorted((d, t, float(r)) for d, t, r in zip(ref["date"], ref["tenor"], ref["rate"],
                                                                       strict=True))
    assert res.rejected.empty


def _workbook(path, sheets: dict[str, list[list[object]]]) -> bytes:  # noqa: ANN001
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for r in rows:
            ws.append(r)
    wb.save(path)
    return path.read_bytes()


def _typed(rows: list[list[str]]) -> list[list[object]]:
    """Cells as a spreadsheet holds them: numbers as numbers, markers as text, empty as None."""
    def cell(c: str) -> object:
        try:
            return float(c)
        except ValueError:
            return c or None
    return [[pd.Timestamp(r[0]).to_pydatetime(), *(cell(c) for c in r[1:])] for r in rows]


@pytest.fixture
def workbook(tmp_path):  # noqa: ANN201
    path = tmp_path / "govt_book.xlsx"
    data = _workbook(path, {
        "Notes": [["This workbook holds invented rates"], ["See the sheet Curve"]],
        "Curve": [[TITLE[0]], [], HEADER, *_typed(DATA)],
    })
    return path, data


def test_xlsx_data_on_a_later_sheet_below_a_title(workbook):
    path, data = workbook
    first = read_rate_file(data, path.name)                      # the first sheet holds notes only
    assert first.error is not None and "no tenor columns" in first.error
    by_name = read_rate_file(data, path.name, options=ReadOptions(skip_rows=2, sheet="Curve"))
    by_index = read_rate_file(data, path.name, options=ReadOptions(skip_rows=2, sheet=1))
    # a blank row below the title is skipped by the header search too: one title line is enough
    by_search = read_rate_file(data, path.name, options=ReadOptions(skip_rows=1, sheet="curve"))
    assert by_name.error is None, by_name.error
    ref = pd.read_excel(path, sheet_name="Curve", skiprows=2, na_values=NA_TOKENS)   # pandas as the reader
    want = _melt(ref)
    assert len(want) == 8
    assert _quotes(by_name) == want and _quotes(by_index) == want and _quotes(by_search) == want
    assert by_name.rejected.empty
    assert sorted(set(by_name.rows["line"])) == [4, 5, 6]        # sheet rows: header on row 3


@pytest.mark.parametrize(("sheet", "part"), [("Rates", "no sheet named 'Rates'"), (5, "no sheet number 5")],
                         ids=["name", "index"])
def test_a_sheet_that_does_not_exist_is_refused_naming_the_sheets(workbook, sheet, part):
    path, data = workbook
    res = read_rate_file(data, path.name, options=ReadOptions(sheet=sheet))
    assert res.error is not None and part in res.error
    assert "'Notes', 'Curve'" in res.error and "\n" not in res.error
    assert res.rows.empty and res.rejected.empty


def test_skip_rows_past_the_end_is_refused_in_one_line(tmp_path):
    data = _csv(tmp_path / "govt_short.csv", [*TITLE])
    res = read_rate_file(data, "govt_short.csv", options=ReadOptions(skip_rows=2))
    assert res.error is not None and "read.skip_rows" in res.error and "\n" not in res.error


def test_default_marker_set_is_as_documented():
    # README "### 1. Configure": the default read.missing list
    assert DEFAULT_MISSING == ("", "N/A", "#N/A", "NA", "-", "--", "null")
    assert "nan" not in ReadOptions().missing_set             # deliberately not a marker (README)
