"""The backfill flow: chunks computed on a 2-worker local Dask cluster write exactly the rows that a
single-process run writes, and exactly the rows of the build step run without Prefect."""

from __future__ import annotations

import shutil

import pandas as pd
import pytest
from rich.console import Console

from flows.audit_step import run_audit
from flows.backfill import backfill, task_runner_for
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.chunks import compute_chunk, plan_chunks
from flows.load_step import load_files
from flows.realize_step import run_realize
from pipeline.config import load_config
from warehouse.connect import reader

pytestmark = [
    pytest.mark.timeout(300),
    pytest.mark.filterwarnings("ignore:unclosed <socket.socket:ResourceWarning"),
    pytest.mark.filterwarnings("ignore:Exception ignored in. <socket.socket:pytest.PytestUnraisableExceptionWarning"),
    # distributed's shutdown of a local cluster closes its comms while a heartbeat may be in flight
    pytest.mark.filterwarnings("ignore::pytest.PytestUnhandledThreadExceptionWarning"),
]

ZERO_COLS = "curve, as_of, tenor, maturity_date, year_fraction, zero_rate, zero_rate_cc, discount_factor"
FWD_COLS = "curve, as_of, start_months, tenor_months, start_date, end_date, forward_rate, forward_rate_cc"
OUT_COLS = "curve, as_of, start_months, tenor_months, target_date, observed_on, forward_rate, realized_rate"
AUDIT_COLS = ("curve, start_months, tenor_months, regime, n, first_as_of, last_as_of, mean_error_bp, rmse_bp, mae_bp, "
              "hac_t, rw_rmse_bp, rmse_ratio, dm_stat, dm_pvalue, mz_alpha, mz_beta, mz_pvalue, fb_beta, fb_beta_se, "
              "fb_r2, hit_rate, n_effective, hac_pvalue, dm_pvalue_fixed_b, indicative")
PREMIUM_COLS = "curve, as_of, start_months, tenor_months, window_days, premium_bp, lower_bp, upper_bp"
FINDING_COLS = "curve, as_of, check_name, severity, tenor, detail"
STATE_COLS = "curve, start_months, tenor_months, regime, n, lags, sums, band, lag_band"


def rows(cfg, view: str, cols: str) -> pd.DataFrame:  # noqa: ANN001
    with reader(cfg.store_path) as con:
        return con.sql(f"SELECT {cols} FROM {view} ORDER BY {cols}").to_arrow_table().to_pandas()


@pytest.fixture(scope="module")
def loaded_store(demo_files, tmp_path_factory):  # noqa: ANN001, ANN201
    """Three demo years loaded (no build yet): the config path of a template project."""
    from pipeline.demo import demo_config_toml

    root = tmp_path_factory.mktemp("backfill-template")
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    files = [p for p in demo_files.files if any(f"_{y}-" in p.name for y in (2011, 2012, 2013))]
    outcomes = load_files(cfg, files)
    assert {o.status for o in outcomes} == {"loaded"}
    return root


def copy_project(template, tmp_path, name: str):  # noqa: ANN001, ANN201
    shutil.copytree(template, tmp_path / name)
    return load_config(tmp_path / name / "afterward.toml")


def test_a_two_worker_dask_backfill_writes_exactly_the_single_process_rows(loaded_store, tmp_path):
    from flows.prefect_commands import cli_backfill

    dask_cfg = copy_project(loaded_store, tmp_path, "dask")
    single_cfg = copy_project(loaded_store, tmp_path, "single")
    plain_cfg = copy_project(loaded_store, tmp_path, "plain")

    # the command line's path: a local cluster of 2 worker processes, started beside Prefect
    console = Console(record=True, width=200)
    assert cli_backfill(dask_cfg.path, None, None, 2, None, console) == 0, console.export_text()
    assert "Dask cluster at tcp://" in console.export_text()
    # one process, one worker thread, small chunks (so the chunking differs as well)
    single = backfill.with_options(task_runner=task_runner_for(1))(config_path=str(single_cfg.path), chunk_days=97)
    assert single.chunks > 4
    # the check, build, realize and audit steps without Prefect
    run_checks(plain_cfg)
    run_build(plain_cfg)
    run_realize(plain_cfg)
    run_audit(plain_cfg)

    # on Dask each curve's audit is computed on the workers in parts by cell, then joined
    for view, cols in (("zero_rates", ZERO_COLS), ("forwards", FWD_COLS), ("outcomes", OUT_COLS),
                       ("audit_summary", AUDIT_COLS), ("term_premium", PREMIUM_COLS), ("finding", FINDING_COLS),
                       ("audit_state_cell", STATE_COLS)):
        reference = rows(plain_cfg, view, cols)
        assert len(reference) > 0 or view == "finding", view  # clean demo years may have no finding
        pd.testing.assert_frame_equal(rows(dask_cfg, view, cols), reference, check_exact=True, obj=f"{view} dask")
        pd.testing.assert_frame_equal(rows(single_cfg, view, cols), reference, check_exact=True,
                                      obj=f"{view} single")
    assert single.forwards_built == len(rows(plain_cfg, "forwards", "curve"))
    assert single.caught_up == 0  # the chunks left nothing for the build step to do


