"""The archive's promises on a real DuckDB file: lineage, idempotent loads, versioned restatements,
every row in exactly one place, and a load killed mid-way leaving the store as it was."""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import duckdb
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from flows.load_step import load_files
from pipeline.config import load_config
from tests.conftest import REPO, SMALL_CONFIG

JAN = (
    "date,3M,1Y,2Y,5Y,10Y\n"
    "2031-01-02,4.10,4.20,4.30,4.50,4.80\n"
    "2031-01-03,4.11,4.21,4.31,4.51,4.81\n"
    "2031-01-06,4.12,4.22,,4.52,4.82\n"
)
RESTATE = (
    "date,3M,1Y,2Y,5Y,10Y\n"
    "2031-01-03,4.11,4.25,4.31,4.55,4.81\n"     # 1Y and 5Y restated, the rest re-sent unchanged
)


def _q(cfg, query: str, params=None):
    with duckdb.connect(str(cfg.store_path), read_only=True) as con:
        return con.execute(query, params or []).fetchall()


def _write(p: Path, text: str) -> Path:
    p.write_text(text, encoding="utf-8")
    return p


def test_load_records_lineage_and_counts(project):
    cfg = load_config(project / "afterward.toml")
    f = _write(project / "govt_2031-01.csv", JAN + "2031-01-0?,garbled\n")
    [out] = load_files(cfg, [f])
    assert (out.status, out.rows_read, out.rows_accepted, out.rows_rejected) == ("loaded", 15, 14, 1)
    [(sha, read, acc, rej, status)] = _q(
        cfg, "SELECT sha256, rows_read, rows_accepted, rows_rejected, status FROM loads")
    import hashlib

    assert sha == hashlib.sha256(f.read_bytes()).hexdigest()
    assert (read, acc, rej, status) == (15, 14, 1, "loaded")
    assert read == acc + rej
    assert _q(cfg, "SELECT count(*) FROM quotes")[0][0] == 14
    [(line, raw, reason)] = _q(cfg, "SELECT line, raw, reason FROM rejected_rows")
    assert line == 5 and raw == "2031-01-0?,garbled" and "not a valid date" in reason
    # maturity: 2 Jan 2031 + 3M = 2 Apr 2031 (a Wednesday), rolled nowhere
    assert str(_q(cfg, "SELECT maturity_date FROM quotes WHERE as_of = DATE '2031-01-02' AND tenor = '3M'")[0][0]) \
        == "2031-04-02"


def test_same_file_twice_is_already_loaded_and_changes_nothing(project):
    cfg = load_config(project / "afterward.toml")
    f = _write(project / "govt_2031-01.csv", JAN)
    load_files(cfg, [f])
    before = _q(cfg, "SELECT * FROM quote_history ORDER BY ALL")
    copy = _write(project / "govt_copy.csv", JAN)   # same bytes under another name
    outs = load_files(cfg, [f, copy])
    assert [o.status for o in outs] == ["already loaded", "already loaded"]
    assert _q(cfg, "SELECT * FROM quote_history ORDER BY ALL") == before
    assert _q(cfg, "SELECT count(*) FROM loads")[0][0] == 1


def test_lineage_is_per_curve_a_file_loaded_into_one_curve_loads_into_another(project):
    # issue 15: the same bytes loaded with --curve b after curve a used to be skipped as "already loaded"
    cfg = load_config(project / "afterward.toml")
    f = _write(project / "rates.csv", "date,tenor,rate\n2031-01-02,1M,0.031\n2031-01-02,1Y,0.033\n")
    [first] = load_files(cfg, [f], curve="swap")
    [second] = load_files(cfg, [f], curve="govt")   # govt has no 1M: one row rejected, 1Y accepted
    assert (first.status, first.rows_accepted) == ("loaded", 2)
    assert (second.status, second.rows_accepted, second.rows_rejected) == ("loaded", 1, 1)
    assert _q(cfg, "SELECT curve, tenor FROM quotes ORDER BY ALL") == [("govt", "1Y"), ("swap", "1M"), ("swap", "1Y")]
    [third] = load_files(cfg, [f], curve="govt")
    assert (third.status, third.detail) == ("already loaded", f"same content as load {second.load_id}")


