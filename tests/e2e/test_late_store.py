"""A feed that did not arrive is noticed by the daily job (``late_curve``), once, and closed on arrival."""

from __future__ import annotations

from datetime import datetime

import duckdb

from flows.check_step import note_late_curves, run_checks
from flows.load_step import load_files
from pipeline.config import load_config

JAN = "date,3M,1Y,2Y,5Y,10Y\n2031-01-02,4.10,4.20,4.30,4.50,4.80\n2031-01-03,4.11,4.21,4.31,4.51,4.81\n"
MONDAY = "date,3M,1Y,2Y,5Y,10Y\n2031-01-06,4.12,4.22,4.32,4.52,4.82\n"


def _late(cfg) -> list[tuple]:
    with duckdb.connect(str(cfg.store_path), read_only=True) as con:
        return con.execute("SELECT curve, CAST(as_of AS VARCHAR), severity, resolution FROM finding "
                           "WHERE check_name = 'late_curve' ORDER BY ALL").fetchall()


def test_late_curve_raised_once_and_closed_when_the_curve_arrives(project):
    toml = project / "afterward.toml"
    toml.write_text(toml.read_text() + '\n[schedule]\ntimezone = "Europe/Paris"\n')
    cfg = load_config(toml)
    (project / "govt_a.csv").write_text(JAN)
    load_files(cfg, [project / "govt_a.csv"])
    # Monday 6 Jan 2031 at 17:30 UTC is 18:30 in Paris: Monday's curve was due at 18:00 there
    monday_evening = datetime(2031, 1, 6, 17, 30)
    assert note_late_curves(cfg, monday_evening) == 1
    assert note_late_curves(cfg, monday_evening) == 0          # the same day is not noted twice
    # the swap curve has no history yet: not late, it has not started
    assert _late(cfg) == [("govt", "2031-01-06", "warn", None)]
    # at 16:30 UTC (17:30 in Paris) Monday's curve was not due yet, and Friday's is in
    assert note_late_curves(cfg, datetime(2031, 1, 6, 16, 30)) == 0
    (project / "govt_b.csv").write_text(MONDAY)
    load_files(cfg, [project / "govt_b.csv"])
    run_checks(cfg)
    assert _late(cfg) == [("govt", "2031-01-06", "warn", "arrived")]
