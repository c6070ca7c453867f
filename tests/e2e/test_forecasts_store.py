"""User forecast files in a real store, through the real command line: `forecasts load` and `forecasts list`.

Every check here is against the project's own rules (the forecast-contender issue and the quotes'
discipline in warehouse/loads.py); no outside source is involved.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

from flows.forecasts_step import load_forecasts
from flows.load_step import load_files
from pipeline.config import load_config
from pipeline.contenders.forecasts import FORECAST_COLUMNS
from tests.conftest import run_cli
from warehouse.connect import reader
from warehouse.forecasts import current_forecasts, forecast_names

QUOTES = "date,3M,1Y,2Y,5Y,10Y\n2031-01-02,4.10,4.20,4.30,4.50,4.80\n2031-01-03,4.11,4.21,4.31,4.51,4.81\n"
HEADER = "as_of,start,tenor,rate\n"
FORECAST_TABLES = ("forecast_load", "forecast_version", "forecast_rejected_row")


def _tables(store: Path) -> dict[str, str]:
    """A digest of every table's rows (order-free), by table name."""
    con = duckdb.connect(str(store), read_only=True)
    try:
        names = [r[0] for r in con.execute("SELECT table_name FROM information_schema.tables "
                                           "WHERE table_type = 'BASE TABLE' ORDER BY 1").fetchall()]
        out = {}
        for name in names:
            rows = sorted(repr(r) for r in con.execute(f"SELECT * FROM {name}").fetchall())
            out[name] = hashlib.sha256("\n".join(rows).encode()).hexdigest()
        return out
    finally:
        con.close()


def _others(digests: dict[str, str]) -> dict[str, str]:
    return {k: v for k, v in digests.items() if k not in FORECAST_TABLES}


def _q(project: Path, sql: str, params: list | None = None) -> list[tuple]:
    cfg = load_config(project / "afterward.toml")
    with reader(cfg.store_path) as con:
        return con.execute(sql, params or []).fetchall()


def _one_line_error(proc) -> str:  # noqa: ANN001
    assert "Traceback" not in proc.stderr + proc.stdout
    lines = [x for x in proc.stderr.splitlines() if x.strip()]
    assert len(lines) == 1, proc.stderr
    return lines[0]


@pytest.fixture
def store(project: Path) -> Path:
    """The small two-curve project with two days of govt quotes loaded (so the quote archive has rows)."""
    (project / "govt_2031-01.csv").write_text(QUOTES)
    [loaded] = load_files(load_config(project / "afterward.toml"), [project / "govt_2031-01.csv"])
    assert loaded.status == "loaded" and loaded.rows_accepted == 10
    return project


def _write(path: Path, lines: list[str], header: str = HEADER) -> Path:
    path.write_text(header + "".join(x + "\n" for x in lines))
    return path


def test_load_then_list_round_trip(store: Path):
    _write(store / "house.csv", ["2031-01-02,1Y,1Y,4.40", "2031-01-02,2Y,1Y,4.55", "2031-01-03,1Y,1Y,4.41"])
    _write(store / "house_swap.csv", ["2031-01-03,3M,1Y,0.0390"])
    proc = run_cli("forecasts", "load", "house.csv", "--name", "house", "--curve", "govt", cwd=store)
    assert proc.returncode == 0, proc.stderr
    assert "house.csv: read 3, accepted 3, rejected 0" in proc.stdout
    proc = run_cli("forecasts", "load", "house_swap.csv", "--name", "house", "--curve", "swap", cwd=store)
    assert proc.returncode == 0, proc.stderr
    listed = run_cli("forecasts", "list", "--format", "json", cwd=store)
    assert listed.returncode == 0, listed.stderr
    rows = {(r["contender"], r["curve"]): r for r in json.loads(listed.stdout)}
    assert set(rows) == {("house", "govt"), ("house", "swap")}
    govt = rows[("house", "govt")]
    assert (govt["files"], govt["rows_current"], govt["first_as_of"], govt["last_as_of"]) == (1, 3, "2031-01-02",
                                                                                              "2031-01-03")
    logged = _q(store, "SELECT max(finished_at) FROM forecast_load WHERE curve = 'govt'")[0][0]
    assert govt["last_loaded_at"] == logged.isoformat(sep=" ")
    assert rows[("house", "swap")]["rows_current"] == 1
    table = run_cli("forecasts", "list", cwd=store)
    assert table.returncode == 0 and "house" in table.stdout and "swap" in table.stdout
    # rates are stored as decimals in each curve's units: govt in percent, swap as decimals
    cfg = load_config(store / "afterward.toml")
    with reader(cfg.store_path) as con:
        got = current_forecasts(con)
        assert forecast_names(con) == ["house"]
        assert list(current_forecasts(con, "swap")["forecast_rate"]) == [0.039]
    assert list(got.columns) == list(FORECAST_COLUMNS)
    assert got["forecast_rate"].tolist() == pytest.approx([0.044, 0.0455, 0.0441, 0.039])
    assert got.dtypes["start_months"] == np.int64 and got.dtypes["tenor_months"] == np.int64
    assert np.issubdtype(got["as_of"].dtype, np.datetime64)
    key = ["curve", "contender", "as_of", "start_months", "tenor_months"]
    assert got.equals(got.sort_values(key, ignore_index=True))


