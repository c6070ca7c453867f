"""Shared fixtures: real files on disk, a real DuckDB store, the real command line in a subprocess."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent

SMALL_CONFIG = textwrap.dedent(
    """
    [store]
    path = "store.duckdb"

    [curves.govt]
    files = "govt_*.csv"
    quote = "par"
    compounding = "semiannual"
    day_count = "ACT/365F"
    units = "percent"
    tenors = ["3M", "1Y", "2Y", "5Y", "10Y"]
    calendar.weekend = ["Sat", "Sun"]
    calendar.holidays = ["2031-12-25", "2032-01-01"]
    forward.starts = ["0M", "3M", "1Y"]
    forward.tenors = ["3M", "1Y"]
    checks.inversion_pairs = [["3M", "10Y"]]

    [curves.swap]
    files = "swap_*.parquet"
    quote = "zero"
    compounding = "annual"
    day_count = "ACT/360"
    units = "decimal"
    tenors = ["1M", "3M", "1Y", "5Y"]
    """
)


@pytest.fixture
def project(tmp_path: Path) -> Path:
    """A folder with a small two-curve afterward.toml (store not yet created)."""
    (tmp_path / "afterward.toml").write_text(SMALL_CONFIG, encoding="utf-8")
    return tmp_path


def run_cli(*args: str, cwd: Path, env: dict[str, str] | None = None, timeout: float = 120
            ) -> subprocess.CompletedProcess[str]:
    """The real command line, as a user runs it (a fresh interpreter, no shared state)."""
    full_env = {**os.environ, "AFTERWARD_LOCK_WAIT": "1", **(env or {})}
    full_env.pop("AFTERWARD_CONFIG", None)
    full_env.pop("AFTERWARD_DEBUG", None)
    return subprocess.run(
        [sys.executable, "-m", "flows.cli", *args], cwd=cwd, env={**full_env, "PYTHONPATH": str(REPO)},
        capture_output=True, text=True, timeout=timeout,
    )
