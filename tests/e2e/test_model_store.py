"""The term-structure lens through the store: `afterward model` on a small monthly curve, built with the
real steps from real files.

The curve: 12 years of month ends (2010-01 .. 2021-12) of continuous zero rates at nine tenors,
1M .. 10Y, from the seeded five-factor generator the pure tests use (``synthetic_yields``), loaded as a
``frequency = "monthly"`` curve interpolated ``linear_zero``. Independent sides of each check:
the files read back with plain pandas and built with ``build_curves`` straight from those quotes (not
through the store's stored nodes), and the pure functions of ``pipeline.term_structure``, which their
own tests hold to ``pyacm``, statsmodels and QuantLib.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from flows.build_step import run_build
from flows.load_step import load_files
from flows.model_step import run_model
from pipeline.curves import build_curves
from pipeline.term_structure import (
    eh_regressions,
    excess_returns,
    longest_tenor_months,
    model_term_premium,
    term_panel,
    term_panel_from_yields,
)
from tests.conftest import run_cli
from tests.e2e.stores import Project, make_project, write_wide_csv
from tests.pipeline.term_structure.panels import month_ends, synthetic_yields

pytestmark = pytest.mark.timeout(300)

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y"]
MONTHS = np.array([1, 3, 6, 12, 24, 36, 60, 84, 120])
FIRST, COUNT = "2010-01", 144


def toml(tenors: list[str] = TENORS) -> str:
    return f"""
[store]
path = "store.duckdb"

[curves.mon]
files = "mon_*.csv"
quote = "zero"
compounding = "continuous"
day_count = "ACT/365F"
units = "decimal"
interpolation = "linear_zero"
frequency = "monthly"
tenors = [{", ".join(f'"{t}"' for t in tenors)}]
model.factors = 3
"""


def quotes(seed: int = 7) -> tuple[np.ndarray, np.ndarray]:
    return month_ends(FIRST, COUNT), synthetic_yields(seed, COUNT)[:, MONTHS - 1]


def build_project(root: Path, days: np.ndarray, rates: np.ndarray, tenors: list[str] = TENORS) -> Project:
    p = make_project(root, toml(tenors))
    load_files(p.cfg, [write_wide_csv(root / "mon_all.csv", days, tenors, rates, "%.12f")])
    run_build(p.cfg)
    return p


def panel_of_view(p: Project):  # noqa: ANN201
    """The store's ``term_panel`` view as a pure TermPanel (month ends x 1..N)."""
    v = p.sql("SELECT as_of, maturity_months, zero_rate_cc FROM term_panel ORDER BY as_of, maturity_months")
    wide = v.pivot(index="as_of", columns="maturity_months", values="zero_rate_cc")
    return term_panel_from_yields(pd.to_datetime(wide.index).to_numpy().astype("datetime64[D]"), wide.to_numpy(),
                                  "mon")


@pytest.fixture(scope="module")
def modelled(tmp_path_factory: pytest.TempPathFactory) -> tuple[Project, object]:
    days, rates = quotes()
    p = build_project(tmp_path_factory.mktemp("model"), days, rates)
    done = run_cli("model", "--config", str(p.root / "afterward.toml"), cwd=p.root)
    return p, done


def test_model_command_prints_the_panel_fits_premium_and_verdicts(modelled) -> None:  # noqa: ANN001
    p, done = modelled
    assert done.returncode == 0, done.stderr
    out = done.stdout
    assert "month ends in the panel" in out and f"{COUNT}" in out
    assert "skipped months (no built day)" in out and "none" in out
    # the real-time 2/5/10-year premium of the last month end, as the view holds it (bp)
    last = p.sql("SELECT maturity_months, term_premium FROM model_term_premium WHERE fit = 'realtime' "
                 "AND as_of = (SELECT max(as_of) FROM model_term_premium) ORDER BY maturity_months")
    tp = dict(zip(last["maturity_months"], last["term_premium"] * 1e4, strict=True))
    assert f"2Y {tp[24]:.1f}, 5Y {tp[60]:.1f}, 10Y {tp[120]:.1f}" in out
    for test in ("slope coefficient", "forward-spot spread", "one factor of forward rates"):
        assert test in out
    # every view has rows, on the contract's keys
    assert p.value("SELECT count(*) FROM term_panel") == COUNT * 120
    assert p.value("SELECT count(DISTINCT fit) FROM model_term_premium") == 2
    dup = p.value("SELECT count(*) FROM (SELECT curve, as_of, maturity_months, fit FROM model_term_premium "
                  "GROUP BY ALL HAVING count(*) > 1)")
    assert dup == 0


