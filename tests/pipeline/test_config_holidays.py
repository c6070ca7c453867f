"""The holidays of a curve's calendar: what ``calendar.holidays`` and ``calendar.holidays_file`` accept,
as the README states it. Dates are ISO 8601 calendar dates in the extended form YYYY-MM-DD only."""

from __future__ import annotations

import textwrap

import numpy as np
import pytest

from pipeline.config import ConfigError, load_config

CURVE = textwrap.dedent(
    """
    [curves.govt]
    tenors = ["3M", "1Y"]
    {calendar}
    """
)


def _config(tmp_path, calendar: str, holidays_file: str | None = None):  # noqa: ANN001, ANN202
    if holidays_file is not None:
        (tmp_path / "holidays.csv").write_bytes(holidays_file.encode("utf-8"))
    (tmp_path / "afterward.toml").write_text(CURVE.format(calendar=calendar), encoding="utf-8")
    return load_config(tmp_path / "afterward.toml")


def _days(cfg) -> list[str]:  # noqa: ANN001
    return [str(d) for d in cfg.curve("govt").calendar.holidays]


def test_the_holidays_file_format(tmp_path):
    # UTF-8 with or without a BOM; the first comma-separated field of each line is the date (a name may
    # follow); blank lines, lines starting with '#' and a header "date" or "holiday" are skipped
    text = ("\ufeffdate,name\n"
            "# public holidays of the Republic of Orvane\n"
            "\n"
            "2031-12-25,Midwinter Day\n"
            "  2032-01-01 \n"
            "2031-12-26\n")
    cfg = _config(tmp_path, 'calendar.holidays_file = "holidays.csv"\ncalendar.holidays = [2031-05-01, "2031-05-02"]',
                  text)
    assert _days(cfg) == ["2031-05-01", "2031-05-02", "2031-12-25", "2031-12-26", "2032-01-01"]
    # and they are holidays of the calendar: 2031-12-25 is a Thursday (a weekday otherwise a business day)
    cal = cfg.curve("govt").calendar
    assert not cal.is_business_day(np.array(["2031-12-25"], dtype="datetime64[D]"))[0]


@pytest.mark.parametrize(
    "line",
    [
        pytest.param("2031-12", id="year-month"),
        pytest.param("2031", id="year"),
        pytest.param("NaT", id="nat"),
        pytest.param("20311225", id="basic-form"),
        pytest.param("25/12/2031", id="day-first"),
        pytest.param("2031-02-30", id="no-such-day"),
        pytest.param("2031-12-25T10:00", id="a-time"),
    ],
)
def test_a_line_that_is_not_a_whole_iso_date_is_refused_naming_file_and_line(tmp_path, line):
    with pytest.raises(ConfigError, match=r"holidays\.csv:3: .* is not an ISO date"):
        _config(tmp_path, 'calendar.holidays_file = "holidays.csv"', f"date\n2031-12-25\n{line}\n")


@pytest.mark.parametrize("value", ['"2031"', '"NaT"', "2031-12-25T10:00:00", "20311225"], ids=str)
def test_an_inline_holiday_that_is_not_a_whole_iso_date_is_refused(tmp_path, value):
    with pytest.raises(ConfigError, match=r"curves\.govt\.calendar\.holidays: .* is not an ISO date"):
        _config(tmp_path, f"calendar.holidays = [{value}]")