def test_a_backfill_builds_only_its_range_and_a_rerun_has_nothing_to_do(loaded_store, tmp_path):
    cfg = copy_project(loaded_store, tmp_path, "range")
    run = backfill.with_options(task_runner=task_runner_for(1))
    first = run(config_path=str(cfg.path), first="2012-03-01", last="2012-06-30")
    with reader(cfg.store_path) as con:
        lo, hi, n = con.execute("SELECT min(as_of), max(as_of), count(DISTINCT as_of) FROM zero_rates "
                                "WHERE curve = 'swap'").fetchone()
        [(days,)] = con.execute("SELECT count(DISTINCT as_of) FROM quotes WHERE curve = 'swap' "
                                "AND as_of BETWEEN '2012-03-01' AND '2012-06-30'").fetchall()
    assert str(lo) >= "2012-03-01" and str(hi) <= "2012-06-30"
    assert n == days == first.curves["swap"]["days_built"]
    again = run(config_path=str(cfg.path), first="2012-03-01", last="2012-06-30")
    assert again.days_planned == 0 and again.days_built == 0


def test_a_chunk_is_pure_computation_on_what_the_plan_read(loaded_store, tmp_path):
    """The same chunk computed twice gives identical frames: nothing in it depends on the store."""
    cfg = copy_project(loaded_store, tmp_path, "pure")
    jobs = plan_chunks(cfg, "2013-01-01", "2013-02-28", chunk_days=10)
    assert {j.curve for j in jobs} == set(cfg.curves)
    assert all(j.days <= 10 for j in jobs)
    a, b = compute_chunk(jobs[0]), compute_chunk(jobs[0])
    pd.testing.assert_frame_equal(a.forwards.frame(), b.forwards.frame())
    c = cfg.curve(jobs[0].curve)
    assert len(a.forwards) == int(a.ok.sum()) * len(c.forward_starts) * len(c.forward_tenors)


def test_chunks_start_costliest_first(loaded_store, tmp_path):
    # longest-processing-time order (common scheduling practice, no source): the par curve's
    # bootstrap makes its chunks dearer than the zero curve's chunks of as many days
    from flows.chunks import costliest_first, job_cost

    cfg = copy_project(loaded_store, tmp_path, "order")
    jobs = plan_chunks(cfg, None, None, 97)
    ordered = costliest_first(jobs)
    assert sorted((j.curve, j.index) for j in ordered) == sorted((j.curve, j.index) for j in jobs)
    costs = [job_cost(j) for j in ordered]
    assert costs == sorted(costs, reverse=True)
    par = {n for n in cfg.curves if cfg.curve(n).quote == "par"}
    assert par and ordered[0].curve in par


def test_the_writer_hands_back_each_curve_once_and_never_stores_a_chunk_twice(loaded_store, tmp_path):
    from prefect import flow
    from prefect.utilities.annotations import quote

    from flows.chunks import ChunkArrivals, costliest_first, submit_chunks, write_chunks

    cfg = copy_project(loaded_store, tmp_path, "writer")

    @flow(task_runner=task_runner_for(1))
    def store_all() -> tuple:
        jobs = costliest_first(plan_chunks(cfg, None, None, 200))
        arrivals = ChunkArrivals(jobs, submit_chunks(jobs))
        rounds = []
        while not arrivals.done:
            rounds.append(write_chunks(cfg, quote(arrivals)))
        rounds.append(write_chunks(cfg, quote(arrivals)))  # a writer called again (as a retry is) stores nothing
        return jobs, arrivals, rounds

    jobs, arrivals, rounds = store_all()
    assert sorted(c for r in rounds for c in r) == sorted(cfg.curves)
    assert rounds[-1] == []
    assert sum(c["chunks"] for c in arrivals.counts.values()) == len(jobs)
    assert arrivals.days_stored == arrivals.total_days == sum(j.days for j in jobs)
    with reader(cfg.store_path) as con:
        [(n,)] = con.execute("SELECT count(*) FROM forwards").fetchall()
    assert n == sum(c["forwards"] for c in arrivals.counts.values()) > 0