def test_a_load_that_accepted_nothing_does_not_block_the_same_file_later(project):
    # issue 15: a file whose every row was rejected (wrong date_format) must be loadable once the config is fixed
    toml = project / "afterward.toml"
    toml.write_text(toml.read_text().replace('[curves.govt]\n', '[curves.govt]\ndate_format = "month_first"\n'))
    f = _write(project / "govt_dm.csv", "date,3M,1Y\n25/01/2031,4.10,4.20\n27/01/2031,4.11,4.21\n")
    [bad] = load_files(load_config(toml), [f])
    assert (bad.status, bad.rows_accepted, bad.rows_rejected) == ("loaded", 0, 2)
    toml.write_text(toml.read_text().replace('date_format = "month_first"', 'date_format = "day_first"'))
    cfg = load_config(toml)
    [good] = load_files(cfg, [f])
    assert (good.status, good.rows_accepted, good.rows_rejected) == ("loaded", 4, 0)
    assert _q(cfg, "SELECT count(*) FROM quotes")[0][0] == 4
    # a load that did accept rows blocks a repeat, which --reprocess loads again as a new load that says why
    [again] = load_files(cfg, [f])
    assert again.status == "already loaded"
    [redo] = load_files(cfg, [f], reprocess=True)
    assert (redo.status, redo.rows_accepted, redo.rows_unchanged, redo.rows_new) == ("loaded", 4, 4, 0)
    assert redo.detail == f"reprocessed: the same content as load {good.load_id}, read again on request"
    assert _q(cfg, "SELECT load_id, detail FROM load_log ORDER BY load_id")[-1] == (redo.load_id, redo.detail)
    assert _q(cfg, "SELECT count(*) FROM quote_history")[0][0] == 4     # same values: no new versions


def test_a_file_matching_no_curve_is_refused_and_blocks_nothing(project):
    # issue 15: it was recorded as loaded with a blank curve, and an identical file for a real curve then skipped
    cfg = load_config(project / "afterward.toml")
    stray = _write(project / "stray.csv", JAN)
    [out] = load_files(cfg, [stray])
    assert out.status == "refused" and out.detail.startswith("matches no curve")
    [real] = load_files(cfg, [_write(project / "govt_2031-01.csv", JAN)])
    assert (real.status, real.rows_accepted) == ("loaded", 14)


def test_restatement_supersedes_and_keeps_the_old_version(project):
    cfg = load_config(project / "afterward.toml")
    load_files(cfg, [_write(project / "govt_2031-01.csv", JAN)])
    t_between = _q(cfg, "SELECT max(finished_at) FROM loads")[0][0]
    time.sleep(0.01)
    [out] = load_files(cfg, [_write(project / "govt_restated.csv", RESTATE)])
    assert (out.rows_accepted, out.rows_revised, out.rows_unchanged, out.rows_new) == (5, 2, 3, 0)
    hist = _q(cfg, "SELECT rate, superseded_at IS NULL FROM quote_history "
                   "WHERE as_of = DATE '2031-01-03' AND tenor = '1Y' ORDER BY recorded_at")
    assert hist == [(pytest.approx(0.0421), False), (pytest.approx(0.0425), True)]
    assert _q(cfg, "SELECT rate FROM quotes WHERE as_of = DATE '2031-01-03' AND tenor = '1Y'")[0][0] \
        == pytest.approx(0.0425)
    # as it stood before the restatement
    assert _q(cfg, "SELECT rate FROM quotes_as_of(?) WHERE as_of = DATE '2031-01-03' AND tenor = '1Y'",
              [t_between])[0][0] == pytest.approx(0.0421)
    assert _q(cfg, "SELECT count(*) FROM quotes")[0][0] == 14
    assert _q(cfg, "SELECT count(*) FROM quote_history")[0][0] == 16