def test_the_same_file_twice_changes_nothing(store: Path):
    f = _write(store / "house.csv", ["2031-01-02,1Y,1Y,4.40", "2031-01-02,2Y,1Y,4.55"])
    assert run_cli("forecasts", "load", str(f), "--name", "house", "--curve", "govt", cwd=store).returncode == 0
    before = _tables(store / "store.duckdb")
    again = run_cli("forecasts", "load", str(f), "--name", "house", "--curve", "govt", cwd=store)
    assert again.returncode == 0 and "already loaded" in again.stdout
    assert _tables(store / "store.duckdb") == before
    # the same bytes under another name are another contender's file, loaded as such
    other = run_cli("forecasts", "load", str(f), "--name", "survey", "--curve", "govt", cwd=store)
    assert other.returncode == 0 and "accepted 2" in other.stdout


def test_a_restatement_keeps_both_versions_and_the_new_rate_is_current(store: Path):
    first = _write(store / "v1.csv", ["2031-01-02,1Y,1Y,4.40", "2031-01-02,2Y,1Y,4.55"])
    second = _write(store / "v2.csv", ["2031-01-02,1Y,1Y,4.45", "2031-01-02,2Y,1Y,4.55"])
    assert run_cli("forecasts", "load", str(first), "--name", "house", "--curve", "govt", cwd=store).returncode == 0
    stamp = _q(store, "SELECT max(finished_at) FROM forecast_load")[0][0]
    proc = run_cli("forecasts", "load", str(second), "--name", "house", "--curve", "govt", cwd=store)
    assert proc.returncode == 0 and "revised 1, unchanged 1" in proc.stdout
    versions = _q(store, "SELECT forecast_rate, superseded_at IS NULL FROM forecast_history "
                         "WHERE start_months = 12 ORDER BY recorded_at")
    assert [(round(r, 6), cur) for r, cur in versions] == [(0.044, False), (0.0445, True)]
    assert _q(store, "SELECT count(*) FROM forecast_history WHERE start_months = 24")[0][0] == 1
    cfg = load_config(store / "afterward.toml")
    with reader(cfg.store_path) as con:
        now = current_forecasts(con)
        then = current_forecasts(con, as_known_at=stamp)
    assert now.loc[now["start_months"] == 12, "forecast_rate"].tolist() == pytest.approx([0.0445])
    assert then.loc[then["start_months"] == 12, "forecast_rate"].tolist() == pytest.approx([0.044])


def test_an_off_grid_forecast_is_accepted_on_its_own_start_and_tenor(store: Path):
    # SMALL_CONFIG's govt grid: starts 0M, 3M, 1Y; tenors 3M, 1Y. 7M x 13M is on neither.
    f = _write(store / "off.csv", ["2031-01-02,7M,13M,4.6", "2031-01-02,18 months,2Y,4.7"])
    proc = run_cli("forecasts", "load", str(f), "--name", "house", "--curve", "govt", cwd=store)
    assert proc.returncode == 0, proc.stderr
    assert sorted(_q(store, "SELECT start_months, tenor_months FROM forecasts")) == [(7, 13), (18, 24)]


