"""Row-level expectations (Great Expectations 1.x) in pipeline.expectations.

Reference: the rules of issue 3 / CONTRACT (dates and rates parse, tenors known to the curve, rates
within -5 % .. +40 % as decimals, discount factors in (0, 1.5]), recomputed here with plain pandas.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from pipeline.config import CurveConfig
from pipeline.expectations import RowValidation, rate_band, suite_name, validate_rows
from pipeline.tenors import parse_tenor

LABELS = ["3M", "1Y", "2Y", "10Y"]


def make_cfg(quote: str = "par", labels=LABELS, name: str = "govt", units: str = "percent") -> CurveConfig:
    return CurveConfig(name=name, quote=quote, tenors=tuple(parse_tenor(t) for t in labels), units=units)


def rows_frame() -> pd.DataFrame:
    return pd.DataFrame({
        "line": [2, 3, 4, 5, 6, 7, 8, 9, 10],
        "as_of": pd.to_datetime(["2031-01-02", "2031-01-02", None, "2031-01-02", "2031-01-02",
                                 "2031-01-03", "2031-01-03", "2031-01-03", None]),
        "tenor": ["3M", "1Y", "2Y", "5Y", "10Y", "3M", None, "1Y", "7Y"],
        "rate": [0.0425, 0.45, 0.041, 0.04, -0.051, np.nan, 0.05, -0.05, 0.50],
        "raw": [f"raw line {i}" for i in range(2, 11)],
    }, index=pd.Index([10, 11, 12, 13, 14, 15, 16, 17, 18], name="row"))


def plain_pandas_rules(rows: pd.DataFrame, cfg: CurveConfig) -> pd.DataFrame:
    """Independent recomputation of each rule with plain pandas: True where the row breaks it."""
    lo, hi, strict = rate_band(cfg)
    rate = rows["rate"]
    below = rate <= lo if strict else rate < lo
    return pd.DataFrame({
        "null_as_of": rows["as_of"].isna(),
        "null_tenor": rows["tenor"].isna(),
        "null_rate": rate.isna(),
        "unknown_tenor": rows["tenor"].notna() & ~rows["tenor"].isin(cfg.tenor_labels),
        "out_of_band": rate.notna() & (below | (rate > hi)),
    })


@pytest.fixture(scope="module")
def result() -> RowValidation:
    return validate_rows(rows_frame(), make_cfg())


def test_each_failing_row_gives_the_broken_rule_in_plain_words(result):
    rows, cfg = rows_frame(), make_cfg()
    rules = plain_pandas_rules(rows, cfg)
    bad = rules.any(axis=1)
    np.testing.assert_array_equal(result.ok, ~bad.to_numpy())
    assert result.reasons.index.equals(rows.index)
    names = {
        "null_as_of": "unparseable: the date is missing",
        "null_tenor": "unparseable: the tenor is missing",
        "null_rate": "unparseable: the rate is missing",
        "unknown_tenor": "is not one of curves.govt.tenors",
        "out_of_band": "outside the plausible band",
    }
    for rule, prefix in names.items():
        for idx in rows.index:
            has = prefix in (result.reasons[idx] or "")
            assert has == bool(rules.at[idx, rule]), (idx, rule, result.reasons[idx])
    assert result.reasons[rows.index[~bad.to_numpy()]].isna().all()


def test_reason_texts_and_check_names(result):
    r = result.reasons
    # the frame has no ``value`` column: the number shown is the decimal scaled back to the curve's percent
    assert r[11] == "out of range: rate 45 (percent) outside the plausible band -5 % to 40 % (tenor 1Y)"
    assert r[13] == "out of range: tenor 5Y is not one of curves.govt.tenors"
    assert r[14] == "out of range: rate -5.1 (percent) outside the plausible band -5 % to 40 % (tenor 10Y)"
    # two failures on one row are joined with "; "
    assert r[18] == ("unparseable: the date is missing or not a date; "
                     "out of range: tenor 7Y is not one of curves.govt.tenors; "
                     "out of range: rate 50 (percent) outside the plausible band -5 % to 40 % (tenor 7Y)")
    # the band's edge is inside: -0.05 passes
    assert r[17] is None
    c = result.check_name
    assert c[12] == "unparseable" and c[15] == "unparseable" and c[16] == "unparseable" and c[18] == "unparseable"
    assert c[11] == "out_of_range" and c[13] == "out_of_range" and c[14] == "out_of_range"
    assert c[10] is None


def test_summary_is_json_and_counts_match_plain_pandas(result):
    rows, cfg = rows_frame(), make_cfg()
    rules = plain_pandas_rules(rows, cfg)
    s = json.loads(json.dumps(result.summary))  # plain Python types only
    assert s["suite"] == suite_name(cfg)
    assert s["success"] is False
    assert s["evaluated_expectations"] == 5
    assert s["successful_expectations"] + s["unsuccessful_expectations"] == 5
    counts = {(e["expectation"], e["column"]): e["unexpected_count"] for e in s["expectations"]}
    assert counts[("expect_column_values_to_not_be_null", "as_of")] == rules["null_as_of"].sum()
    assert counts[("expect_column_values_to_not_be_null", "tenor")] == rules["null_tenor"].sum()
    assert counts[("expect_column_values_to_not_be_null", "rate")] == rules["null_rate"].sum()
    assert counts[("expect_column_values_to_be_in_set", "tenor")] == rules["unknown_tenor"].sum()
    assert counts[("expect_column_values_to_be_between", "rate")] == rules["out_of_band"].sum()
    assert s["rows_failed"] == int(rules.any(axis=1).sum())
    # GX's own result object is kept
    assert type(result.result).__name__ == "ExpectationSuiteValidationResult"
    assert result.result.success is False


def test_good_rows_pass_and_the_input_is_unchanged():
    rows = rows_frame().iloc[[0, 7]].copy()
    before = rows.copy()
    out = validate_rows(rows, make_cfg())
    assert out.ok.all() and out.reasons.isna().all() and out.check_name.isna().all()
    assert out.summary["success"] is True
    pd.testing.assert_frame_equal(rows, before)


@pytest.mark.parametrize(
    ("value", "ok"),
    [(0.0, False), (1e-9, True), (0.97, True), (1.5, True), (1.5001, False), (-0.2, False)],
    ids=["zero", "tiny", "typical", "upper-edge", "above", "negative"],
)
def test_discount_factor_band(value, ok):
    rows = pd.DataFrame({"line": [2], "as_of": pd.to_datetime(["2031-01-02"]), "tenor": ["1Y"],
                         "rate": [value], "raw": ["x"]})
    out = validate_rows(rows, make_cfg(quote="discount", name="swapdf"))
    assert bool(out.ok[0]) is ok
    if not ok:
        # the curve's units are percent (the default): the band is said in percent too
        assert out.reasons.iloc[0].endswith("outside the plausible band above 0 % and at most 150 % (tenor 1Y)")


def test_suites_are_cached_per_curve_configuration():
    a = make_cfg(name="mm", labels=["1M", "3M"])
    b = make_cfg(name="mm", labels=["1M", "3M", "6M"])
    assert suite_name(a) != suite_name(b)
    rows = pd.DataFrame({"line": [2], "as_of": pd.to_datetime(["2031-01-02"]), "tenor": ["6M"],
                         "rate": [0.03], "raw": ["x"]})
    assert not validate_rows(rows, a).ok[0]
    assert validate_rows(rows, b).ok[0]
    assert not validate_rows(rows, a).ok[0]  # the cached suite for a is unchanged


@pytest.mark.parametrize("case", ["empty", "missing-column", "pandas-str-tenor", "text-dates"],
                         ids=["empty", "missing-column", "pandas-str-tenor", "text-dates"])
def test_awkward_frames_do_not_raise(case):
    cfg = make_cfg()
    if case == "empty":
        rows = pd.DataFrame({"line": [], "as_of": pd.to_datetime([]), "tenor": [], "rate": [], "raw": []})
        out = validate_rows(rows, cfg)
        assert len(out.ok) == 0 and json.dumps(out.summary)
    elif case == "missing-column":
        rows = pd.DataFrame({"line": [2, 3], "tenor": ["3M", "1Y"], "rate": [0.01, 0.02], "raw": ["a", "b"]})
        out = validate_rows(rows, cfg)
        assert not out.ok.any()
        assert out.reasons.str.contains("the date is missing").all()
    elif case == "text-dates":
        rows = pd.DataFrame({"line": [2, 3, 4], "as_of": ["2031-01-02", "2031-02-30", "soon"],
                             "tenor": ["3M", "1Y", "2Y"], "rate": [0.01, 0.02, 0.03], "raw": ["a", "b", "c"]})
        out = validate_rows(rows, cfg)
        assert out.ok.tolist() == [True, False, False]
        assert out.reasons.iloc[1].startswith("unparseable: the date is missing")
    else:
        rows = pd.DataFrame({"line": [2, 3], "as_of": pd.to_datetime(["2031-01-02"] * 2),
                             "tenor": pd.Series(["3M", None], dtype="str"), "rate": [0.01, 0.02],
                             "raw": ["a", "b"]})
        out = validate_rows(rows, cfg)
        assert out.ok.tolist() == [True, False]
        assert out.check_name.tolist() == [None, "unparseable"]


# The file's language: the number as written and its units, the band in the same units. The band is
# -5 % .. +40 % (CONTRACT / issue 3); percent / 100 and bp / 10,000 are the CONTRACT's conversions, so
# -5 % .. 40 % is -500 bp .. 4,000 bp and -0.05 .. 0.4 as a decimal.
@pytest.mark.parametrize(
    ("units", "written", "expected"),
    [("percent", 334.0, "out of range: rate 334 (percent) outside the plausible band -5 % to 40 % (tenor 3M)"),
     ("bp", 4125.5, "out of range: rate 4125.5 (bp) outside the plausible band -500 bp to 4,000 bp (tenor 3M)"),
     ("decimal", -0.0625, "out of range: rate -0.0625 (decimal) outside the plausible band -0.05 to 0.4 (tenor 3M)")],
    ids=["percent", "bp", "decimal"],
)
def test_out_of_band_reason_quotes_the_file_in_its_units(units, written, expected):
    divisor = {"percent": 100.0, "bp": 10_000.0, "decimal": 1.0}[units]
    rows = pd.DataFrame({"line": [7], "as_of": pd.to_datetime(["2031-01-02"]), "tenor": ["3M"],
                         "rate": [written / divisor], "value": [written], "raw": ["2031-01-02,x"]})
    out = validate_rows(rows, make_cfg(units=units))
    assert out.reasons.iloc[0] == expected
    assert out.check_name.iloc[0] == "out_of_range"


def test_no_reason_names_a_library_rule(result):
    """Every reason a failing row can get from the suite, for every kind of rule: none is a rule's name."""
    reasons = [r for r in result.reasons if r is not None]
    assert len(reasons) == int((~result.ok).sum()) > 0
    for r in reasons:
        assert "expect_" not in r and "column_values" not in r, r
        assert "as_of" not in r, r       # the column's name is ours, not the file's