def test_duplicates_within_a_file(project):
    cfg = load_config(project / "afterward.toml")
    text = JAN + "2031-01-02,4.10,4.20,4.30,4.50,4.80\n" + "2031-01-06,4.99,,,,\n"
    [out] = load_files(cfg, [_write(project / "govt_dup.csv", text)])
    reasons = _q(cfg, "SELECT line, reason FROM rejected_rows ORDER BY line, reason")
    # line 5 repeats line 2 exactly: five repeats rejected; line 6 conflicts with line 4 on 3M: both rejected
    assert sum("repeats line 2" in r for _, r in reasons) == 5
    conflicts = [(line, r) for line, r in reasons if "conflicting" in r]
    assert sorted(line for line, _ in conflicts) == [4, 6]
    assert out.rows_read == out.rows_accepted + out.rows_rejected == 20
    assert _q(cfg, "SELECT count(*) FROM quotes WHERE as_of = DATE '2031-01-06' AND tenor = '3M'")[0][0] == 0


def test_units_and_routing(project):
    cfg = load_config(project / "afterward.toml")
    t = pa.table({"date": pa.array([18993, 18993], type=pa.date32()), "tenor": ["1M", "7Y"],
                  "rate": [0.031, 0.04]})
    p = project / "swap_2022-01.parquet"
    pq.write_table(t, p)
    [out] = load_files(cfg, [p])
    assert out.rows_accepted == 1 and out.rows_rejected == 1    # 7Y is not a swap tenor
    assert _q(cfg, "SELECT curve, tenor, rate FROM quotes") == [("swap", "1M", pytest.approx(0.031))]
    assert "not one of curves.swap.tenors" in _q(cfg, "SELECT reason FROM rejected_rows")[0][0]
    # a name no curve's pattern fits is refused whole with the real cause (not its rows as bad dates)
    [out] = load_files(cfg, [_write(project / "mystery.csv", JAN)])
    assert out.status == "refused" and out.rows_accepted == 0
    assert _q(cfg, "SELECT line, reason FROM rejected_rows WHERE load_id = 2") == [
        (0, "matches no curve: the name fits none of the files patterns govt_*.csv (govt), swap_*.parquet (swap); "
            "use --curve NAME")]
    assert _q(cfg, "SELECT status, curve FROM load_log WHERE load_id = 2") == [("refused", None)]


def test_unreadable_file_is_refused_and_recorded(project):
    cfg = load_config(project / "afterward.toml")
    p = project / "govt_bin.csv"
    p.write_bytes(b"\x00\x01\x02\x03" * 100)
    [out] = load_files(cfg, [p])
    assert out.status == "refused" and "binary" in (out.detail or "")
    assert _q(cfg, "SELECT status, rows_read FROM loads") == [("refused", 0)]
    assert _q(cfg, "SELECT line FROM rejected_rows") == [(0,)]