def test_a_day_the_checks_hold_back_is_not_stored_though_its_chunk_was_computed_before_the_checks(
        loaded_store, tmp_path):
    """The chunks start before the checks run; a day a new reject finding holds back is dropped from
    its chunk, so the backfill stores what the check and build steps store without Prefect."""
    configs = [copy_project(loaded_store, tmp_path, name) for name in ("flow", "plain")]
    for cfg in configs:
        # a restated govt day with its 5Y quote 300 bp off: a jump, which the checks reject
        with reader(cfg.store_path) as con:
            day = con.sql("SELECT tenor, rate FROM quotes WHERE curve = 'govt' AND as_of = '2012-06-14'"
                          ).to_arrow_table().to_pandas()
        rates = dict(zip(day["tenor"], day["rate"], strict=True))
        rates["5Y"] += 0.03
        fix = tmp_path / f"govt_2012-06-14-{cfg.path.parent.name}.csv"
        fix.write_text("date," + ",".join(rates) + "\n2012-06-14," + ",".join(f"{100 * r:.4f}" for r in
                                                                            rates.values()) + "\n")
        assert {o.status for o in load_files(cfg, [fix])} == {"loaded"}
    flow_cfg, plain_cfg = configs
    done = backfill.with_options(task_runner=task_runner_for(1))(config_path=str(flow_cfg.path))
    run_checks(plain_cfg)
    plain = run_build(plain_cfg)
    with reader(flow_cfg.store_path) as con:
        held = {str(d) for (d,) in con.execute("SELECT as_of FROM held_days WHERE curve = 'govt'").fetchall()}
        built = {str(d) for (d,) in con.execute("SELECT DISTINCT as_of FROM zero_rates WHERE curve = 'govt'"
                                                   ).fetchall()}
    assert "2012-06-14" in held and not held & built
    # the backfill counts the days held back as the build step does
    assert done.curves["govt"]["held"] == plain.curves["govt"]["held"] == len(held)
    assert done.caught_up == 0 and not done.curves["govt"].get("withdrawn")  # nothing stored to withdraw
    for view, cols in (("zero_rates", ZERO_COLS), ("forwards", FWD_COLS), ("finding", FINDING_COLS)):
        pd.testing.assert_frame_equal(rows(flow_cfg, view, cols), rows(plain_cfg, view, cols), check_exact=True,
                                      obj=view)


def test_the_backfill_command_says_how_many_days_reject_findings_held_back(loaded_store, tmp_path):
    """``afterward backfill`` prints, per curve, the days held back by reject findings, as ``build`` does."""
    from flows.prefect_commands import cli_backfill

    cfg = copy_project(loaded_store, tmp_path, "held")
    # a restated govt day with its 5Y quote 300 bp off: a jump, which the checks reject
    with reader(cfg.store_path) as con:
        day = con.sql("SELECT tenor, rate FROM quotes WHERE curve = 'govt' AND as_of = '2012-06-14'"
                      ).to_arrow_table().to_pandas()
    rates = dict(zip(day["tenor"], day["rate"], strict=True))
    rates["5Y"] += 0.03
    fix = tmp_path / "govt_2012-06-14-jump.csv"
    fix.write_text("date," + ",".join(rates) + "\n2012-06-14," + ",".join(f"{100 * r:.4f}" for r in rates.values())
                   + "\n")
    assert {o.status for o in load_files(cfg, [fix])} == {"loaded"}
    console = Console(record=True, width=200)
    assert cli_backfill(cfg.path, None, None, 1, None, console) == 0, console.export_text()
    text = console.export_text()
    with reader(cfg.store_path) as con:
        held = dict(con.execute("SELECT curve, count(*) FROM held_days GROUP BY curve").fetchall())
    assert held.get("govt")
    for name in cfg.curves:
        line = next(x for x in text.splitlines() if x.startswith(f"{name}: built"))
        if held.get(name):
            assert f", {held[name]:,} held back by reject findings" in line, line
        else:
            assert "held back" not in line, line
