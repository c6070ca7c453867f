"""A seeded corpus of malformed and hostile rate files, written to a folder.

Every file is listed in a manifest with its category and, where the file was built from a grid of
cells simple enough to count by hand, the number of rows the module docstring of
``pipeline.readers`` says it holds (``expect_rows``): per data line, one row per non-empty tenor cell
when the date is a real ISO date and the line is no wider than the header, else one row for the
line; a blank line is no row. That count is made here from the cells, independently of the reader.
"""

from __future__ import annotations

import csv
import io
import os
import random
import re
import struct
import zipfile
from dataclasses import dataclass
from datetime import date
from decimal import Decimal
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from tests.hardening.harness import GOVT_TENORS, business_days, market

CORPUS_CONFIG = """
[store]
path = "store.duckdb"

[curves.govt]
files = "govt_*"
quote = "par"
compounding = "semiannual"
day_count = "ACT/365F"
units = "percent"
tenors = ["3M", "1Y", "2Y", "5Y", "10Y"]
forward.starts = ["0M", "1Y"]
forward.tenors = ["3M", "1Y"]

[curves.swap]
files = "swap_*"
quote = "zero"
compounding = "annual"
day_count = "ACT/360"
units = "decimal"
tenors = ["1M", "3M", "1Y", "5Y", "10Y"]
"""


@dataclass
class BadFile:
    path: Path
    category: str
    expect_rows: int | None = None      # rows read, counted from the cells (None: not countable here)
    expect_status: str | None = None    # "loaded" | "refused" | "missing" (None: either)


_ISO = re.compile(r"^(\d{4})-(\d{1,2})-(\d{1,2})$|^(\d{4})/(\d{1,2})/(\d{1,2})$|^(\d{4})(\d\d)(\d\d)$")


def _iso_day(text: str) -> bool:
    """A real calendar date written year first (2031-01-02, 2031-1-2, 2031/01/02 or 20310102)."""
    m = _ISO.match(text.strip())
    if not m:
        return False
    y, mo, d = (int(g) for g in m.groups() if g is not None)
    try:
        date(y, mo, d)
    except ValueError:
        return False
    return True


def count_rows(header: list[str], records: list[list[str]]) -> int:
    """Rows in a wide grid with the date in column 0, by the readers' documented rule."""
    n = 0
    for r in records:
        if not any(c.strip() for c in r):
            continue                      # a blank line holds no quote
        if len(r) > len(header) or not _iso_day(r[0]):
            n += 1
        else:
            n += sum(1 for c in r[1:] if c.strip())
    return n


