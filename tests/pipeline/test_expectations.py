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


def make_cfg(quote: str = "par", labels=LABELS, name: str = "govt") -> CurveConfig:
    return CurveConfig(name=name, quote=quote, tenors=tuple(parse_tenor(t) for t in labels))


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


def test_each_failing_row_names_the_expectation(result):
    rows, cfg = rows_frame(), make_cfg()
    rules = plain_pandas_rules(rows, cfg)
    bad = rules.any(axis=1)
    np.testing.assert_array_equal(result.ok, ~bad.to_numpy())
    assert result.reasons.index.equals(rows.index)
    names = {
        "null_as_of": "expect_column_values_to_not_be_null: as_of",
        "null_tenor": "expect_column_values_to_not_be_null: tenor",
        "null_rate": "expect_column_values_to_not_be_null: rate",
        "unknown_tenor": "expect_column_values_to_be_in_set: tenor",
        "out_of_band": "expect_column_values_to_be_between: rate",
    }
    for rule, prefix in names.items():
        for idx in rows.index:
            has = prefix in (result.reasons[idx] or "")
            assert has == bool(rules.at[idx, rule]), (idx, rule, result.reasons[idx])
    assert result.reasons[rows.index[~bad.to_numpy()]].isna().all()


def test_reason_texts_and_check_names(result):
    r = result.reasons
    assert r[11] == "expect_column_values_to_be_between: rate 0.45 outside [-0.05, 0.4]"
    assert r[13] == "expect_column_values_to_be_in_set: tenor 5Y is not a tenor of curve govt"
    assert r[14] == "expect_column_values_to_be_between: rate -0.051 outside [-0.05, 0.4]"
    # two failures on one row are joined with "; "
    assert r[18] == ("expect_column_values_to_not_be_null: as_of is missing or not a date; "
                     "expect_column_values_to_be_in_set: tenor 7Y is not a tenor of curve govt; "
                     "expect_column_values_to_be_between: rate 0.5 outside [-0.05, 0.4]")
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
        assert out.reasons.iloc[0].endswith("outside (0, 1.5]")


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
        assert out.reasons.str.contains("as_of is missing").all()
    elif case == "text-dates":
        rows = pd.DataFrame({"line": [2, 3, 4], "as_of": ["2031-01-02", "2031-02-30", "soon"],
                             "tenor": ["3M", "1Y", "2Y"], "rate": [0.01, 0.02, 0.03], "raw": ["a", "b", "c"]})
        out = validate_rows(rows, cfg)
        assert out.ok.tolist() == [True, False, False]
        assert out.reasons.iloc[1].startswith("expect_column_values_to_not_be_null: as_of")
    else:
        rows = pd.DataFrame({"line": [2, 3], "as_of": pd.to_datetime(["2031-01-02"] * 2),
                             "tenor": pd.Series(["3M", None], dtype="str"), "rate": [0.01, 0.02],
                             "raw": ["a", "b"]})
        out = validate_rows(rows, cfg)
        assert out.ok.tolist() == [True, False]
        assert out.check_name.tolist() == [None, "unparseable"]
