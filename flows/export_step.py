"""``afterward export``: every stable view as Parquet, in the layout that common readers open.

Layout under the target folder ``DIR``::

    DIR/forwards/curve=govt/year=2024/data_0.parquet   (a view with a curve and a date)
    DIR/findings/empty.parquet                          (such a view with no rows: its schema, no rows)
    DIR/audit_summary/data.parquet                      (a view without an as-of date: one file)
    DIR/_afterward_export.json                          (what was written, row counts, when)

``year`` is the calendar year of the view's date column named in :data:`EXPORT_VIEWS`. The
partition columns ``curve`` and ``year`` live only in the folder names, never inside the files
(the hive convention): pyarrow's datasets, and so ``pandas.read_parquet(DIR/view)``, infer them
from the paths and refuse a file that holds them again with other types. Read back with hive
partitioning on, a partitioned view has its own columns plus ``year``.

A re-export replaces the whole previous export at once: DuckDB's ``COPY ... PARTITION_BY`` either
refuses a non-empty folder or, with its overwrite options, wipes or duplicates partitions. So the
export is written into a fresh folder beside the target and swapped in only when complete; a
failure leaves the previous export as it was. A non-empty target that is not an earlier export is
refused, never deleted.
"""

from __future__ import annotations

import json
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from pipeline.config import Config
from pipeline.errors import UserError
from warehouse import export as files
from warehouse.connect import reader
from warehouse.loads import utc_now

__all__ = ["EXPORT_VIEWS", "MARKER", "ExportSummary", "export_views"]

MARKER = "_afterward_export.json"

# view -> the date column whose calendar year is the ``year`` partition (None: one file, no partitions)
EXPORT_VIEWS: dict[str, str | None] = {
    "quotes": "as_of",
    "quote_history": "as_of",
    "loads": None,
    "rejected_rows": None,
    "findings": "as_of",
    "inversion_episodes": "first_day",
    "zero_rates": "as_of",
    "forwards": "as_of",
    "outcomes": "as_of",
    "audit_summary": None,
    "term_premium": "as_of",
    "term_panel": "as_of",
    "excess_returns": "as_of",
    "eh_regressions": None,
    "model_term_premium": "as_of",
    "contender_outcomes": "as_of",
    "contender_scores": None,
    "contender_tests": None,
    "confidence_set": None,
}


@dataclass
class ExportSummary:
    """What one export wrote: ``rows`` per view, each view's folder or file, and whether it replaced an
    earlier export in the same folder."""

    target: Path
    rows: dict[str, int] = field(default_factory=dict)
    paths: dict[str, Path] = field(default_factory=dict)
    replaced: bool = False


def _check_target(target: Path) -> None:
    if target.exists() and not target.is_dir():
        raise UserError(f"export target {target} is a file, not a folder")
    if target.is_dir() and any(target.iterdir()) and not (target / MARKER).is_file():
        raise UserError(f"export target {target} is not empty and holds no earlier afterward export; "
                        "choose an empty or new folder")


def export_views(cfg: Config, to_dir: Path) -> ExportSummary:
    """Write every view of :data:`EXPORT_VIEWS` under ``to_dir`` (see the module docstring).

    Reads through a read-only connection. Values are as in the views: rates decimals, errors in bp,
    dates as Parquet DATE, timestamps (``recorded_at``, ``started_at``, ...) naive UTC.
    """
    target = Path(to_dir).resolve()
    _check_target(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    summary = ExportSummary(target, replaced=(target / MARKER).is_file())
    staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.export-", dir=target.parent))
    try:
        with reader(cfg.store_path) as con:
            for view, date_col in EXPORT_VIEWS.items():
                summary.rows[view] = n = files.count_rows(con, view)
                out = staging / view
                out.mkdir()
                if date_col is None:
                    files.copy_whole(con, view, out / "data.parquet")
                    summary.paths[view] = target / view / "data.parquet"
                else:
                    files.copy_partitioned(con, view, date_col, out, n)
                    summary.paths[view] = target / view
        manifest = {"exported_at": utc_now().isoformat(timespec="seconds") + "Z", "store": str(cfg.store_path),
                    "views": {v: {"rows": summary.rows[v], "partition_by": ["curve", "year"] if d else [],
                                  "year_of": d} for v, d in EXPORT_VIEWS.items()}}
        (staging / MARKER).write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
        # swap: the old export moves aside, the new one takes its name, then the old one goes
        old = None
        if target.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{target.name}.old-", dir=target.parent))
            old.rmdir()
            target.rename(old)
        staging.rename(target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return summary
