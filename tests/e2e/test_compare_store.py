"""The contender comparison through the store: `afterward compare` on a daily curve built with the real
steps (load, build, realize, audit, model, a what-if build) from real files.

The curve: weekdays 2010-01 .. 2016-06 of continuous zero rates at nine tenors, 1M .. 10Y, from the
seeded five-factor generator the term-structure tests use, interpolated ``linear_zero``, on a small
forward grid (starts 0M, 6M, 1Y, 2Y x tenors 3M, 1Y, 2Y). Independent sides of each check: the
``outcomes``, ``model_term_premium`` and ``forward_built`` views read back with plain SQL and
recombined here with pandas (the model's risk-neutral forward by its definition, not through the
step's code), and the pure :func:`pipeline.contenders.compare`, which its own tests hold to ``arch``,
``model-confidence-set``, statsmodels and the papers' formulas.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.compare_step import compare_due, run_compare
from flows.load_step import load_files
from flows.model_step import run_model
from flows.realize_step import run_realize
from pipeline.contenders import builtin_contenders, compare
from tests.conftest import run_cli
from tests.e2e.stores import Project, make_project, write_wide_csv
from tests.pipeline.term_structure.panels import synthetic_yields

pytestmark = pytest.mark.timeout(600)

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y"]
MONTHS = np.array([1, 3, 6, 12, 24, 36, 60, 84, 120])
TOML = f"""
[store]
path = "store.duckdb"