class Corpus:
    def __init__(self, folder: Path, seed: int) -> None:
        self.folder = folder
        folder.mkdir(parents=True, exist_ok=True)
        self.rng = random.Random(seed)
        self.files: list[BadFile] = []
        self.day0 = np.datetime64("2031-01-01")
        self._names: set[str] = set()

    # -- helpers -----------------------------------------------------------------------------

    def _name(self, stem: str, ext: str, prefix: str = "govt_") -> Path:
        name = f"{prefix}{stem}{ext}"
        k = 1
        while name in self._names:
            k += 1
            name = f"{prefix}{stem}-{k}{ext}"
        self._names.add(name)
        return self.folder / name

    def add_bytes(self, category: str, stem: str, ext: str, data: bytes, *, prefix: str = "govt_",
                  expect_rows: int | None = None, expect_status: str | None = None) -> Path:
        p = self._name(stem, ext, prefix)
        p.write_bytes(data)
        self.files.append(BadFile(p, category, expect_rows, expect_status))
        return p

    def good_grid(self, days: int = 20) -> tuple[list[str], list[list[str]]]:
        """A clean wide grid of govt par yields on fresh days (no two files share a day)."""
        first = self.day0
        self.day0 = self.day0 + days * 2
        d = business_days(str(first), str(first + days * 2))[:days]
        m = market(str(d[0]), str(d[-1]), seed=self.rng.randrange(1 << 30))["govt"]
        rows = [[str(day)] + [f"{v:.4f}" for v in rates] for day, rates in zip(m[0].astype(str), m[2], strict=True)]
        return ["date", *GOVT_TENORS], rows

    @staticmethod
    def csv_text(header: list[str], rows: list[list[str]], sep: str = ",", end: str = "\n") -> str:
        """Proper CSV: a cell holding the delimiter or a quote is quoted, so each record keeps its cells."""
        buf = io.StringIO()
        w = csv.writer(buf, delimiter=sep, lineterminator=end)
        w.writerow(header)
        w.writerows(rows)
        return buf.getvalue()

    def add_grid(self, category: str, stem: str, header: list[str], rows: list[list[str]], *,
                 sep: str = ",", ext: str = ".csv", prefix: str = "govt_", countable: bool = True,
                 expect_status: str | None = "loaded") -> Path:
        data = self.csv_text(header, rows, sep).encode("utf-8")
        return self.add_bytes(category, stem, ext, data, prefix=prefix,
                              expect_rows=count_rows(header, rows) if countable else None,
                              expect_status=expect_status)

    def with_cells(self, category: str, stem: str, tokens: list[str], *, per_file: int = 3,
                   column: str = "rate") -> None:
        """One file per token: a clean grid with the token put into ``per_file`` cells."""
        for i, tok in enumerate(tokens):
            header, rows = self.good_grid(8)
            for _ in range(per_file):
                r = self.rng.randrange(len(rows))
                c = 0 if column == "date" else self.rng.randrange(1, len(header))
                rows[r][c] = tok
            self.add_grid(category, f"{stem}{i:02d}", header, rows)

    # -- the corpus ----------------------------------------------------------------------------

    def build(self) -> list[BadFile]:
        self.truncated()
        self.binary()
        self.encodings()
        self.huge()
        self.columns()
        self.duplicated_headers()
        self.formulas()
        self.dates()
        self.rates()
        self.separators_and_units()
        self.zip_bombs()
        self.names()
        self.structure()
        self.parquet_and_xlsx()
        self.not_regular()
        self.mutations(130)
        return self.files

    def _good_bytes(self, kind: str) -> bytes:
        header, rows = self.good_grid(40)
        if kind == "csv":
            return self.csv_text(header, rows).encode()
        if kind == "parquet":
            buf = io.BytesIO()
            pq.write_table(pa.table({h: [r[i] for r in rows] for i, h in enumerate(header)}), buf)
            return buf.getvalue()
        import openpyxl

        wb = openpyxl.Workbook()
        ws = wb.active
        ws.append(header)
        for r in rows:
            ws.append([r[0], *(float(x) for x in r[1:])])
        buf = io.BytesIO()
        wb.save(buf)
        return buf.getvalue()

    def truncated(self) -> None:
        for kind, ext, n in (("csv", ".csv", 12), ("parquet", ".parquet", 9), ("xlsx", ".xlsx", 9)):
            for i in range(n):
                data = self._good_bytes(kind)
                cut = self.rng.randrange(1, len(data) - 1)
                self.add_bytes("truncated", f"truncated_{kind}{i:02d}", ext, data[:cut],
                               expect_status="refused" if kind != "csv" else None)

    def binary(self) -> None:
        heads = [b"", b"\x89PNG\r\n\x1a\n", b"\x1f\x8b\x08\x00", b"\x7fELF\x02\x01\x01", b"%PDF-1.7\n", b"PAR1",
                 b"PK\x03\x04", b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", b"SQLite format 3\x00"]
        for i in range(18):
            n = self.rng.choice([1, 7, 100, 4096, 70_000])
            body = self.rng.randbytes(n)
            if i % 3 == 0:
                body = bytes(b or 1 for b in body)        # no NUL byte at all: only the decoders stand guard
            ext = self.rng.choice([".csv", ".parquet", ".xlsx", ".txt", ""])
            self.add_bytes("binary", f"binary{i:02d}", ext, heads[i % len(heads)] + body)

    def encodings(self) -> None:
        header, rows = self.good_grid(10)
        header = ["date", "3 mois", "1 año", "2Y", "5Y", "10Y"]     # accents in the labels
        text = self.csv_text(header, rows)
        for codec in ("utf-16", "utf-16-le", "utf-16-be", "utf-32", "cp1252", "latin-1", "shift_jis", "cp500",
                      "utf-8-sig", "mac_roman", "koi8_r"):
            self.add_bytes("encoding", f"enc_{codec}", ".csv", text.encode(codec, errors="replace"))
        raw = text.encode("utf-16")
        self.add_bytes("encoding", "enc_utf16_odd_length", ".csv", raw + raw[:1])
        self.add_bytes("encoding", "enc_utf16_truncated", ".csv", raw[: len(raw) // 2 * 2 - 1])
        self.add_bytes("encoding", "enc_utf16_bom_only", ".csv", b"\xff\xfe")
        good = self.csv_text(*self.good_grid(10)).encode()
        pos = self.rng.randrange(len(good))
        self.add_bytes("encoding", "enc_invalid_utf8", ".csv", good[:pos] + b"\xc3\x28\xa0\xa1\xff" + good[pos:])
        self.add_bytes("encoding", "enc_overlong_utf8", ".csv", good.replace(b",", b"\xc0\xac", 3))

    def huge(self) -> None:
        header, rows = self.good_grid(10)
        text = self.csv_text(header, rows)
        lines = text.splitlines()
        for i, line in enumerate(["x" * 1_000_000, "9" * 300_000, "," * 2_000_000, "2031-02-03," + "4" * 200_000,
                                  "\"" + "y" * 500_000 + "\""]):
            body = "\n".join(lines[:5] + [line] + lines[5:]) + "\n"
            self.add_bytes("huge line", f"huge_line{i}", ".csv", body.encode())
        self.add_bytes("huge line", "huge_header", ".csv", ("date," + "A" * 3_000_000 + "\n" + "\n".join(lines[1:]) +
                                                            "\n").encode())
        # many short garbage lines: every one is a rejected row
        garbage = "date,3M,1Y\n" + "x\n" * 200_000
        self.add_bytes("huge line", "garbage_lines", ".csv", garbage.encode(), expect_rows=200_000,
                       expect_status="loaded")

    def columns(self) -> None:
        wide = "date," + ",".join(f"{k}M" for k in range(1, 1_000_001)) + "\n2031-01-02," + "4," * 999_999 + "4\n"
        self.add_bytes("10^6 columns", "million_columns", ".csv", wide.encode(), expect_status="refused")
        header, rows = self.good_grid(6)
        rows[2] = rows[2] + ["4.0"] * 1_000_000
        self.add_grid("10^6 columns", "million_fields_row", header, rows)
        blank = "date," + "," * 1_000_000 + "\n2031-01-02,4\n"
        self.add_bytes("10^6 columns", "million_empty_columns", ".csv", blank.encode(), expect_status="refused")
        cols = {f"c{k}": [1.0] for k in range(3000)}
        buf = io.BytesIO()
        pq.write_table(pa.table({"date": ["2031-01-02"], **cols}), buf)
        self.add_bytes("10^6 columns", "wide_parquet", ".parquet", buf.getvalue(), expect_status="refused")

    def duplicated_headers(self) -> None:
        headers = [
            ["date", "3M", "3M", "1Y"], ["date", "3M", "3 Mo", "1Y"], ["date", "1Y", "12M", "2Y"],
            ["date", "date", "3M"], ["date", "as_of", "3M"], ["3M", "3M", "3M"], ["date", "10y", "10 years"],
        ]
        for i, h in enumerate(headers):
            rows = [["2031-01-02"] + ["4.1"] * (len(h) - 1)]
            self.add_grid("duplicated header", f"dup_header{i}", h, rows, countable=False, expect_status="refused")
        for i, h in enumerate([["date", "tenor", "tenor", "rate"], ["date", "tenor", "rate", "rate"],
                               ["date", "as_of", "tenor", "rate"]]):
            rows = [["2031-01-02"] * (len(h) - 2) + ["3M", "4.1"]]
            self.add_grid("duplicated header", f"dup_long{i}", h, rows, countable=False, expect_status="refused")
        self.add_grid("duplicated header", "dup_empty_names", ["date", "", "", "3M"], [["2031-01-02", "", "", "4"]],
                      countable=False)

    def formulas(self) -> None:
        tokens = ["=1+2", '=HYPERLINK("http://example.invalid/x","click")', "+cmd|' /C calc'!A0", "@SUM(A1:A9)",
                  "-2+3", "=cmd|'/c notepad'!A1", "\t=1", "=0.041", "+4.1", "-0.5", "=\"4.1\"", "@4.1"]
        self.with_cells("formula", "formula_rate", tokens)
        self.with_cells("formula", "formula_date", ["=TODAY()", "=DATE(2031,1,2)", "@2031-01-02", "+2031-01-02"],
                        column="date")
        header, rows = self.good_grid(5)
        self.add_grid("formula", "formula_header", ["date", "=3M", "1Y", "+2Y", "@5Y", "10Y"], rows)

    def dates(self) -> None:
        tokens = ["2031-02-30", "2031-02-29", "2031-13-01", "2031-00-10", "2031-04-31", "0000-01-01", "1000-01-01",
                  "2031-02-30T00:00:00", "31/02/2031", "2031-2-3", "20310230", "2031-01-02\u00a0", "\u0662\u0660\u0663"
                  "\u0661-01-02", "2031\u201301\u201302", "9999-12-31", "1900-02-29", "2400-02-29", "-2031-01-02"]
        self.with_cells("impossible date", "date", tokens, per_file=2, column="date")

    def rates(self) -> None:
        tokens = ["1e308", "-1e308", "1e309", "1.7976931348623157e308", "4.9e-324", "-0.0", "1e-320",
                  "99999999999999999999", "1e30", "-50", "1E+308", "0x1p3", "1e99999", "4.1.2", "4..1", "٤٫١"]
        self.with_cells("extreme rate", "rate", tokens)
        self.with_cells("NaN or inf", "nan", ["NaN", "nan", "NAN", "inf", "-inf", "+inf", "Infinity", "-Infinity",
                                              "#N/A", "#DIV/0!", "NULL", "None", "N/A", "-", ".", "..", "∞"])

    def separators_and_units(self) -> None:
        header, rows = self.good_grid(6)
        rows[1][1], rows[2][2], rows[3][3] = "1,234.5", "4,10", "1 234"
        self.add_grid("thousands separator", "thousands_comma", header, rows)
        header, rows = self.good_grid(6)
        rows = [[r[0]] + [c.replace(".", ",") for c in r[1:]] for r in rows]
        rows[1][1], rows[2][2] = "1.234,5", "4.100,25"
        self.add_grid("thousands separator", "decimal_comma_semicolon", header, rows, sep=";")
        for i, tok in enumerate(["1'234.5", "1_000", "4,1", "1 234,5", "4\u202f100"]):
            header, rows = self.good_grid(6)
            rows[2][2] = tok
            self.add_grid("thousands separator", f"thousands{i}", header, rows, countable=tok != "4,1")
        for i, toks in enumerate([["0.041", "0.042"], ["4.1%", "4.2 %"], ["410bp", "420 bp"], ["410", "420"],
                                  ["4.1 pct", "0.042 dec"], ["0.0001", "41000"]]):
            header, rows = self.good_grid(6)
            rows[1][1], rows[3][4] = toks
            self.add_grid("mixed units", f"mixed_units{i}", header, rows)

    def zip_bombs(self) -> None:
        # a real zip whose one member is 256 MiB of zeros (about 250 KB packed), renamed .xlsx
        buf = io.BytesIO()
        with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as zf:
            zf.writestr("[Content_Types].xml", "<Types/>")
            with zf.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as member:
                chunk = b"\0" * (1 << 20)
                for _ in range(256):
                    member.write(chunk)
        bomb = buf.getvalue()
        self.add_bytes("zip bomb", "zip_bomb", ".xlsx", bomb, expect_status="refused")
        self.add_bytes("zip bomb", "zip_bomb_as_csv", ".csv", bomb, expect_status="refused")
        # the same bytes with the sizes in the headers lowered to look harmless
        self.add_bytes("zip bomb", "zip_bomb_lying_sizes", ".xlsx", _lie_about_sizes(bomb), expect_status="refused")
        # a zip inside a zip, and a workbook whose sheet claims (and uses) the last cell of the grid
        inner = io.BytesIO()
        with zipfile.ZipFile(inner, "w", zipfile.ZIP_DEFLATED) as zf:
            zf.writestr("sheet.xml", b"\0" * (8 << 20))
        outer = io.BytesIO()
        with zipfile.ZipFile(outer, "w", zipfile.ZIP_STORED) as zf:
            zf.writestr("xl/worksheets/sheet1.xml", inner.getvalue())
        self.add_bytes("zip bomb", "zip_in_zip", ".xlsx", outer.getvalue(), expect_status="refused")
        self.add_bytes("zip bomb", "xlsx_last_cell", ".xlsx", _xlsx_claiming_whole_grid(self._good_bytes("xlsx")))
        many = io.BytesIO()
        with zipfile.ZipFile(many, "w", zipfile.ZIP_DEFLATED) as zf:
            for k in range(5000):
                zf.writestr(f"m/{k}.xml", "<a/>")
        self.add_bytes("zip bomb", "zip_many_members", ".xlsx", many.getvalue(), expect_status="refused")

    def names(self) -> None:
        stems = ["with spaces in it", "'single quoted'", '"double quoted"', "ünïcödé", "日本語の利回り", "emoji 📈",
                 "rtl \u202eobsv.exe", "$(touch pwned)", ";rm -rf ~;", "%s%n%x", "back\\slash", "[bold]styled",
                 "  leading and trailing  ", "a" * 200, "dash -- --help", "semi;colon,comma", "q'uo\"te`s",
                 "Ω≈ç√∫", "zero\u200bwidth", "percent%20encoded"]
        for s in stems:
            header, rows = self.good_grid(5)
            self.add_grid("path name", s, header, rows)

    def structure(self) -> None:
        g = self.good_grid
        add = self.add_bytes
        add("structure", "empty", ".csv", b"", expect_status="refused")
        add("structure", "only_bom", ".csv", b"\xef\xbb\xbf", expect_status="refused")
        add("structure", "blank_lines", ".csv", b"\n\n \n\t\n", expect_status="refused")
        add("structure", "header_only", ".csv", b"date,3M,1Y\n", expect_rows=0, expect_status="loaded")
        header, rows = g(6)
        add("structure", "cr_only", ".csv", self.csv_text(header, rows, end="\r").encode(),
            expect_rows=count_rows(header, rows), expect_status="loaded")
        header, rows = g(6)
        add("structure", "crlf", ".csv", self.csv_text(header, rows, end="\r\n").encode(),
            expect_rows=count_rows(header, rows), expect_status="loaded")
        for sep, name in (("\t", "tab"), ("|", "pipe"), (";", "semicolon")):
            header, rows = g(6)
            self.add_grid("structure", f"delimiter_{name}", header, rows, sep=sep)
        header, rows = g(8)
        rows[2] = rows[2][:3]
        rows[4] = rows[4] + ["4.4", "4.5"]
        rows[5] = [rows[5][0]]
        self.add_grid("structure", "ragged", header, rows)
        header, rows = g(6)
        add("structure", "unterminated_quote", ".csv", (self.csv_text(header, rows) + '2031-12-01,"4.1\n').encode())
        header, rows = g(6)
        add("structure", "quote_in_cell", ".csv", self.csv_text(header, rows).replace("4", 'q"4', 3).encode())
        body = self.csv_text(*g(400)).encode()
        add("structure", "nul_late", ".csv", body[:9000] + b"\x00" + body[9000:])
        header, rows = g(6)
        add("structure", "comments", ".csv", ("# exported by hand\n" + self.csv_text(header, rows)).encode())
        header, rows = g(6)
        self.add_grid("structure", "trailing_delimiter", [*header, ""], [[*r, ""] for r in rows])
        header, rows = g(6)
        self.add_grid("structure", "spaced_header", [f"  {h}  " for h in header], rows)
        header, rows = g(6)
        self.add_grid("structure", "capital_header", ["DATE", *(h.lower() for h in header[1:])], rows)
        header, rows = g(6)
        rows.reverse()
        self.add_grid("structure", "dates_descending", header, rows)
        header, rows = g(6)
        self.add_grid("structure", "duplicate_lines", header, rows + rows[:3])
        header, rows = g(6)
        self.add_grid("structure", "unknown_tenors", ["date", "7Q", "3M", "99Z", "7Y", "1W"], rows,
                      countable=False)
        long_rows = "date,tenor,rate,curve\n2031-01-02,3M,4.1,govt\n2031-01-02,3M,0.041,swap\n" \
                    "2031-01-02,1Y,4.2,nowhere\n2031-01-02,,4.2,govt\n2031-01-02,3M,,govt\n2031-01-02,7Q,4,govt\n"
        add("structure", "long_mixed_curves", ".csv", long_rows.encode(), prefix="other_")
        add("structure", "no_curve_matches", ".csv", self.csv_text(*g(4)).encode(), prefix="mystery_")
        add("structure", "deep_quotes", ".csv", b"date,3M\n" + b'"' * 100_000 + b"\n")

    def parquet_and_xlsx(self) -> None:
        def pq_bytes(table: pa.Table) -> bytes:
            buf = io.BytesIO()
            pq.write_table(table, buf)
            return buf.getvalue()

        d = pa.array([date(2031, 3, 3), date(2031, 3, 4)], type=pa.date32())
        tables = {
            "pq_int_rates": pa.table({"date": d, "3M": pa.array([4, 5], pa.int64())}),
            "pq_string_dates": pa.table({"date": ["2031-03-05", "2031-02-30"], "3M": [4.1, 4.2]}),
            "pq_tz_timestamps": pa.table({"date": pa.array([1_900_000_000_000_000, 1_900_086_400_000_000],
                                                           pa.timestamp("us", tz="Asia/Tokyo")), "1Y": [4.1, 4.2]}),
            "pq_null_column": pa.table({"date": d, "3M": pa.nulls(2, pa.float64()), "1Y": [4.0, None]}),
            "pq_nested": pa.table({"date": d, "3M": pa.array([[1.0], [2.0, 3.0]])}),
            "pq_struct": pa.table({"date": d, "3M": pa.array([{"a": 1}, {"a": 2}])}),
            "pq_bool": pa.table({"date": d, "3M": [True, False]}),
            "pq_nan_inf": pa.table({"date": d, "3M": [float("nan"), float("inf")]}),
            "pq_binary": pa.table({"date": d, "3M": pa.array([b"\x00\x01", b"4.1"], pa.binary())}),
            "pq_decimal": pa.table({"date": d, "3M": pa.array([Decimal("4.10"), Decimal("-0.25")],
                                                              pa.decimal128(10, 2))}),
            "pq_empty": pa.table({"date": pa.array([], pa.date32()), "3M": pa.array([], pa.float64())}),
            "pq_no_columns": pa.table({}),
            "pq_dictionary": pa.table({"date": d, "3M": pa.array(["4.1", "x"]).dictionary_encode()}),
        }
        for name, t in tables.items():
            self.add_bytes("parquet", name, ".parquet", pq_bytes(t))
        import openpyxl

        for variant in ("formula", "error_cells", "two_sheets", "serial_dates", "merged", "empty"):
            wb = openpyxl.Workbook()
            ws = wb.active
            if variant != "empty":
                ws.append(["date", "3M", "1Y"])
                ws.append(["2031-04-01", 4.1, "=B2*2" if variant == "formula" else 4.2])
                ws.append(["2031-04-02", "#DIV/0!" if variant == "error_cells" else 4.1, 4.2])
                ws.append([47_000 if variant == "serial_dates" else "2031-04-03", 4.1, 4.2])
            if variant == "merged":
                ws.merge_cells("B2:C3")
            if variant == "two_sheets":
                wb.create_sheet("other").append(["garbage", "=1/0"])
            buf = io.BytesIO()
            wb.save(buf)
            self.add_bytes("xlsx", f"xlsx_{variant}", ".xlsx", buf.getvalue())
        self.add_bytes("xlsx", "old_xls", ".xls", b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 600)

    def not_regular(self) -> None:
        fifo = self._name("named_pipe", ".csv")
        os.mkfifo(fifo)
        # a pipe or a device is there but is no file: refused and logged with its reason (README,
        # "Nothing lost"); a folder or a dangling link is no file at all and is only reported
        self.files.append(BadFile(fifo, "not a regular file", expect_rows=0, expect_status="refused"))
        link = self._name("link_to_dev_zero", ".csv")
        os.symlink("/dev/zero", link)
        self.files.append(BadFile(link, "not a regular file", expect_rows=0, expect_status="refused"))
        folder = self._name("a_directory", ".csv")
        folder.mkdir()
        self.files.append(BadFile(folder, "not a regular file", expect_status="missing"))
        dangling = self._name("dangling_link", ".csv")
        os.symlink(self.folder / "nowhere.csv", dangling)
        self.files.append(BadFile(dangling, "not a regular file", expect_status="missing"))

    _TOKENS = ["=1+1", "NaN", "inf", "1e308", "2031-02-30", '"', "\x00", "\r", ";", "\t", "|", "-", "@", "\ufeff",
               "ÿ", "\u2028", "日本", "🙂", "1,234", "%", "  ", "", "9" * 50, "\\", "'", "#N/A"]

    def mutations(self, n: int) -> None:
        """Clean files with a few random edits each: hostile tokens spliced in, bytes cut or repeated."""
        for i in range(n):
            data = bytearray(self.csv_text(*self.good_grid(self.rng.choice([3, 10, 30]))).encode())
            for _ in range(self.rng.randint(1, 6)):
                op = self.rng.randrange(5)
                pos = self.rng.randrange(len(data) + 1)
                if op == 0:
                    data[pos:pos] = self.rng.choice(self._TOKENS).encode("utf-8")
                elif op == 1:
                    del data[pos:pos + self.rng.randint(1, 40)]
                elif op == 2:
                    data[pos:pos] = data[pos:pos + self.rng.randint(1, 80)] * self.rng.randint(2, 5)
                elif op == 3:
                    data[pos:pos] = self.rng.randbytes(self.rng.randint(1, 8))
                else:
                    data = data.replace(b",", self.rng.choice([b";", b"\t", b",,", b", "]), self.rng.randint(1, 5))
            self.add_bytes("random mutation", f"mutated{i:03d}", ".csv", bytes(data))


def _lie_about_sizes(data: bytes) -> bytes:
    """The zip with every uncompressed size in its headers rewritten as 1000 bytes (zip64 extras too)."""
    out = bytearray(data)
    # (signature, offset of the uncompressed size, offset of the name and extra lengths, fixed size)
    for sig, size_at, name_len_at, fixed in ((b"PK\x03\x04", 22, 26, 30), (b"PK\x01\x02", 24, 28, 46)):
        i = out.find(sig)
        while i != -1:
            name_len, extra_len = struct.unpack_from("<HH", out, i + name_len_at)
            if struct.unpack_from("<I", out, i + size_at)[0] != 0xFFFFFFFF:
                struct.pack_into("<I", out, i + size_at, 1000)
            e = i + fixed + name_len
            end = e + extra_len
            while e + 4 <= end:
                tag, ln = struct.unpack_from("<HH", out, e)
                if tag == 1 and ln >= 8:
                    struct.pack_into("<Q", out, e + 4, 1000)
                e += 4 + ln
            i = out.find(sig, i + 4)
    return bytes(out)


def _xlsx_claiming_whole_grid(data: bytes) -> bytes:
    """A real workbook whose sheet declares A1:XFD1048576 and has a cell in the grid's last row and column."""
    import re

    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        for info in src.infolist():
            body = src.read(info.filename)
            if info.filename == "xl/worksheets/sheet1.xml":
                text = re.sub(r'<dimension ref="[^"]*"\s*/>', '<dimension ref="A1:XFD1048576"/>', body.decode())
                text = text.replace("</sheetData>",
                                    '<row r="1048576"><c r="XFD1048576" t="n"><v>1</v></c></row></sheetData>')
                body = text.encode()
            zf.writestr(info.filename, body)
    return out.getvalue()


# --- size classes: floods and outsized files, each loaded on its own with its memory measured ------

@dataclass
class Flood:
    path: Path
    category: str
    rows: int | None            # rows read, counted from how the file was built (None: refused or not countable)
    accepted: int | None
    rejected: int | None
    max_findings: int | None    # at most this many findings for the file (None: not bounded by construction)


def _long_flood(path: Path, day: str, n: int, *, same: bool) -> None:
    """``n`` lines of one (day, 3M); ``same``: every line the same value, else values that differ."""
    with path.open("w", encoding="utf-8") as f:
        f.write("date,tenor,rate\n")
        if same:
            f.writelines(f"{day},3M,4.1\n" for _ in range(n))
        else:
            f.writelines(f"{day},3M,4.{k % 9973:04d}\n" for k in range(n))


def flood_corpus(folder: Path) -> list[Flood]:
    """Files whose cost must stay linear in their size: the same key again and again (10^3..10^6 rows),
    a wide one-day file of many lines, many distinct days, many columns, very long lines, one huge cell.

    Each file has its own days, so the counts of one do not depend on another loaded before it. The
    expected counts follow from how each file is built: a conflicting (day, tenor) group keeps none of
    its rows, an identical one keeps its first (README, load section).
    """
    folder.mkdir(parents=True, exist_ok=True)
    out: list[Flood] = []
    day = np.datetime64("2032-01-05")

    def next_day() -> str:
        nonlocal day
        day = day + 7
        return str(day)

    for n in (1_000, 10_000, 100_000):
        p = folder / f"govt_same_key_conflict_{n}.csv"
        _long_flood(p, next_day(), n, same=False)
        out.append(Flood(p, f"same-key flood 10^{len(str(n)) - 1}", n, 0, n, 1))
    # 10^6 rows of one key, written compactly: a typed long-layout Parquet file of a few MB
    n = 1_000_000
    p = folder / "govt_same_key_conflict_1000000.parquet"
    pq.write_table(pa.table({"date": pa.array(np.full(n, np.datetime64(next_day(), "D")), pa.date32()),
                             "tenor": pa.array(["3M"] * n),
                             "rate": pa.array(4.0 + (np.arange(n) % 9973) / 1e4)}), p)
    out.append(Flood(p, "same-key flood 10^6", n, 0, n, 1))
    n = 100_000
    p = folder / "govt_same_key_repeat_100000.csv"
    _long_flood(p, next_day(), n, same=True)
    out.append(Flood(p, "same-key flood 10^5 (identical)", n, 1, n - 1, 0))

    # a wide one-day file: 3M differs on every line, 1Y, 2Y, 10Y never change, 5Y takes two values
    n, d = 40_000, next_day()
    p = folder / "govt_wide_one_day_40000.csv"
    with p.open("w", encoding="utf-8") as f:
        f.write("date,3M,1Y,2Y,5Y,10Y\n")
        f.writelines(f"{d},4.{k % 9973:04d},4.2,4.3,{'4.5' if k % 2 else '4.51'},4.8\n" for k in range(n))
    out.append(Flood(p, "wide one-day flood", 5 * n, 3, 5 * n - 3, 2))

    # many distinct days (every calendar day from 1801), 3M out of the plausible band on each
    n = 100_000
    days = np.arange(np.datetime64("1801-01-01"), np.datetime64("1801-01-01") + n).astype(str)
    p = folder / "govt_many_days_100000.csv"
    with p.open("w", encoding="utf-8") as f:
        f.write("date,3M,1Y,2Y,5Y,10Y\n")
        f.writelines(f"{x},334,4.2,4.3,4.5,4.8\n" for x in days)
    out.append(Flood(p, "many distinct days", 5 * n, 4 * n, n, n))

    # many columns: 1,999 tenor columns none of which the curve knows, 250 days
    labels = [f"{k}D" for k in range(1, 2400) if k % 7][:1_999]      # no two name the same tenor
    n = 250
    days = np.arange(np.datetime64("1700-01-01"), np.datetime64("1700-01-01") + n).astype(str)
    p = folder / "govt_many_columns_1999.csv"
    cells = ",".join(["4.1"] * len(labels))
    with p.open("w", encoding="utf-8") as f:
        f.write("date," + ",".join(labels) + "\n")
        f.writelines(f"{x},{cells}\n" for x in days)
    out.append(Flood(p, "many columns", n * len(labels), 0, n * len(labels), 0))

    # very long lines: a 9,000-digit number (within the reader's field limit, not a finite float) per line
    n = 2_000
    days = np.arange(np.datetime64("1650-01-01"), np.datetime64("1650-01-01") + n).astype(str)
    p = folder / "govt_long_lines_2000.csv"
    big = "9" * 9_000
    with p.open("w", encoding="utf-8") as f:
        f.write("date,3M,1Y\n")
        f.writelines(f"{x},4.1,{big}\n" for x in days)
    out.append(Flood(p, "very long lines", 2 * n, n, n, 0))

    # one huge cell: 30 MB of digits on one line (refused or rejected, never a crash)
    p = folder / "govt_huge_cell.csv"
    with p.open("w", encoding="utf-8") as f:
        f.write("date,3M\n2031-01-02,4.1\n2031-01-03,")
        f.write("4" * 30_000_000)
        f.write("\n")
    out.append(Flood(p, "huge single cell", None, None, None, None))
    return out