def _big_file(path: Path, days: int) -> Path:
    import numpy as np

    d = np.arange(np.datetime64("1901-01-01"), np.datetime64("1901-01-01") + days)
    lines = ["date,3M,1Y,2Y,5Y,10Y"] + [f"{x},4.1,4.2,4.3,4.5,4.8" for x in d.astype(str)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _snapshot(cfg) -> tuple:
    with duckdb.connect(str(cfg.store_path), read_only=True) as con:
        return (
            con.execute("SELECT * FROM quote_history ORDER BY ALL").fetchall(),
            con.execute("SELECT load_id, sha256, rows_read, rows_accepted, status FROM loads ORDER BY ALL").fetchall(),
            con.execute("SELECT * FROM rejected_rows ORDER BY ALL").fetchall(),
        )


@pytest.mark.slow
def test_sigkill_during_load_leaves_the_store_as_it_was(project):
    """A load killed at a random moment: the file is either wholly in the store or wholly absent."""
    cfg = load_config(project / "afterward.toml")
    load_files(cfg, [_write(project / "govt_2031-01.csv", JAN)])
    big = _big_file(project / "govt_big.csv", 40_000)
    rng = random.Random(20311)
    outcomes = []
    for trial in range(12):
        before = _snapshot(cfg)
        proc = subprocess.Popen(
            [sys.executable, "-m", "flows.cli", "load", str(big)], cwd=project,
            env={**os.environ, "PYTHONPATH": str(REPO)}, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        )
        # kill times creep later each trial, so some land before, some inside the transaction
        time.sleep(rng.uniform(0.1, 0.4) + 0.2 * trial)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        after = _snapshot(cfg)
        loaded = [r for r in after[1] if r[4] == "loaded" and r not in before[1]]
        if loaded:
            outcomes.append("complete")
            [(load_id, _sha, read, accepted, _st)] = loaded
            assert read == accepted == 200_000
            assert len(after[0]) == len(before[0]) + 200_000
            break          # the file is in: later loads would only say "already loaded"
        outcomes.append("absent")
        assert after == before, "a killed load left part of a file behind"
    # and a rerun completes the work
    [out] = load_files(cfg, [big])
    assert out.status in ("loaded", "already loaded")
    assert _q(cfg, "SELECT count(*) FROM quotes")[0][0] == 14 + 200_000
    assert "absent" in outcomes, f"no trial killed the load mid-way: {outcomes}"


def _month_files(folder: Path) -> list[Path]:
    """Twelve monthly govt files, a restatement of a January day placed after December (so it lands in a later
    chunk than the day it revises), and a file of an earlier year loaded last (days before everything read so far)."""
    import numpy as np

    folder.mkdir()
    files = []
    files.append(_write(folder / "govt_2031-01.csv", JAN))
    for m in range(2, 13):
        days = np.arange(f"2031-{m:02d}-01", f"2031-{m:02d}-06", dtype="datetime64[D]")
        lines = ["date,3M,1Y,2Y,5Y,10Y"] + [f"{d},{4 + m / 100:.2f},4.20,4.30,4.50,4.80" for d in days
                                            if np.is_busday(d)]
        files.append(_write(folder / f"govt_2031-{m:02d}.csv", "\n".join(lines) + "\n"))
    files.append(_write(folder / "govt_2031-01-restated.csv", RESTATE))
    files.append(_write(folder / "govt_2030-12.csv", "date,3M,1Y\n2030-12-30,3.90,4.00\n2030-12-31,3.91,4.01\n"))
    return files


@pytest.mark.parametrize("chunk", [1, 3, 100], ids=["chunk-1", "chunk-3", "one-chunk"])
def test_reading_ahead_in_a_second_process_records_the_same_archive(tmp_path, chunk):
    # the reference is the plain single-process load of the same files, one chunk at a time
    stores = {}
    for read_ahead in (False, True):
        root = tmp_path / f"ahead-{read_ahead}"
        root.mkdir()
        (root / "afterward.toml").write_text(SMALL_CONFIG, encoding="utf-8")
        cfg = load_config(root / "afterward.toml")
        files = _month_files(root / "in")
        outs = load_files(cfg, files, chunk=chunk, read_ahead=read_ahead)
        assert [o.status for o in outs] == ["loaded"] * len(files)
        assert outs[-2].rows_revised == 2 and outs[-2].rows_unchanged == 3      # RESTATE: 1Y and 5Y revised
        stores[read_ahead] = (
            [(o.rows_read, o.rows_new, o.rows_revised, o.rows_unchanged, o.rows_rejected) for o in outs],
            _q(cfg, "SELECT curve, as_of, tenor, maturity_date, rate, superseded_at IS NULL, "
                    "replace(source_file, 'ahead-True', 'ahead-False') FROM quote_history "
                    "ORDER BY ALL"),
            _q(cfg, "SELECT load_id, sha256, rows_read, rows_accepted, rows_revised, rows_rejected, status FROM loads "
                    "ORDER BY load_id"),
        )
    assert stores[True] == stores[False]


def test_a_schema_file_numbered_below_the_newest_applied_is_still_applied(project):
    # a store that reached a later version before a lower-numbered file existed (here: the audit state
    # tables of 006 dropped and their record removed) gets that file on its next connection
    from warehouse.connect import writer

    cfg = load_config(project / "afterward.toml")
    load_files(cfg, [_write(project / "govt_2031-01.csv", JAN)])
    with duckdb.connect(str(cfg.store_path)) as con:
        top = con.execute("SELECT max(version) FROM schema_migration").fetchone()[0]
        assert top >= 7
        con.execute("DELETE FROM schema_migration WHERE version = 6")
        for t in ("audit_state_curve", "audit_state_cell", "audit_state_tail"):
            con.execute(f"DROP TABLE {t}")
    with writer(cfg.store_path):
        pass
    assert _q(cfg, "SELECT count(*) FROM schema_migration WHERE version = 6")[0][0] == 1
    assert _q(cfg, "SELECT count(*) FROM information_schema.tables WHERE table_name = 'audit_state_cell'")[0][0] == 1