[curves.day]
files = "day_*.csv"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "decimal"
interpolation = "linear_zero"
tenors = [{", ".join(f'"{t}"' for t in TENORS)}]
calendar.holidays = []
checks.jump_bp = 500
forward.starts = ["0M", "6M", "1Y", "2Y"]
forward.tenors = ["3M", "1Y", "2Y"]
model.factors = 3
compare.min_history = 60
"""
KEY = ["curve", "contender", "as_of", "start_months", "tenor_months"]


@pytest.fixture(scope="module")
def compared(tmp_path_factory: pytest.TempPathFactory) -> Project:
    root = tmp_path_factory.mktemp("compare")
    p = make_project(root, TOML)
    span = np.arange(np.datetime64("2010-01-01"), np.datetime64("2016-07-01"))
    days = span[np.is_busday(span)]
    rates = synthetic_yields(23, days.size)[:, MONTHS - 1]
    load_files(p.cfg, [write_wide_csv(root / "day_all.csv", days, TENORS, rates, "%.12f")])
    run_build(p.cfg)
    run_build(p.cfg, method="log_linear_discount")  # a what-if surface: the forward@log_linear_discount contender
    run_realize(p.cfg)
    run_audit(p.cfg)
    run_model(p.cfg)
    run_compare(p.cfg)
    return p


def _dates(frame: pd.DataFrame, *cols: str) -> pd.DataFrame:
    for c in cols:
        frame[c] = pd.to_datetime(frame[c]).to_numpy().astype("datetime64[D]")
    return frame


def test_every_contender_is_present_once_per_key(compared: Project) -> None:
    p = compared
    names = set(p.sql("SELECT DISTINCT contender FROM contender_outcomes")["contender"])
    assert names == {"forward", "no_change", "premium_adjusted", "model_expected", "forward@log_linear_discount"}
    for view, key in (("contender_outcomes", KEY),
                      ("contender_scores", ["curve", "contender", "start_months", "tenor_months"]),
                      ("contender_tests", ["curve", "start_months", "tenor_months", "contender_a", "contender_b",
                                           "test"]),
                      ("confidence_set", ["curve", "start_months", "tenor_months", "contender"])):
        dup = p.value(f"SELECT count(*) FROM (SELECT {', '.join(key)} FROM {view} GROUP BY ALL HAVING count(*) > 1)")
        assert dup == 0, view
        assert p.value(f"SELECT count(*) FROM {view}") > 0, view
    assert set(p.sql("SELECT DISTINCT test FROM contender_tests")["test"]) == {"dm", "clark_west", "gw"}
    # contract: n_effective = n / h; indicative below 10 (CONTRACT, second-round views)
    s = p.sql("SELECT n, n_effective, indicative FROM contender_scores")
    assert ((s["n_effective"] < 10) == s["indicative"]).all()


def test_model_expected_is_the_models_risk_neutral_forward_realised_like_the_forward(compared: Project) -> None:
    p = compared
    got = _dates(p.sql("SELECT as_of, start_months, tenor_months, forecast_rate, realized_rate, target_date "
                       "FROM contender_outcomes WHERE contender = 'model_expected'"), "as_of", "target_date")
    rn = _dates(p.sql("SELECT as_of, maturity_months, risk_neutral_yield FROM model_term_premium "
                      "WHERE fit = 'realtime'"), "as_of")
    # the risk-neutral forward from S to S+M months: (rn(S+M)(S+M) - rn(S) S) / M, rn(0) = 0; the curve
    # compounds continuously, so no conversion (ACM 2013: risk-neutral yields price with zero prices of risk)
    want = got.merge(rn.rename(columns={"maturity_months": "end", "risk_neutral_yield": "rn_end"}),
                     left_on=["as_of", got["start_months"] + got["tenor_months"]], right_on=["as_of", "end"])
    want = want.merge(rn.rename(columns={"maturity_months": "start_months", "risk_neutral_yield": "rn_start"}),
                      on=["as_of", "start_months"], how="left")
    want["rn_start"] = want["rn_start"].fillna(0.0).where(want["start_months"] > 0, 0.0)
    expect = (want["rn_end"] * (want["start_months"] + want["tenor_months"])
              - want["rn_start"] * want["start_months"]) / want["tenor_months"]
    assert len(want) == len(got) > 1000
    np.testing.assert_allclose(want["forecast_rate"], expect, rtol=0, atol=1e-14)
    # realised exactly as the forward of the same key (same target, same realised rate)
    fwd = _dates(p.sql("SELECT as_of, start_months, tenor_months, realized_rate, target_date FROM outcomes"),
                 "as_of", "target_date")
    both = got.merge(fwd, on=["as_of", "start_months", "tenor_months"], suffixes=("", "_fwd"))
    assert len(both) == len(got)
    np.testing.assert_array_equal(both["realized_rate"], both["realized_rate_fwd"])
    np.testing.assert_array_equal(both["target_date"], both["target_date_fwd"])
    # no look-ahead: every model row used was estimated through a month end on or before its as-of day
    late = p.value("SELECT count(*) FROM model_term_premium WHERE fit = 'realtime' AND estimated_through > as_of")
    assert late == 0


def test_a_what_if_surface_is_scored_as_forward_at_its_method(compared: Project) -> None:
    p = compared
    got = _dates(p.sql("SELECT as_of, start_months, tenor_months, forecast_rate, realized_rate "
                       "FROM contender_outcomes WHERE contender = 'forward@log_linear_discount'"), "as_of")
    built = _dates(p.sql("SELECT as_of, start_months, tenor_months, forward_rate FROM forward_built "
                         "WHERE scenario <> 'official'"), "as_of")
    real = _dates(p.sql("SELECT as_of, start_months, tenor_months, realized_rate FROM outcomes"), "as_of")
    want = built.merge(real, on=["as_of", "start_months", "tenor_months"])
    assert len(got) == len(want) > 1000
    m = got.merge(want, on=["as_of", "start_months", "tenor_months"], suffixes=("", "_w"))
    np.testing.assert_array_equal(m["forecast_rate"], m["forward_rate"])
    np.testing.assert_array_equal(m["realized_rate"], m["realized_rate_w"])


def test_the_views_equal_the_pure_comparison_of_the_views_own_rows(compared: Project) -> None:
    p = compared
    outcomes = _dates(p.sql("SELECT * FROM outcomes ORDER BY start_months, tenor_months, as_of"),
                      "as_of", "target_date", "observed_on")
    stored = _dates(p.sql("SELECT * FROM contender_outcomes"), "as_of", "target_date", "observed_on")
    # the built-ins recomputed from the outcomes view equal the stored ones
    c = p.cfg.curve("day")
    mine = builtin_contenders(outcomes, window=c.premium_window_days, min_history=c.compare_min_history)
    theirs = stored[stored["contender"].isin(["forward", "no_change", "premium_adjusted"])]
    theirs = theirs.sort_values(KEY, ignore_index=True)
    mine = mine.sort_values(KEY, ignore_index=True)
    pd.testing.assert_frame_equal(theirs[list(mine.columns)], mine, check_dtype=False, rtol=0, atol=1e-15)
    # the stored statistics are the pure comparison of the stored rows (seeded MCS: the same set)
    ref = compare(stored)
    scores = p.sql("SELECT * FROM contender_scores ORDER BY start_months, tenor_months, contender")
    want = ref.scores.sort_values(["start_months", "tenor_months", "contender"], ignore_index=True)
    np.testing.assert_allclose(scores[["n", "mean_error_bp", "rmse_bp", "rmse_ratio"]].to_numpy(float),
                               want[["n", "mean_error_bp", "rmse_bp", "rmse_ratio"]].to_numpy(float),
                               rtol=1e-12, atol=1e-12, equal_nan=True)
    mcs = p.sql("SELECT * FROM confidence_set ORDER BY start_months, tenor_months, contender")
    want = ref.confidence_set.sort_values(["start_months", "tenor_months", "contender"], ignore_index=True)
    assert list(mcs["included"]) == list(want["included"])
    np.testing.assert_allclose(mcs["mcs_p_value"], want["mcs_p_value"], rtol=0, atol=1e-12)
    tests = p.sql("SELECT * FROM contender_tests ORDER BY start_months, tenor_months, contender_a, contender_b, test")
    want = ref.tests.sort_values(["start_months", "tenor_months", "contender_a", "contender_b", "test"],
                                 ignore_index=True)
    np.testing.assert_allclose(tests["statistic"].to_numpy(float), want["statistic"].to_numpy(float),
                               rtol=1e-10, atol=1e-12, equal_nan=True)


def test_a_rerun_gives_the_same_set_and_due_follows_the_inputs(compared: Project, tmp_path) -> None:  # noqa: ANN001
    from tests.e2e.stores import clone_project

    p = clone_project(compared, tmp_path / "copy")
    before = p.sql("SELECT * FROM confidence_set ORDER BY ALL")
    assert compare_due(p.cfg) == []  # just compared: nothing changed
    run_compare(p.cfg)
    pd.testing.assert_frame_equal(p.sql("SELECT * FROM confidence_set ORDER BY ALL"), before)
    run_model(p.cfg)  # a new estimate: model_expected may move
    assert compare_due(p.cfg) == ["day"]
    run_compare(p.cfg, first="2012-01-01", last="2014-12-31")
    assert compare_due(p.cfg) == ["day"]  # a windowed comparison is not the whole record
    first = p.value("SELECT min(as_of) FROM contender_outcomes")
    assert str(first) < "2012-01-01"  # the stored outcomes stay the whole record
    run_compare(p.cfg)
    assert compare_due(p.cfg) == []


def test_the_compare_command_prints_tables_verdicts_and_json(compared: Project, tmp_path) -> None:  # noqa: ANN001
    from tests.e2e.stores import clone_project

    p = clone_project(compared, tmp_path / "cli")
    cfgp = str(p.root / "afterward.toml")
    done = run_cli("compare", "--start", "1Y", "--tenor", "1Y", "--config", cfgp, cwd=p.root, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "contenders by horizon" in done.stdout
    assert "1Y rate 1Y ahead:" in done.stdout and "non-overlapping periods" in done.stdout
    assert "not investment advice" in done.stdout
    js = run_cli("compare", "--start", "2Y", "--format", "json", "--config", cfgp, cwd=p.root, timeout=300)
    assert js.returncode == 0, js.stderr
    rows = json.loads(js.stdout)
    assert {r["start_months"] for r in rows} == {24}
    assert {"n_effective", "indicative", "mcs_p_value", "included"} <= set(rows[0])
    for args, words in ((("--format", "xml"), "--format 'xml' is not allowed"),
                        (("--from", "2014-01-01", "--to", "2013-01-01"), "is after --to"),
                        (("--start", "soon"), "--start"),
                        (("--curve", "nope"), "nope")):
        bad = run_cli("compare", *args, "--config", cfgp, cwd=p.root)
        assert bad.returncode == 2, (args, bad.stdout, bad.stderr)
        lines = [x for x in bad.stderr.strip().splitlines() if x.strip()]
        assert len(lines) == 1 and words in lines[0] and "Traceback" not in bad.stderr, (args, bad.stderr)
