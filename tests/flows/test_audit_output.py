"""The audit command's table and verdict lines carry the overlap-honest figures (flows/output.py)."""

from __future__ import annotations

import io

import pandas as pd
from rich.console import Console

from flows.output import print_audit
from pipeline.audit import summarize
from pipeline.audit.refresh import finish_summary
from tests.pipeline.test_audit import make_outcomes


def _printed(summary: pd.DataFrame) -> str:
    out = io.StringIO()
    print_audit({"govt": summary}, "table", Console(file=out, width=300, color_system=None))
    return out.getvalue()


def test_the_table_and_verdicts_show_independent_periods_and_fixed_b_p():
    # 1-year-ahead forecasts on a short record: 600 outcomes, h = 250, about 2 independent periods
    now = pd.Timestamp("2031-01-01")
    short = finish_summary(summarize(make_outcomes(600, 250, 40.0, seed=2, start=12)), None, now)
    # a long record of 3-month-ahead forecasts: 4,000 outcomes, h = 63, about 63 periods
    long = finish_summary(summarize(make_outcomes(4000, 63, 40.0, seed=2, start=3)), None, now)
    text = _printed(pd.concat([short, long], ignore_index=True))
    for head in ("indep.", "HAC p", "DM p"):
        assert head in text
    assert "2.4*" in text  # 600 / 250, flagged
    lines = [line for line in text.splitlines() if line.startswith("govt ")]
    assert len(lines) == 2
    short_line, long_line = lines  # in the order of the frames given
    assert "n = 600, about 2 independent periods" in short_line and "indicative only" in short_line
    assert "fixed-b p" in short_line and "DM fixed-b p" in short_line
    assert "n = 4,000, about 63 independent periods" in long_line and "indicative only" not in long_line
    assert "fixed-b p-values" in text
