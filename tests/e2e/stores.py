"""Helpers for end-to-end tests: projects (a folder, its afterward.toml and its store) on disk,
wide CSV files, and read-only queries on a store between the steps."""

from __future__ import annotations

import shutil
import textwrap
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from pipeline.config import Config, load_config
from pipeline.demo import DemoManifest
from warehouse.connect import reader
from warehouse.frames import read_frame
from warehouse.loads import LoadOutcome


@dataclass
class Project:
    """A folder with an afterward.toml and its store."""

    root: Path
    cfg: Config

    def sql(self, query: str, params: Sequence | None = None) -> pd.DataFrame:
        """A read-only query on the store (opened and closed here: the steps hold the writer)."""
        with reader(self.cfg.store_path) as con:
            return read_frame(con, query, list(params) if params else None)

    def value(self, query: str, params: Sequence | None = None):  # noqa: ANN201
        frame = self.sql(query, params)
        return frame.iloc[0, 0]


@dataclass
class DemoStore(Project):
    manifest: DemoManifest
    loads: list[LoadOutcome]


def make_project(root: Path, toml_text: str) -> Project:
    root.mkdir(parents=True, exist_ok=True)
    (root / "afterward.toml").write_text(textwrap.dedent(toml_text), encoding="utf-8")
    return Project(root, load_config(root / "afterward.toml"))


def clone_project(src: Project, root: Path, toml_text: str | None = None) -> Project:
    """A copy of ``src``'s store in ``root`` with the same config (or ``toml_text``), store path local."""
    root.mkdir(parents=True, exist_ok=True)
    store = src.cfg.store_path
    shutil.copy2(store, root / "store.duckdb")
    wal = store.with_name(store.name + ".wal")
    if wal.exists():
        shutil.copy2(wal, root / "store.duckdb.wal")
    text = toml_text if toml_text is not None else src.cfg.path.read_text(encoding="utf-8")  # type: ignore[union-attr]
    lines = text.splitlines()
    # point [store] path at the copy; everything else stays as it was
    start = lines.index("[store]")
    for i in range(start + 1, len(lines)):
        if lines[i].strip().startswith("path"):
            lines[i] = 'path = "store.duckdb"'
            break
    (root / "afterward.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return Project(root, load_config(root / "afterward.toml"))


def write_wide_csv(path: Path, days: Iterable, tenors: Sequence[str], rates: np.ndarray, fmt: str = "%.10g") -> Path:
    """A wide CSV (``date`` then one column per tenor); NaN cells are written empty."""
    lines = ["date," + ",".join(tenors)]
    for d, row in zip(days, np.asarray(rates, dtype=float), strict=True):
        cells = ["" if np.isnan(x) else (fmt % x) for x in row]
        lines.append(f"{np.datetime64(d, 'D')}," + ",".join(cells))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def run_all_steps(cfg: Config) -> None:
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)
    run_audit(cfg)




# --- a synthetic history of flat curves -----------------------------------------------------------

FLAT_TENORS = ["1M", "3M", "6M", "1Y", "2Y"]
FLAT_HOLIDAYS = ["2030-01-01", "2030-05-01", "2030-12-25", "2031-01-01", "2031-05-01"]
# a run of business days with no file: targets inside it are beyond the 3-day tolerance
FLAT_GAP = ("2030-09-09", "2030-09-18")
FLAT_TOML = f"""
[store]
path = "store.duckdb"

[curves.flat]
files = "flat_*.csv"
quote = "zero"
compounding = "annual"
day_count = "ACT/365F"
units = "decimal"
interpolation = "linear_zero"
tenors = [{", ".join(f'"{t}"' for t in FLAT_TENORS)}]
calendar.weekend = ["Sat", "Sun"]
calendar.holidays = [{", ".join(f'"{h}"' for h in FLAT_HOLIDAYS)}]
forward.starts = ["0M", "1M", "3M"]
forward.tenors = ["1M", "3M", "6M"]
realize.tolerance_days = 3
checks.jump_bp = 75
audit.premium_window_days = 40
"""


def flat_levels() -> pd.Series:
    """One level a business day (decimal, annual compounding), different every day; the gap days absent."""
    span = np.arange(np.datetime64("2030-01-02"), np.datetime64("2031-03-31") + 1)
    days = span[np.is_busday(span, holidays=FLAT_HOLIDAYS)]
    days = days[(days < np.datetime64(FLAT_GAP[0])) | (days > np.datetime64(FLAT_GAP[1]))]
    k = np.arange(days.size)
    level = np.round(0.02 + 0.00004 * k + 0.0015 * np.sin(k / 9.0), 10)
    return pd.Series(level, index=pd.DatetimeIndex(days, name="as_of"), name="level")


def write_flat_files(root: Path, levels: pd.Series) -> list[Path]:
    """Monthly wide files, every tenor at the day's level."""
    days = levels.index.to_numpy().astype("datetime64[D]")
    grid = np.repeat(levels.to_numpy()[:, None], len(FLAT_TENORS), axis=1)
    out = []
    months = days.astype("datetime64[M]")
    for m in np.unique(months):
        sel = months == m
        out.append(write_wide_csv(root / f"flat_{m}.csv", days[sel], FLAT_TENORS, grid[sel], "%.10f"))
    return out


def build_flat_project(root: Path) -> tuple[Project, pd.Series]:
    p = make_project(root, FLAT_TOML)
    levels = flat_levels()
    load_files(p.cfg, write_flat_files(root, levels))
    run_all_steps(p.cfg)
    return p, levels


KEY = ["as_of", "start_months", "tenor_months"]


def as_days(values) -> np.ndarray:  # noqa: ANN001
    """Dates from a store frame (python dates or timestamps) as ``datetime64[D]``."""
    return pd.to_datetime(pd.Series(values)).to_numpy().astype("datetime64[D]")


def expected_observation(forwards: pd.DataFrame, observed: np.ndarray, holidays: Sequence[str],
                         tolerance: int) -> pd.DataFrame:
    """The contract's realisation rule by hand (numpy business days, weekends Sat/Sun): the first
    observed day in ``[target, target + tolerance business days]``; ``kind`` is ``realised``, ``gap``
    (the window is over and held no observation) or ``awaiting`` (the window reaches past the last
    observed day)."""
    target = as_days(forwards["start_date"])
    deadline = np.busday_offset(target, tolerance, roll="forward", holidays=list(holidays))
    pos = np.searchsorted(observed, target)
    first = observed[np.minimum(pos, observed.size - 1)]
    found = (pos < observed.size) & (first <= deadline)
    out = forwards[KEY].copy()
    out["target_date"] = target
    out["observed_on"] = np.where(found, first, np.datetime64("NaT"))
    out["kind"] = np.where(found, "realised", np.where(deadline <= observed[-1], "gap", "awaiting"))
    return out
