"""Printing and writing results for people and for scripts (rich tables, CSV, JSON, Parquet)."""

from __future__ import annotations

import csv
import io
import json
import math
import os
from datetime import date, datetime
from pathlib import Path
from typing import Any

import pyarrow as pa

__all__ = ["neutralise_cell", "print_model", "print_status", "write_result"]

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


def _part(out: Path) -> Path:
    return out.with_name(out.name + ".part")


def write_result(table: pa.Table, fmt: str, out: Path | None, console) -> None:  # noqa: ANN001
    """Write an Arrow table as ``table`` (rich), ``csv``, ``json`` (records) or ``parquet``.

    ``out`` is written beside itself and renamed into place, so a failed write leaves any earlier file as it
    was (whether it may be replaced is the caller's decision).
    """
    if fmt == "parquet":
        import pyarrow.parquet as pq

        assert out is not None
        pq.write_table(table, _part(out))
        os.replace(_part(out), out)
        console.print(f"wrote {table.num_rows} rows to {out}", markup=False)
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
        from rich.text import Text

        # cells and names as plain Text: a value like '[/b]' read as markup would raise MarkupError
        t = Table(show_lines=False)
        for name in table.column_names:
            t.add_column(Text(name))
        for r in rows[:1000]:
            t.add_row(*[Text("" if v is None else str(_plain(v))) for v in r.values()])
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
        _part(out).write_text(text, encoding="utf-8")
        os.replace(_part(out), out)
        console.print(f"wrote {table.num_rows} rows to {out}", markup=False)
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


def print_findings(cfg, console, curve: str | None = None, first: str | None = None,  # noqa: ANN001
                   last: str | None = None) -> int:
    """Print open findings grouped by check and curve; returns the number of open reject findings."""
    from rich.table import Table

    from warehouse.connect import reader
    from warehouse.findings import open_finding_groups

    with reader(cfg.store_path) as con:
        groups, rejects = open_finding_groups(con, curve, first, last)
    if not groups:
        console.print("no open findings")
        return 0
    t = Table(title="open findings")
    for col in ("check", "curve", "severity", "count", "first day", "last day", "first detail"):
        t.add_column(col)
    for check, cur, sev, n, lo, hi, detail in groups:
        t.add_row(check, cur, sev, f"{n:,}", str(lo), str(hi), str(detail)[:70])
    console.print(t)
    if rejects:
        console.print(f"{rejects} reject finding(s) open: those days are kept out of build until restated "
                      "or accepted (afterward check --accept CURVE DAY --reason TEXT)")
    return int(rejects)


def _label(months: int) -> str:
    return f"{months // 12}Y" if months % 12 == 0 and months else f"{months}M"


