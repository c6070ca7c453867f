"""Commands run as a user runs them (``python -m flows.cli`` in a fresh process): ``realize``,
``backfill --from --to``, ``demo`` and a daily ``run`` that fails part-way.

References: the realisation rule of the contract worked by hand with numpy business days
(``tests.e2e.stores.expected_observation``); the observed days and their counts from the files the
test wrote (plain numpy); the demo's report read back as a file. Only ``run`` and ``backfill`` start
Prefect; their processes get a throw-away ``PREFECT_HOME`` and the start-up settings that
tests/jobs/conftest.py uses for the in-process harness.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from tests.conftest import run_cli
from tests.e2e.stores import (
    FLAT_HOLIDAYS,
    FLAT_TENORS,
    FLAT_TOML,
    as_days,
    expected_observation,
    flat_levels,
    make_project,
    write_flat_files,
)

pytestmark = pytest.mark.timeout(600)


def prefect_env(tmp_path: Path) -> dict[str, str]:
    home = tmp_path / "prefect-home"
    home.mkdir(exist_ok=True)
    return {"PREFECT_HOME": str(home), "PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS": "90",
            "PREFECT_SERVER_ANALYTICS_ENABLED": "false", "PREFECT_API_URL": ""}


def _no_traceback(proc) -> None:  # noqa: ANN001
    assert "Traceback" not in proc.stdout + proc.stderr, proc.stdout[-3000:] + proc.stderr[-3000:]


# --- realize -------------------------------------------------------------------------------------

def test_realize_command_prints_the_counts_and_stores_the_outcomes(tmp_path):
    p = make_project(tmp_path / "flat", FLAT_TOML)
    levels = flat_levels()
    load_files(p.cfg, write_flat_files(p.root, levels))
    run_checks(p.cfg)
    run_build(p.cfg)
    assert p.value("SELECT count(*) FROM outcomes") == 0

    proc = run_cli("realize", cwd=p.root)
    assert proc.returncode == 0, proc.stderr
    _no_traceback(proc)
    # the contract's rule by hand: the first observed day within 3 business days of the target date
    observed = levels.index.to_numpy().astype("datetime64[D]")
    want = expected_observation(p.sql("SELECT * FROM forwards"), observed, FLAT_HOLIDAYS, 3)
    realised = want[want["kind"] == "realised"]
    n_real, n_pending = len(realised), int((want["kind"] != "realised").sum())
    assert n_real > 1000 and n_pending > 0
    m = re.search(r"^flat: realised ([\d,]+) forward\(s\); ([\d,]+) pending$", proc.stdout, re.M)
    assert m, proc.stdout
    assert (int(m.group(1).replace(",", "")), int(m.group(2).replace(",", ""))) == (n_real, n_pending)

    got = p.sql("SELECT as_of, start_months, tenor_months, observed_on, forward_rate, realized_rate FROM outcomes")
    assert len(got) == n_real
    key = ["as_of", "start_months", "tenor_months"]
    got["as_of"] = as_days(got["as_of"])
    got["observed_on"] = as_days(got["observed_on"])
    realised = realised.assign(as_of=as_days(realised["as_of"]))
    merged = got.merge(realised, on=key, how="outer", indicator=True, suffixes=("", "_want"))
    assert (merged["_merge"] == "both").all()
    assert (merged["observed_on"] == merged["observed_on_want"].to_numpy().astype("datetime64[D]")).all()
    # every tenor of a flat curve quotes the day's level (annual compounding, as in the files): the
    # realised rate is the level on the observation day
    level = pd.Series(levels.to_numpy(), index=observed)
    np.testing.assert_allclose(got["realized_rate"], level.loc[got["observed_on"]].to_numpy(), atol=1e-12)
    assert p.value("SELECT count(*) FROM pending_forwards") == n_pending
    # a second run realises nothing new and says so
    again = run_cli("realize", cwd=p.root)
    assert again.returncode == 0, again.stderr
    assert re.search(rf"^flat: realised 0 forward\(s\); {n_pending:,} pending$", again.stdout, re.M), again.stdout
    assert p.value("SELECT count(*) FROM outcomes") == n_real


# --- backfill --------------------------------------------------------------------------------------

@pytest.mark.slow  # a Prefect start-up in its own process: 25-40 s here
def test_backfill_command_builds_exactly_the_days_of_its_range(tmp_path):
    p = make_project(tmp_path / "flat", FLAT_TOML)
    levels = flat_levels()
    load_files(p.cfg, write_flat_files(p.root, levels))
    first, last = "2030-03-01", "2030-06-30"
    proc = run_cli("backfill", "--from", first, "--to", last, cwd=p.root, env=prefect_env(tmp_path), timeout=400)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    _no_traceback(proc)
    observed = levels.index.to_numpy().astype("datetime64[D]")
    in_range = observed[(observed >= np.datetime64(first)) & (observed <= np.datetime64(last))]
    n_fwd = len(in_range) * 3 * 3  # forward.starts x forward.tenors of FLAT_TOML
    m = re.search(r"^flat: built ([\d,]+) day\(s\), ([\d,]+) forwards, ([\d,]+) outcomes realised$", proc.stdout, re.M)
    assert m, proc.stdout
    assert (int(m.group(1).replace(",", "")), int(m.group(2).replace(",", ""))) == (len(in_range), n_fwd)
    assert f"backfill {first}..{last} on one worker thread" in proc.stdout
    built = p.sql("SELECT DISTINCT as_of FROM zero_rates ORDER BY as_of")
    np.testing.assert_array_equal(as_days(built["as_of"]), in_range)
    assert p.value("SELECT count(*) FROM zero_rates") == len(in_range) * len(FLAT_TENORS)
    assert p.value("SELECT count(*) FROM forwards") == n_fwd
    # forwards whose target date is inside the built range are realised from it (hand rule)
    want = expected_observation(p.sql("SELECT * FROM forwards"), in_range, FLAT_HOLIDAYS, 3)
    n_real = int((want["kind"] == "realised").sum())
    assert n_real > 0 and int(m.group(3).replace(",", "")) == n_real == p.value("SELECT count(*) FROM outcomes")


# --- a daily run that fails part-way ---------------------------------------------------------------

@pytest.mark.slow  # two Prefect start-ups: 40-85 s here
def test_run_that_fails_part_way_keeps_the_loaded_files_and_the_next_run_carries_on(tmp_path):
    """The inbox's files load, then filing them away fails (the `loaded` folder's parent is a plain
    file): the run exits 1 with one line, the loads stay committed, nothing was built, the files are
    still in the inbox; once the folder is fixed the next run finds them already loaded and goes on."""
    root = tmp_path / "proj"
    toml = FLAT_TOML + '\n[inbox]\npath = "inbox"\nloaded = "filed/loaded"\nrefused = "filed/refused"\n'
    p = make_project(root, toml)
    levels = flat_levels()[:60]
    (root / "inbox").mkdir()
    files = write_flat_files(root / "inbox", levels)
    (root / "filed").write_text("a plain file where a folder should be\n", encoding="utf-8")
    # stable_files waits until the files have been quiet for its settle time
    time.sleep(1.5)
    env = prefect_env(tmp_path)
    proc = run_cli("run", cwd=root, env=env, timeout=400)
    assert proc.returncode == 1, proc.stdout[-2000:] + proc.stderr[-2000:]
    # the command's own output is one line; Prefect's flow-run logger still writes the exception's
    # traceback to stderr (left as it is: see the report of this change)
    assert "Traceback" not in proc.stdout, proc.stdout
    fail_lines = [x for x in proc.stdout.splitlines() if "daily run failed" in x]
    assert len(fail_lines) == 1 and "filed" in fail_lines[0], proc.stdout
    # the load step's work is kept: every file committed with all its quotes
    n_quotes = len(levels) * len(FLAT_TENORS)
    assert p.value("SELECT count(*) FROM loads WHERE status = 'loaded'") == len(files)
    assert p.value("SELECT count(*) FROM quotes") == n_quotes
    # the steps after the failure did not run
    assert p.value("SELECT count(*) FROM zero_rates") == 0
    assert sorted(x.name for x in (root / "inbox").iterdir()) == sorted(f.name for f in files)

    (root / "filed").unlink()
    again = run_cli("run", cwd=root, env=env, timeout=400)
    _no_traceback(again)
    assert "daily run completed" in again.stdout, again.stdout[-2000:] + again.stderr[-2000:]
    assert f"{len(files)} already loaded" in again.stdout
    assert p.value("SELECT count(*) FROM loads WHERE status = 'loaded'") == len(files)
    assert p.value("SELECT count(*) FROM quotes") == n_quotes
    assert p.value("SELECT count(DISTINCT as_of) FROM zero_rates") == len(levels)
    assert sorted(x.name for x in (root / "filed" / "loaded").iterdir()) == sorted(f.name for f in files)
    assert list((root / "inbox").iterdir()) == []


# --- demo ---------------------------------------------------------------------------------------

@pytest.mark.slow  # about 40 s here
def test_demo_command_makes_the_store_and_the_report_it_prints(tmp_path):
    target = tmp_path / "demo"
    proc = run_cli("demo", str(target), cwd=tmp_path, timeout=900)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    _no_traceback(proc)
    printed = dict(re.findall(r"^(config|store|report):\s+(.+)$", proc.stdout, re.M))
    assert set(printed) == {"config", "store", "report"}, proc.stdout
    config, store, report = (Path(printed[k].strip()) for k in ("config", "store", "report"))
    for path in (config, store, report):
        assert path.is_file() and path.resolve().is_relative_to(target.resolve()), path
    html = report.read_text(encoding="utf-8")
    assert html.lstrip().lower().startswith("<!doctype html") and "<svg" in html
    import duckdb

    con = duckdb.connect(str(store), read_only=True)
    try:
        loads, refused, outcomes, audit, curves = con.execute(
            "SELECT (SELECT count(*) FROM loads), (SELECT count(*) FROM loads WHERE status = 'refused'), "
            "(SELECT count(*) FROM outcomes), (SELECT count(*) FROM audit_summary), "
            "(SELECT list(DISTINCT curve ORDER BY curve) FROM zero_rates)").fetchone()
    finally:
        con.close()
    m = re.search(r"^load: (\d+) files", proc.stdout, re.M)
    assert m and int(m.group(1)) == loads - refused, proc.stdout
    # every delivered file of the demo's inbox was loaded or refused, each once
    from pipeline.config import load_config

    delivered = [x for x in load_config(config).inbox.iterdir() if x.is_file()]
    assert len(delivered) == loads > 700
    m = re.search(r"^realize: ([\d,]+) outcomes", proc.stdout, re.M)
    assert m and int(m.group(1).replace(",", "")) == outcomes > 0
    assert audit > 0 and len(curves) == 2
    # the treasury desk's view: one forecast file, every row of it loaded as the contender desk_view
    from pipeline.demo.desk_view import DESK_VIEW_FILE, DESK_VIEW_NAME

    desk = target / DESK_VIEW_FILE
    lines = desk.read_text(encoding="utf-8").splitlines()
    con = duckdb.connect(str(store), read_only=True)
    try:
        assert con.execute("SELECT contender, status, rows_read, rows_rejected FROM forecast_loads").fetchall() == [
            (DESK_VIEW_NAME, "loaded", len(lines) - 1, 0)]
        assert con.execute("SELECT list(DISTINCT curve ORDER BY curve), count(*) FROM forecasts").fetchone() == (
            curves, len(lines) - 1)
        # compare ran with the desk view among the contenders, and the verdict printed is the stored one
        names = {r[0] for r in con.execute("SELECT DISTINCT contender FROM contender_scores").fetchall()}
        assert {"forward", "no_change", "premium_adjusted", DESK_VIEW_NAME} <= names
        verdict = con.execute("SELECT verdict FROM contender_verdict WHERE curve = 'govt' AND start_months = 24 "
                              "AND tenor_months = 12").fetchone()[0]
    finally:
        con.close()
    assert f"compare: govt {verdict}" in proc.stdout
    assert "the desk view" in verdict