def test_the_views_equal_the_pure_functions_on_the_same_quotes(modelled) -> None:  # noqa: ANN001
    p, _ = modelled
    # independent side 1: the file read back by pandas and built straight from its quotes
    raw = pd.read_csv(p.root / "mon_all.csv", parse_dates=["date"])
    direct = build_curves(raw["date"].to_numpy().astype("datetime64[D]"), TENORS, raw[TENORS].to_numpy(),
                          p.cfg.curve("mon"))
    want = term_panel(direct, longest_tenor_months(TENORS), 120, "mon", calendar=p.cfg.curve("mon").calendar)
    got = panel_of_view(p)
    np.testing.assert_array_equal(got.as_of, want.as_of)
    np.testing.assert_allclose(got.zero_cc, want.zero_cc, rtol=0, atol=1e-13)

    # independent side 2: the pure functions on the view's own panel (their own tests hold them to pyacm /
    # statsmodels); the view's panel, not the direct one, as the CP regression on near-collinear forwards
    # turns the panels' 1e-13 difference into 1e-8 in its slopes
    rx = p.sql("SELECT as_of, maturity_months, holding_months, rx FROM excess_returns "
               "ORDER BY as_of, holding_months, maturity_months")
    ref = excess_returns(got)
    np.testing.assert_allclose(rx["rx"].to_numpy(), ref["rx"].to_numpy(), rtol=0, atol=1e-12)
    np.testing.assert_array_equal(rx["maturity_months"].to_numpy(), ref["maturity_months"].to_numpy())

    eh = p.sql("SELECT test, maturity_months, coef, se, n FROM eh_regressions ORDER BY test, maturity_months")
    ref = eh_regressions(got).sort_values(["test", "maturity_months"], ignore_index=True)
    assert list(eh["test"]) == list(ref["test"])
    np.testing.assert_allclose(eh[["coef", "se"]].to_numpy(), ref[["coef", "se"]].to_numpy(), rtol=1e-9, atol=1e-12)

    m = p.sql("SELECT fit, as_of, maturity_months, model_yield, term_premium, estimated_through "
              "FROM model_term_premium ORDER BY fit, as_of, maturity_months")
    ref = model_term_premium(got, 3).sort_values(["fit", "as_of", "maturity_months"], ignore_index=True)
    assert len(m) == len(ref)
    np.testing.assert_allclose(m[["model_yield", "term_premium"]].to_numpy(),
                               ref[["model_yield", "term_premium"]].to_numpy(), rtol=0, atol=1e-10)
    np.testing.assert_array_equal(pd.to_datetime(m["estimated_through"]).to_numpy().astype("datetime64[D]"),
                                  ref["estimated_through"].to_numpy().astype("datetime64[D]"))


def test_a_curve_under_24_months_is_refused_in_one_line_and_nothing_is_stored(tmp_path: Path) -> None:
    days, rates = quotes()
    short = TENORS[:4]  # 1M .. 1Y: the model needs maturities up to 24 months
    p = build_project(tmp_path, days, rates[:, :4], short)
    done = run_cli("model", "--curve", "mon", "--config", str(p.root / "afterward.toml"), cwd=p.root)
    assert done.returncode == 2, done.stdout + done.stderr
    assert "Traceback" not in done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "24 months" in lines[0] and "mon" in lines[0]
    for view in ("term_panel", "excess_returns", "eh_regressions", "model_term_premium"):
        assert p.value(f"SELECT count(*) FROM {view}") == 0
    assert p.value("SELECT count(*) FROM model_estimate") == 0


def test_a_month_without_a_built_day_is_skipped_and_named(tmp_path: Path) -> None:
    days, rates = quotes()
    keep = days.astype("datetime64[M]") != np.datetime64("2015-06")
    p = build_project(tmp_path, days[keep], rates[keep])
    done = run_cli("model", "--config", str(p.root / "afterward.toml"), cwd=p.root)
    assert done.returncode == 0, done.stderr
    assert "skipped months (no built day)" in done.stdout and "1: 2015-06" in done.stdout
    assert p.value("SELECT count(*) FROM term_panel WHERE strftime(as_of, '%Y-%m') = '2015-06'") == 0
    # no one-month return bridges the gap: none realised in June (missing) or July (bought in June)
    bridged = p.value("SELECT count(*) FROM excess_returns WHERE holding_months = 1 "
                      "AND strftime(as_of, '%Y-%m') IN ('2015-06', '2015-07')")
    assert bridged == 0
    assert p.value("SELECT list(skipped_months) FROM model_estimate")[0] == ["2015-06"]


def test_restating_quotes_after_a_month_leaves_earlier_realtime_rows_unchanged(tmp_path: Path) -> None:
    days, rates = quotes()
    p = build_project(tmp_path, days, rates)
    run_model(p.cfg)
    before = p.sql("SELECT * FROM model_term_premium WHERE fit = 'realtime' ORDER BY as_of, maturity_months")
    cut = np.datetime64("2017-06-30")
    later = days > cut
    changed = rates.copy()
    changed[later] += 0.004 + 0.002 * np.sin(np.arange(int(later.sum())))[:, None]  # every later quote moves
    load_files(p.cfg, [write_wide_csv(tmp_path / "mon_restated.csv", days[later], TENORS, changed[later], "%.12f")])
    run_build(p.cfg)
    run_model(p.cfg)
    after = p.sql("SELECT * FROM model_term_premium WHERE fit = 'realtime' ORDER BY as_of, maturity_months")
    old = before[pd.to_datetime(before["estimated_through"]) <= pd.Timestamp(cut)].reset_index(drop=True)
    new = after[pd.to_datetime(after["estimated_through"]) <= pd.Timestamp(cut)].reset_index(drop=True)
    assert len(old) > 0
    pd.testing.assert_frame_equal(new, old, check_exact=False, rtol=0, atol=1e-15)
    # and the restatement did reach the later estimates
    moved = after[pd.to_datetime(after["as_of"]) > pd.Timestamp(cut)]["term_premium"].to_numpy()
    assert not np.allclose(moved, before[pd.to_datetime(before["as_of"]) > pd.Timestamp(cut)]["term_premium"])
