"""``afterward export``: the views as Parquet for larger engines, hive-partitioned by curve and year.

Layout under the target folder ``DIR``::

    DIR/forwards/curve=govt/year=2024/data_0.parquet
    DIR/audit_summary/curve=govt/data_0.parquet      (no date grain: by curve only)
    DIR/loads/data.parquet                           (no curve: one file)
    DIR/findings/empty.parquet                       (a view with no rows: its schema, no rows)
    DIR/_afterward_export.json                       (what was written, row counts, when)

``year`` is the calendar year of each view's date column (``as_of``; ``first_day`` for
``inversion_episodes``). The partition columns are also written inside the files
(``WRITE_PARTITION_COLUMNS``), so engines that ignore the folder names still see them.

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
from pathlib import Path

from pipeline.config import Config
from warehouse.connect import reader
from warehouse.loads import utc_now

__all__ = ["EXPORT_VIEWS", "MARKER", "export_views"]

MARKER = "_afterward_export.json"

# view -> (partition columns, the date column whose year is the ``year`` partition)
EXPORT_VIEWS: dict[str, tuple[tuple[str, ...], str | None]] = {
    "quotes": (("curve", "year"), "as_of"),
    "quote_history": (("curve", "year"), "as_of"),
    "findings": (("curve", "year"), "as_of"),
    "inversion_episodes": (("curve", "year"), "first_day"),
    "zero_rates": (("curve", "year"), "as_of"),
    "forwards": (("curve", "year"), "as_of"),
    "outcomes": (("curve", "year"), "as_of"),
    "term_premium": (("curve", "year"), "as_of"),
    "audit_summary": (("curve",), None),
    "loads": ((), None),
    "rejected_rows": ((), None),
}


def _sql_string(path: Path) -> str:
    return "'" + str(path).replace("'", "''") + "'"


def _check_target(target: Path) -> None:
    from flows.steps import UserError

    if target.exists() and not target.is_dir():
        raise UserError(f"export target {target} is a file, not a folder")
    if target.is_dir() and any(target.iterdir()) and not (target / MARKER).is_file():
        raise UserError(f"export target {target} is not empty and holds no earlier afterward export; "
                        "choose an empty or new folder")


def export_views(cfg: Config, to_dir: Path) -> list[Path]:
    """Write every view under ``to_dir`` (see the module docstring); returns each view's folder or file.

    Reads through a read-only connection. Rates are decimals, errors in bp, as in the views.
    """
    target = Path(to_dir).resolve()
    _check_target(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.export-", dir=target.parent))
    written: list[Path] = []
    counts: dict[str, int] = {}
    try:
        with reader(cfg.store_path) as con:
            for view, (parts, date_col) in EXPORT_VIEWS.items():
                select = f"SELECT *, year({date_col}) AS year FROM {view}" if date_col else f"SELECT * FROM {view}"
                counts[view] = int(con.execute(f"SELECT count(*) FROM {view}").fetchone()[0])
                if parts:
                    out = staging / view
                    out.mkdir()
                    if counts[view]:
                        con.execute(f"COPY ({select} ORDER BY ALL) TO {_sql_string(out)} (FORMAT parquet, "
                                    f"PARTITION_BY ({', '.join(parts)}), WRITE_PARTITION_COLUMNS true)")
                    else:  # no partition to write: one empty file keeps the schema readable
                        con.execute(f"COPY ({select} LIMIT 0) TO {_sql_string(out / 'empty.parquet')} "
                                    "(FORMAT parquet)")
                    written.append(target / view)
                else:
                    (staging / view).mkdir()
                    out = staging / view / "data.parquet"
                    con.execute(f"COPY ({select} ORDER BY ALL) TO {_sql_string(out)} (FORMAT parquet)")
                    written.append(target / view / "data.parquet")
        manifest = {"exported_at": utc_now().isoformat(timespec="seconds") + "Z", "store": str(cfg.store_path),
                    "views": {v: {"rows": counts[v], "partition_by": list(EXPORT_VIEWS[v][0])} for v in EXPORT_VIEWS}}
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
    return written
