"""Tenor labels: the spellings the CONTRACT promises to read, and their canonical form."""

from __future__ import annotations

import pytest

from pipeline.tenors import Tenor, TenorError, canonical_label, parse_tenor

# CONTRACT, "Conventions": `3M`, `3m`, `3 Mo`, `3 month`, `10Y`, `10 Yr`, `10 years`, `ON`; 12M == 1Y
SPELLINGS = [
    ("3M", "3M"), ("3m", "3M"), ("3 Mo", "3M"), ("3 month", "3M"), ("3 months", "3M"),
    ("10Y", "10Y"), ("10 Yr", "10Y"), ("10 years", "10Y"), ("10y", "10Y"),
    ("ON", "ON"), ("on", "ON"), ("O/N", "ON"),
    ("12M", "1Y"), ("24 months", "2Y"), ("1W", "1W"), ("2 weeks", "2W"), ("5D", "5D"),
    (" 6M ", "6M"),
    # day tenors count business days (README conventions): 1D is the overnight tenor, 7D is not 1W
    ("1D", "ON"), ("1 day", "ON"), ("7D", "7D"), ("2D", "2D"),
    # money-market labels (common trade practice): tomorrow-next and spot-next
    ("TN", "TN"), ("t/n", "TN"), ("Tom-Next", "TN"), ("SN", "SN"), ("S/N", "SN"), ("spot next", "SN"),
]


@pytest.mark.parametrize(("label", "canonical"), SPELLINGS, ids=[s for s, _ in SPELLINGS])
def test_label_spellings_parse_to_the_canonical_form(label, canonical):
    assert canonical_label(label) == canonical, (label, canonical_label(label), canonical)


def test_twelve_months_and_one_year_are_the_same_tenor():
    assert parse_tenor("12M") == parse_tenor("1Y") == Tenor(1, "Y")
    assert parse_tenor("12M").months == 12


@pytest.mark.parametrize("label", ["", "M", "3X", "three months", "0M", "-1Y", "3.5Y"],
                         ids=["empty", "no-count", "bad-unit", "words", "zero", "negative", "decimal"])
def test_bad_labels_are_refused_with_the_label_named(label):
    with pytest.raises(TenorError, match="tenor"):
        parse_tenor(label)


def test_zero_months_allowed_for_forward_starts():
    assert parse_tenor("0M", allow_zero=True).months == 0


def test_ordering_by_length():
    labels = ["10Y", "ON", "3M", "1W", "1Y", "18M"]
    assert [t.label for t in sorted(parse_tenor(x) for x in labels)] == ["ON", "1W", "3M", "1Y", "18M", "10Y"]


def test_short_end_orders_before_weeks_and_months():
    # nominal lengths (README: tenor_months): ON 1, TN 2, SN 3 days, 1W 7 days, 1M ~30.4 days
    labels = ["1M", "SN", "1W", "TN", "ON", "2D", "10Y"]
    assert [t.label for t in sorted(parse_tenor(x) for x in labels)] == ["ON", "2D", "TN", "SN", "1W", "1M", "10Y"]


def test_sort_months_are_months_for_month_tenors_and_days_otherwise():
    assert parse_tenor("18M").sort_months == 18.0 and parse_tenor("10Y").sort_months == 120.0
    # 7 days in months of 365.25 / 12 days: 0.22998, by hand
    assert abs(parse_tenor("1W").sort_months - 7 * 12 / 365.25) < 1e-15
    assert parse_tenor("ON").sort_months < parse_tenor("TN").sort_months < parse_tenor("SN").sort_months
