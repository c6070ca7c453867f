"""Printing and writing results for people and for scripts (rich tables, CSV, JSON, Parquet)."""

from __future__ import annotations

import csv
import io
import json
import math
from datetime import date, datetime
from pathlib import Path
from typing import Any

import pyarrow as pa

__all__ = ["neutralise_cell", "print_status", "write_result"]

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def neutralise_cell(value: Any) -> Any:
    """Text that a spreadsheet would run as a formula gets a leading apostrophe; numbers pass."""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def _plain(value: Any) -> Any:
    if isinstance(value, datetime):
        return value.isoformat(sep=" ")
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def write_result(table: pa.Table, fmt: str, out: Path | None, console) -> None:  # noqa: ANN001
    """Write an Arrow table as ``table`` (rich), ``csv``, ``json`` (records) or ``parquet``."""
    if fmt == "parquet":
        import pyarrow.parquet as pq

        assert out is not None
        pq.write_table(table, out)
        console.print(f"wrote {table.num_rows} rows to {out}")
        return
    rows = table.to_pylist()
    if fmt == "json":
        text = json.dumps([{k: _plain(v) for k, v in r.items()} for r in rows], indent=1)
    elif fmt == "csv":
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(table.column_names)
        for r in rows:
            w.writerow([neutralise_cell(_plain(v)) if v is not None else "" for v in r.values()])
        text = buf.getvalue()
    else:
        from rich.table import Table

        t = Table(show_lines=False)
        for name in table.column_names:
            t.add_column(name)
        for r in rows[:1000]:
            t.add_row(*["" if v is None else str(_plain(v)) for v in r.values()])
        if out is None:
            console.print(t)
            if len(rows) > 1000:
                console.print(f"({len(rows) - 1000} more rows; use --format csv --out FILE for all)")
            return
        from rich.console import Console

        buf = io.StringIO()
        Console(file=buf, width=200).print(t)
        text = buf.getvalue()
    if out is not None:
        out.write_text(text, encoding="utf-8")
        console.print(f"wrote {table.num_rows} rows to {out}")
    else:
        print(text, end="" if text.endswith("\n") else "\n")


def print_status(info: dict[str, Any], cfg, console) -> None:  # noqa: ANN001
    from rich.table import Table

    console.print(f"store {cfg.store_path} (schema version {info['schema_version']})")
    t = Table(title="curves")
    for col in ("curve", "first day", "last day", "days", "quotes"):
        t.add_column(col)
    for c in info["curves"]:
        t.add_row(c["curve"], str(c["first_day"]), str(c["last_day"]), f"{c['days']:,}", f"{c['quotes']:,}")
    console.print(t)
    last = info["last_load"]
    console.print(f"loads: {info['loads']:,} ({info['refused_files']} refused files, "
                  f"{info['rejected_rows']:,} rejected rows)")
    if last:
        console.print(f"last load: #{last['load_id']} {Path(last['source_file']).name} at "
                      f"{str(last['finished_at'])[:19]} UTC ({last['status']})")
    if info["open_findings"] is not None:
        parts = ", ".join(f"{f['count']} {f['severity']}" for f in info["open_findings"]) or "none"
        console.print(f"open findings: {parts}")
    if info["pending_forwards"] is not None:
        console.print(f"pending forwards (target date not yet observed): {info['pending_forwards']:,}")