def print_audit(results: dict, fmt: str, console, start: int | None = None, tenor: int | None = None) -> None:  # noqa: ANN001
    """The audit by horizon: a rich table and verdict lines, or CSV / JSON for scripts."""
    import pandas as pd

    frames = [f for f in results.values() if len(f)]
    if not frames:
        console.print("no outcomes yet: run 'afterward build' and 'afterward realize' first")
        return
    allf = pd.concat(frames, ignore_index=True)
    if start is not None:
        allf = allf.loc[allf["start_months"] == start]
    if tenor is not None:
        allf = allf.loc[allf["tenor_months"] == tenor]
    if fmt in ("csv", "json"):
        table = pa.Table.from_pandas(allf.drop(columns=["computed_at"], errors="ignore"), preserve_index=False)
        write_result(table, fmt, None, console)
        return
    from rich.table import Table

    main = allf.loc[allf["regime"] == "all"]
    t = Table(title="forecast error by horizon (forward minus realised, bp)")
    for col in ("curve", "start", "tenor", "n", "indep.", "mean", "HAC t", "HAC p", "RMSE", "no-change RMSE",
                "ratio", "DM p", "MZ p", "FB beta", "hit rate"):
        t.add_column(col, justify="right" if col not in ("curve",) else "left")

    def num(v, fmt_: str = "{:.1f}") -> str:  # noqa: ANN001
        return "" if v is None or (isinstance(v, float) and not math.isfinite(v)) else fmt_.format(v)

    for _, r in main.iterrows():
        flag = r.get("indicative")
        indep = num(r.get("n_effective"), "{:,.1f}") + ("*" if flag is not None and not pd.isna(flag) and flag else "")
        t.add_row(r["curve"], _label(int(r["start_months"])), _label(int(r["tenor_months"])), f"{int(r['n']):,}",
                  indep, num(r["mean_error_bp"]), num(r["hac_t"], "{:.2f}"), num(r.get("hac_pvalue"), "{:.3f}"),
                  num(r["rmse_bp"]), num(r["rw_rmse_bp"]), num(r["rmse_ratio"], "{:.2f}"),
                  num(r.get("dm_pvalue_fixed_b"), "{:.3f}"), num(r["mz_pvalue"], "{:.3f}"),
                  num(r["fb_beta"], "{:.2f}"), num(r["hit_rate"], "{:.0%}"))
    console.print(t)
    for _, r in main.iterrows():
        console.print(f"{r['curve']} {_label(int(r['start_months']))} x {_label(int(r['tenor_months']))}: "
                      f"{r['verdict']}")
    console.print("Statistical findings for model validation, not investment advice. Overlapping forecasts are "
                  "accounted for with Newey-West standard errors and fixed-b p-values (HAC p, DM p); 'indep.' is "
                  "n over the overlap, the independent forecast periods, and * marks fewer than 10: indicative "
                  "only. The plain normal DM p is in --format csv / json and the audit_summary view.")


def compare_rows(summary, start: int | None = None, tenor: int | None = None):  # noqa: ANN001, ANN201
    """One row per (curve, start, tenor, contender): the scores with the confidence-set columns."""
    import pandas as pd

    frames = []
    for info in summary.curves.values():
        sc, mcs = info["scores"], info["confidence_set"]
        if not len(sc):
            continue
        key = ["curve", "start_months", "tenor_months", "contender"]
        frames.append(sc.merge(mcs, on=key, how="left") if len(mcs)
                      else sc.assign(mcs_p_value=float("nan"), included=pd.NA))
    if not frames:
        return None
    allf = pd.concat(frames, ignore_index=True)
    if start is not None:
        allf = allf.loc[allf["start_months"] == start]
    if tenor is not None:
        allf = allf.loc[allf["tenor_months"] == tenor]
    return allf.reset_index(drop=True)


def print_compare(summary, fmt: str, console, start: int | None = None, tenor: int | None = None) -> None:  # noqa: ANN001
    """The contenders by horizon: a rich table per curve and a verdict line per cell, or CSV / JSON
    (one row per curve, start, tenor and contender; the pairwise tests are in ``contender_tests``)."""
    rows = compare_rows(summary, start, tenor)
    if rows is None:
        console.print("no outcomes to compare yet: run 'afterward build' and 'afterward realize' first")
        return
    if fmt in ("csv", "json"):
        write_result(pa.Table.from_pandas(rows, preserve_index=False), fmt, None, console)
        return
    import pandas as pd
    from rich.table import Table

    def num(v, fmt_: str = "{:.1f}") -> str:  # noqa: ANN001
        return "" if v is None or v is pd.NA or (isinstance(v, float) and not math.isfinite(v)) else fmt_.format(v)

    for name, info in summary.curves.items():
        part = rows.loc[rows["curve"] == name]
        if part.empty:
            continue
        t = Table(title=f"{name}: contenders by horizon (forecast minus realised, bp; MCS at 10 %)")
        for col in ("start", "tenor", "contender", "n", "n eff", "mean", "HAC t", "p (fixed-b)", "RMSE", "ratio",
                    "MCS p", "in set"):
            t.add_column(col, justify="left" if col == "contender" else "right")
        for _, r in part.iterrows():
            inc = r["included"]
            t.add_row(_label(int(r["start_months"])), _label(int(r["tenor_months"])), str(r["contender"]),
                      f"{int(r['n']):,}", num(r["n_effective"]) + (" *" if bool(r["indicative"]) else ""),
                      num(r["mean_error_bp"]), num(r["hac_t"], "{:.2f}"), num(r["hac_p_value"], "{:.3f}"),
                      num(r["rmse_bp"]), num(r["rmse_ratio"], "{:.2f}"), num(r["mcs_p_value"], "{:.3f}"),
                      "" if inc is pd.NA or inc is None else ("yes" if bool(inc) else "no"))
        console.print(t)
        cells = set(zip(part["start_months"], part["tenor_months"], strict=True))
        for _, v in info["verdicts"].iterrows():
            if (v["start_months"], v["tenor_months"]) in cells:
                console.print(f"{name}: {v['verdict']}", markup=False)
        for contender, n in info["not_realised"].items():
            console.print(f"{name}: {contender}: {n:,} forecasts not realised yet (pending, or a tenor the store "
                          "does not hold)", markup=False)
    console.print("* fewer than 10 non-overlapping periods: indicative only. Statistical findings for model "
                  "validation, not investment advice; p-values use a fixed-b null that allows for overlapping "
                  "forecasts.")