@pytest.mark.parametrize(("lines", "check", "says"), [
    pytest.param(["2031-01-02,1Y,1Y,4.40,govt", "2031-01-02,1Y,1Y,4.40,mars"], "unknown_curve", "unknown curve 'mars'",
                 id="unknown-curve"),
    pytest.param(["2031-01-02,1Y,1Y,4.40,govt", "2031-01-02,soon,1Y,4.40,govt"], "unparseable", "start 'soon'",
                 id="unparseable-start"),
    pytest.param(["2031-01-02,1Y,1Y,4.40,govt", "2031-01-02,2Y,1Y,4e5,govt"], "out_of_range",
                 "out of range: rate 400000 (percent)", id="rate-4e5"),
    pytest.param(["2031-01-02,2Y,1Y,4.40,govt", "2031-01-02,1Y,1Y,4.40,govt", "2031-01-02,12M,1Y,4.50,govt"],
                 "duplicate", "conflicting values", id="duplicate-two-values"),
])
def test_bad_rows_are_rejected_with_a_reason_and_accounted_for(store: Path, lines, check, says):
    f = _write(store / "bad.csv", lines, header="as_of,start,tenor,rate,curve\n")
    before = _tables(store / "store.duckdb")
    [outcome] = load_forecasts(load_config(store / "afterward.toml"), [f], "house")
    assert outcome.status == "loaded" and outcome.rows_rejected >= 1
    [(read, accepted, rejected)] = _q(store, "SELECT rows_read, rows_accepted, rows_rejected FROM forecast_loads")
    assert read == len(lines) == accepted + rejected
    reasons = _q(store, "SELECT line, reason, check_name FROM forecast_rejected_rows ORDER BY line")
    assert len(reasons) == rejected >= 1
    assert all(c == check and "\n" not in r for _, r, c in reasons)
    assert any(says in r for _, r, _ in reasons), reasons
    assert _q(store, "SELECT count(*) FROM forecasts")[0][0] == accepted
    assert _others(_tables(store / "store.duckdb")) == _others(before)


@pytest.mark.parametrize(("args", "says"), [
    pytest.param(["--name", "forward", "--curve", "govt"], "built-in contender", id="built-in-name"),
    pytest.param(["--name", "no_change", "--curve", "govt"], "built-in contender", id="built-in-no-change"),
    pytest.param(["--name", "House", "--curve", "govt"], "is not allowed", id="bad-name"),
    pytest.param(["--name", "house", "--curve", "mars"], "--curve 'mars' is not a configured curve", id="curve"),
    pytest.param(["--name", "house", "--curve", "govt", "--units", "pips"], "--units 'pips'", id="units"),
    pytest.param(["--name", "house"], "has no curve column", id="no-curve"),
    pytest.param(["--name", "house", "--curve", "govt", "missing.csv"], "file not found", id="missing-file"),
])
def test_a_bad_request_is_refused_whole_and_changes_nothing(store: Path, args, says):
    _write(store / "good.csv", ["2031-01-02,1Y,1Y,4.40"])
    before = _tables(store / "store.duckdb")
    files = [a for a in args if a.endswith(".csv")]
    options = [a for a in args if not a.endswith(".csv")]
    proc = run_cli("forecasts", "load", "good.csv", *files, *options, cwd=store)
    assert proc.returncode == 2, (proc.stdout, proc.stderr)
    assert says in _one_line_error(proc)
    assert _tables(store / "store.duckdb") == before


def test_rejected_rows_make_the_command_exit_1_with_a_line_per_file(store: Path):
    _write(store / "mixed.csv", ["2031-01-02,1Y,1Y,4.40", "2031-01-02,1Y,2Y,4e5"])
    proc = run_cli("forecasts", "load", "mixed.csv", "--name", "house", "--curve", "govt", cwd=store)
    assert proc.returncode == 1 and "Traceback" not in proc.stderr + proc.stdout
    assert proc.stdout.strip() == "mixed.csv: read 2, accepted 1, rejected 1"


def test_an_unreadable_file_is_recorded_as_refused(store: Path):
    (store / "wrong.csv").write_text("as_of,horizon,rate\n2031-01-02,1Y,4.4\n")
    proc = run_cli("forecasts", "load", "wrong.csv", "--name", "house", "--curve", "govt", cwd=store)
    assert proc.returncode == 1
    assert "refused: a forecast file needs the columns" in proc.stdout
    assert _q(store, "SELECT status, rows_read FROM forecast_loads") == [("refused", 0)]
    assert _q(store, "SELECT line, check_name FROM forecast_rejected_rows") == [(0, "unreadable")]


def test_units_option_and_other_formats(store: Path):
    frame = pd.DataFrame({"as_of": pd.to_datetime(["2031-01-02", "2031-01-03"]), "start": ["1Y", "1Y"],
                          "tenor": ["1Y", "1Y"], "rate": [440.0, 441.0]})
    frame.to_parquet(store / "bp.parquet", index=False)
    proc = run_cli("forecasts", "load", "bp.parquet", "--name", "house", "--curve", "govt", "--units", "bp", cwd=store)
    assert proc.returncode == 0, proc.stderr
    assert [round(r, 8) for (r,) in _q(store, "SELECT forecast_rate FROM forecasts ORDER BY as_of")] == [0.044, 0.0441]
    assert _q(store, "SELECT units FROM forecast_loads") == [("bp",)]
