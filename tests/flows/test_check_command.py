"""``afterward check`` as a user runs it: exit 1 while a reject is open, ``--from/--to``, and ``--accept``
with its reason; acceptances that survive a re-check; inversion episodes judged only on trusted days.

The scenario is invented: a calm normal curve (10Y above 3M) with, on one day, the 10Y quote typed a
factor of 10 too small (0.48 for 4.80), which is a jump far past ``jump_bp`` (a reject) and would put 10Y
below 3M for that day alone.
"""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd

from tests.conftest import run_cli

SLIP_DAY = "2031-01-15"


def _history(slip: bool = True) -> str:
    days = pd.bdate_range("2031-01-02", "2031-01-31")
    rows = ["date,3M,1Y,2Y,5Y,10Y"]
    for k, d in enumerate(days):
        wiggle = 0.01 * np.sin(k)       # a few bp a day: calm
        ten = 4.80 + wiggle
        if slip and str(d.date()) == SLIP_DAY:
            ten /= 10
        rows.append(f"{d.date()},{4.10 + wiggle:.4f},{4.20 + wiggle:.4f},{4.30 + wiggle:.4f},"
                    f"{4.50 + wiggle:.4f},{ten:.4f}")
    return "\n".join(rows) + "\n"


def _q(project, sql: str) -> list[tuple]:
    with duckdb.connect(str(project / "store.duckdb"), read_only=True) as con:
        return con.execute(sql).fetchall()


def _fix_day(project) -> None:
    fixed = [line for line in _history(slip=False).splitlines() if line.startswith(("date", SLIP_DAY))]
    (project / "govt_fix.csv").write_text("\n".join(fixed) + "\n")
    assert run_cli("load", "govt_fix.csv", cwd=project).returncode == 0


def test_check_exits_1_while_a_reject_is_open_and_windows_with_from_to(project):
    (project / "govt_2031-01.csv").write_text(_history())
    assert run_cli("load", "govt_2031-01.csv", cwd=project).returncode == 0
    proc = run_cli("check", cwd=project)
    assert proc.returncode == 1, proc.stdout + proc.stderr
    assert "govt: checked 22 day(s)" in proc.stdout
    assert "reject finding(s) open" in proc.stdout and "--reason TEXT" in proc.stdout
    rejects = _q(project, "SELECT as_of, check_name, tenor FROM open_findings WHERE severity = 'reject' ORDER BY ALL")
    # the slipped day, and the day after it (its move back up) are jumps on 10Y
    assert {str(d) for d, _, _ in rejects} >= {SLIP_DAY} and {c for _, c, _ in rejects} == {"jump"}
    # a window that leaves the rejects out shows none and exits 0; one that holds them exits 1
    quiet = run_cli("check", "--from", "2031-01-02", "--to", "2031-01-10", cwd=project)
    assert quiet.returncode == 0, quiet.stdout + quiet.stderr
    assert "reject finding(s) open" not in quiet.stdout
    loud = run_cli("check", "--from", "2031-01-14", "--to", "2031-01-16", cwd=project)
    assert loud.returncode == 1 and "reject finding(s) open" in loud.stdout


def test_a_held_day_neither_starts_nor_extends_an_inversion_episode(project):
    # issue 15: a 10x units slip on a calm day created a one-day inversion episode
    (project / "govt_2031-01.csv").write_text(_history())
    run_cli("load", "govt_2031-01.csv", cwd=project)
    run_cli("check", cwd=project)
    assert _q(project, "SELECT count(*) FROM findings WHERE check_name = 'inversion'") == [(1,)]  # a fact of the quotes
    assert _q(project, "SELECT * FROM inversion_episodes") == []
    # accepted, the day is trusted: its inversion is an episode
    acc = run_cli("check", "--accept", "govt", SLIP_DAY, "--reason", "confirmed with the desk", cwd=project)
    assert acc.returncode == 0, acc.stderr
    assert _q(project, "SELECT first_day, last_day, days FROM inversion_episodes") == [
        (pd.Timestamp(SLIP_DAY).date(), pd.Timestamp(SLIP_DAY).date(), 1)]


def test_accept_needs_a_reason_and_a_reject_to_accept(project):
    (project / "govt_2031-01.csv").write_text(_history())
    run_cli("load", "govt_2031-01.csv", cwd=project)
    run_cli("check", cwd=project)
    no_reason = run_cli("check", "--accept", "govt", SLIP_DAY, cwd=project)
    assert no_reason.returncode == 2 and "--accept needs --reason TEXT" in no_reason.stderr
    assert "Traceback" not in no_reason.stderr
    calm = run_cli("check", "--accept", "govt", "2031-01-06", "--reason", "fine", cwd=project)
    assert calm.returncode == 1
    assert calm.stderr.strip() == "afterward: govt 2031-01-06 has no open reject finding; nothing accepted"
    assert _q(project, "SELECT count(*) FROM acceptance") == [(0,)]


def test_an_acceptance_survives_a_recheck_and_lapses_when_the_day_is_restated(project):
    # issue 15: after a re-check the accepted finding was open again although the acceptance row was there
    (project / "govt_2031-01.csv").write_text(_history())
    run_cli("load", "govt_2031-01.csv", cwd=project)
    run_cli("check", cwd=project)
    open_before = _q(project, "SELECT count(*) FROM open_findings WHERE as_of = DATE '2031-01-15'")[0][0]
    assert open_before >= 1
    acc = run_cli("check", "--accept", "govt", SLIP_DAY, "--reason", "confirmed with the desk", cwd=project)
    assert acc.returncode == 0 and f"accepted govt {SLIP_DAY}" in acc.stdout
    assert _q(project, "SELECT reason FROM acceptance_in_force") == [("confirmed with the desk",)]
    recheck = run_cli("check", "--all", cwd=project)
    states = _q(project, f"SELECT DISTINCT state FROM findings WHERE as_of = DATE '{SLIP_DAY}'")
    assert states == [("accepted",)]
    assert _q(project, f"SELECT count(*) FROM open_findings WHERE as_of = DATE '{SLIP_DAY}'") == [(0,)]
    assert _q(project, f"SELECT count(*) FROM held_days WHERE as_of = DATE '{SLIP_DAY}'") == [(0,)]
    # one count everywhere: the open findings of `status` are those of `check` and of the view
    n_open = _q(project, "SELECT count(*) FROM findings WHERE state = 'open'")[0][0]
    assert n_open == _q(project, "SELECT count(*) FROM open_findings")[0][0]
    status = run_cli("status", cwd=project)
    by_sev = dict(_q(project, "SELECT severity, count(*) FROM open_findings GROUP BY ALL"))
    for sev, n in by_sev.items():
        assert f"{n} {sev}" in status.stdout, status.stdout
    assert recheck.returncode == (1 if by_sev.get("reject") else 0)
    # the day is restated with the right value: the acceptance lapses (its quotes changed)
    _fix_day(project)
    assert _q(project, "SELECT count(*) FROM acceptance_in_force") == [(0,)]
    assert _q(project, "SELECT count(*) FROM acceptance") == [(1,)]    # the record of it stays
    run_cli("check", cwd=project)
    assert _q(project, f"SELECT count(*) FROM findings WHERE as_of = DATE '{SLIP_DAY}' AND check_name = 'jump'") \
        == [(0,)]