def print_changes(rows, fmt: str, console, since) -> None:  # noqa: ANN001
    """The changes since a time (:func:`flows.changes_step.change_rows`): a table, or CSV / JSON."""
    if fmt in ("csv", "json"):
        write_result(pa.Table.from_pandas(rows, preserve_index=False), fmt, None, console)
        return
    from rich.table import Table

    if rows.empty:
        console.print(f"nothing changed in the record since {since:%Y-%m-%d %H:%M:%S} UTC")
        return
    t = Table(title=f"changes since {since:%Y-%m-%d %H:%M:%S} UTC")
    for col in ("kind", "curve", "as of", "item", "old", "new", "why"):
        t.add_column(col)
    for r in rows.itertuples(index=False):
        day = "" if r.as_of is None or (isinstance(r.as_of, float) and math.isnan(r.as_of)) else str(r.as_of)[:10]
        t.add_row(r.kind, r.curve, day, str(r.item), str(r.old), str(r.new), str(r.why))
    console.print(t)


def print_model(summary, console) -> None:  # noqa: ANN001
    """Per curve: the panel (month ends, skipped months), the fits, the latest real-time 2/5/10-year
    term premium in bp, and the regressions' verdict lines."""
    import numpy as np
    from rich.table import Table

    for name, reason in summary.refused.items():
        console.print(f"{name}: not modelled: {reason}", markup=False)
    for name, info in summary.curves.items():
        t = Table(title=f"{name}: term-structure lens (N = {info['max_months']} months, K = {info['factors']})")
        t.add_column("item")
        t.add_column("value")
        t.add_row("month ends in the panel", f"{info['months']:,}")
        skipped = info["skipped"]
        t.add_row("skipped months (no built day)",
                  f"{len(skipped)}: {', '.join(skipped)}" if skipped else "none")
        if info["open_month"]:
            t.add_row("left out (not yet closed)", info["open_month"])
        if info["full_sample_only"]:
            t.add_row("real-time fits", "not re-estimated (--full-sample-only)")
        elif info["realtime_skipped"]:
            t.add_row("real-time fits", info["realtime_skipped"])
        else:
            t.add_row("real-time fits", f"{info['realtime_fits']} month-end estimates, {len(info['passed'])} passed "
                                        f"over as unusable; {info['realtime_used']} in use")
        t.add_row("full-sample fit", info["full_problem"] or "usable")
        if info["latest_bp"]:
            through = np.datetime64(info["latest_through"], "D")
            head = ", ".join(f"{_label(m)} {bp:.1f}" for m, bp in info["latest_bp"].items())
            t.add_row(f"real-time term premium on {np.datetime64(info['latest_as_of'], 'D')} (bp)",
                      f"{head} (estimated through {through})")
        console.print(t)
        for line in info["passed"][-3:]:
            console.print(f"{name}: passed over {line}", markup=False)
        for line in info["verdicts"]:
            console.print(f"{name}: {line}", markup=False)
