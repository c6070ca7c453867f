"""The hardening suite prints what it tried at the end of the run: trials, faults survived, bad inputs,
rows lost, tracebacks and hangs (the last three must be 0)."""

from __future__ import annotations

from tests.hardening.harness import TALLY


def pytest_terminal_summary(terminalreporter, exitstatus, config) -> None:  # noqa: ANN001, ARG001
    t = TALLY
    if not (t.crash_trials or t.bad_inputs or t.reader_queries or t.property_examples):
        return
    tr = terminalreporter
    tr.section("afterward hardening summary")
    tr.write_line(
        f"trials run {t.crash_trials}, faults survived {t.faults_survived}, bad inputs tried {t.bad_inputs}, "
        f"rows checked {t.rows_checked:,}, rows lost {t.rows_lost}, tracebacks {t.tracebacks}, hangs {t.hangs}"
    )
    tr.write_line(f"concurrent read-only queries {t.reader_queries} ({t.reader_waits} gave up waiting with the "
                  f"locked message); reader property examples {t.property_examples}")
    for note in t.notes:
        tr.write_line(f"  {note}")
