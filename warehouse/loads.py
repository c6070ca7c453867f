"""Transactional loads: one file, one transaction, checksum lineage, versioned quotes.

A file whose checksum was already loaded changes nothing. Within a load, a quote for an existing
(curve, as_of, tenor) with a different rate supersedes the current version (stamped, kept); one with
the same rate is counted as unchanged and adds no version. Frames go in through Arrow.

:class:`Loader` is the one writer's view of the archive for the length of a command: it reads the
current quotes and the loaded checksums once, keeps them up to date as it records files, and so
classifies each file's rows without a join against the whole history. That is sound because only
one process can hold the store's write lock.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from datetime import UTC, datetime

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from warehouse.query import fetch_one

__all__ = ["FileBatch", "LoadOutcome", "Loader", "utc_now"]

# equal rates within this are the same quote re-sent, not a restatement (decimals)
RATE_EPS = 1e-12


def utc_now() -> datetime:
    """The store's clock: naive UTC with microseconds (TIMESTAMP columns hold UTC)."""
    return datetime.now(UTC).replace(tzinfo=None)


@dataclass
class FileBatch:
    """One file, read and validated, ready to record.

    ``rows``: curve, as_of (date), tenor, maturity_date (date), rate (decimal), line.
    ``rejected``: line, raw, reason, check_name. ``error`` set means the file was refused whole.
    """

    source_file: str
    file_name: str
    sha256: str
    size_bytes: int
    curve: str | None
    layout: str | None
    rows: pd.DataFrame
    rejected: pd.DataFrame
    error: str | None = None
    validations: list[dict] = field(default_factory=list)
    findings: pd.DataFrame | None = None     # curve, as_of, check_name, severity, tenor, detail


@dataclass
class LoadOutcome:
    source_file: str
    status: str                 # loaded | refused | already loaded | missing
    load_id: int | None = None
    rows_read: int = 0
    rows_accepted: int = 0
    rows_new: int = 0
    rows_revised: int = 0
    rows_unchanged: int = 0
    rows_rejected: int = 0
    detail: str | None = None
    curves: tuple[str, ...] = ()
    first_day: object = None
    last_day: object = None


def _date32(values: pd.Series | np.ndarray) -> pa.Array:
    return pa.array(np.asarray(values, dtype="datetime64[D]"), type=pa.date32())


def _str(values: pd.Series) -> pa.Array:
    return pa.array(values.tolist(), type=pa.string())


class Loader:
    """Records files through one writer connection (see the module docstring)."""

    def __init__(self, con: duckdb.DuckDBPyConnection) -> None:
        self.con = con
        # current rate by key (day number << 20 | tenor code), one dict per curve
        self._current: dict[str, dict[int, float]] = {}
        # the span of day numbers (inclusive) whose current quotes have been read, per curve: a daily file
        # reads its own days, not the whole history
        self._cover: dict[str, tuple[int, int]] = {}
        self._tenor_code: dict[str, int] = {}
        self._loaded: dict[str, int] | None = None
        self._last_id: int | None = None

    def _next_load_id(self) -> int:
        # the one writer numbers loads itself; an id of a rolled-back load is simply reused
        if self._last_id is None:
            self._last_id = int(fetch_one(self.con, "SELECT coalesce(max(load_id), 0) FROM load_log")[0])  # type: ignore[index]
        return self._last_id + 1

    def _loaded_shas(self) -> dict[str, int]:
        if self._loaded is None:
            self._loaded = {
                sha: int(lid) for sha, lid in self.con.execute(
                    "SELECT sha256, min(load_id) FROM load_log WHERE status = 'loaded' GROUP BY sha256"
                ).fetchall()
            }
        return self._loaded

    def _encode(self, days: np.ndarray, tenors: list[str]) -> list[int]:
        """Integer keys for (day number, tenor): cheap to hash, built without a per-row tuple."""
        codes = self._tenor_code
        tc = np.fromiter((codes.setdefault(t, len(codes)) for t in tenors), dtype=np.int64, count=len(tenors))
        return ((days.astype(np.int64) << 20) | tc).tolist()

    def _curve_state(self, curve: str, lo: int, hi: int) -> dict[int, float]:
        """Current rate by key for one curve, holding at least the days ``lo..hi`` (day numbers)."""
        state = self._current.setdefault(curve, {})
        cover = self._cover.get(curve)
        if cover is None:
            spans = [(lo, hi)]
        else:
            spans = [s for s in ((lo, cover[0] - 1), (cover[1] + 1, hi)) if s[0] <= s[1]]
        for a, b in spans:
            frame = self.con.sql(
                "SELECT date_diff('day', DATE '1970-01-01', as_of) AS day, tenor, rate FROM quote_version "
                "WHERE curve = ? AND superseded_at IS NULL "
                "AND as_of BETWEEN DATE '1970-01-01' + CAST(? AS INTEGER) AND DATE '1970-01-01' + CAST(? AS INTEGER)",
                params=[curve, a, b],
            ).to_arrow_table()
            if frame.num_rows:
                state.update(zip(self._encode(frame.column("day").to_numpy(), frame.column("tenor").to_pylist()),
                                 frame.column("rate").to_numpy().tolist(), strict=True))
        if spans:
            self._cover[curve] = (lo, hi) if cover is None else (min(lo, cover[0]), max(hi, cover[1]))
        return state

    def prefetch(self, batches: list[FileBatch]) -> None:
        """Read, in one query per curve, the current quotes every batch's rows may revise."""
        spans: dict[str, tuple[int, int]] = {}
        for b in batches:
            if not isinstance(b, FileBatch) or b.error is not None or not len(b.rows):
                continue
            names, days, _ = self._row_keys(b.rows, keys=False)
            for curve, idx in self._by_curve(names).items():
                part = days[idx]
                lo, hi = int(part.min()), int(part.max())
                old = spans.get(str(curve))
                spans[str(curve)] = (lo, hi) if old is None else (min(lo, old[0]), max(hi, old[1]))
        for curve, (lo, hi) in spans.items():
            self._curve_state(curve, lo, hi)

    @staticmethod
    def _by_curve(names: np.ndarray) -> dict[object, np.ndarray]:
        if (names == names[0]).all():  # the usual case: a file of one curve
            return {names[0]: slice(None)}  # type: ignore[dict-item]
        return pd.Series(names).groupby(names, sort=False).indices

    def _row_keys(self, rows: pd.DataFrame, keys: bool = True) -> tuple[np.ndarray, np.ndarray, list[int]]:
        names = rows["curve"].to_numpy(dtype=object)
        days = rows["as_of"].to_numpy(dtype="datetime64[D]").view(np.int64)
        return names, days, self._encode(days, rows["tenor"].tolist()) if keys else []

    def _classify(self, names: np.ndarray, days: np.ndarray, keys: list[int]) -> np.ndarray:
        """Each row's previous current rate (NaN where the key is new)."""
        old = np.full(len(keys), np.nan)
        nan = float("nan")
        for curve, idx in self._by_curve(names).items():
            part_days = days[idx]
            state = self._curve_state(str(curve), int(part_days.min()), int(part_days.max()))
            if state:
                part = keys if isinstance(idx, slice) else [keys[i] for i in idx]
                old[idx] = [state.get(k, nan) for k in part]
        return old

    def _remember(self, names: np.ndarray, keys: list[int], rates: np.ndarray, write: np.ndarray) -> None:
        for curve, idx in self._by_curve(names).items():
            sel = np.zeros(len(keys), dtype=bool)
            sel[idx] = True
            sel &= write
            state = self._current[str(curve)]  # read by _classify before the write
            state.update(zip((k for k, w in zip(keys, sel, strict=True) if w), rates[sel].tolist(), strict=True))

    def record(self, batch: FileBatch) -> LoadOutcome:
        """Record one file in a single transaction. Safe to rerun: a repeat is "already loaded"."""
        con = self.con
        loaded = self._loaded_shas()
        prior = loaded.get(batch.sha256)
        if prior is not None:
            return LoadOutcome(batch.source_file, "already loaded", prior, detail=f"same content as load {prior}")
        started = utc_now()
        status = "refused" if batch.error is not None else "loaded"
        rows = batch.rows
        n_rej = 0 if batch.error is not None else len(batch.rejected)
        if len(rows):
            names, days, keys = self._row_keys(rows)
            old = self._classify(names, days, keys)
            rates = rows["rate"].to_numpy(dtype=float)
            curves = tuple(sorted({str(c) for c in set(names.tolist())}))
        else:
            names, days, keys, old, rates, curves = np.array([], dtype=object), np.array([], dtype=np.int64), [], \
                np.array([]), np.array([]), ()
        is_new = np.isnan(old)
        changed = ~is_new & (np.abs(old - rates) > RATE_EPS)
        new, revised = int(is_new.sum()), int(changed.sum())
        unchanged = len(rows) - new - revised

        con.execute("BEGIN TRANSACTION")
        try:
            load_id = self._next_load_id()
            if batch.error is not None:
                con.execute("INSERT INTO rejected_row VALUES (?, ?, 0, NULL, ?, 'unreadable')",
                            [load_id, batch.source_file, batch.error])
            write = is_new | changed
            if revised:
                sup = rows.loc[changed]
                stamp = pa.table({"curve": _str(sup["curve"]), "as_of": _date32(sup["as_of"]),
                                  "tenor": _str(sup["tenor"])})
                con.register("_restated", stamp)
                con.execute(
                    "UPDATE quote_version AS q SET superseded_at = ? FROM _restated r "
                    "WHERE q.curve = r.curve AND q.as_of = r.as_of AND q.tenor = r.tenor AND q.superseded_at IS NULL",
                    [started],
                )
                con.unregister("_restated")
            if write.any():
                every = bool(write.all())
                w = rows if every else rows.loc[write]
                n = len(w)
                one_curve = curves and len(curves) == 1
                incoming = pa.table({
                    "curve": pa.repeat(pa.scalar(curves[0], type=pa.string()), n) if one_curve else _str(w["curve"]),
                    "as_of": pa.array(days if every else days[write], type=pa.int32()).cast(pa.date32()),
                    "tenor": _str(w["tenor"]),
                    "maturity_date": _date32(w["maturity_date"]), "rate": pa.array(rates if every else rates[write]),
                    "recorded_at": pa.repeat(pa.scalar(started, type=pa.timestamp("us")), n),
                    "superseded_at": pa.nulls(n, type=pa.timestamp("us")),
                    "load_id": pa.repeat(pa.scalar(load_id, type=pa.int64()), n),
                    "source_file": pa.repeat(pa.scalar(batch.source_file, type=pa.string()), n),
                    "line": pa.array(w["line"].to_numpy(dtype=np.int32)),
                }).sort_by([("curve", "ascending"), ("as_of", "ascending"), ("tenor", "ascending")])
                # DuckDB reads the local Arrow table by its name (a replacement scan, no catalog change)
                con.execute("INSERT INTO quote_version SELECT * FROM incoming")
                del incoming
            if n_rej:
                rj = batch.rejected
                con.register("_rejected", pa.table({
                    "line": pa.array(rj["line"].to_numpy(dtype=np.int32)), "raw": _str(rj["raw"]),
                    "reason": _str(rj["reason"]), "check_name": _str(rj["check_name"]),
                }))
                con.execute("INSERT INTO rejected_row SELECT ?, ?, line, raw, reason, check_name FROM _rejected",
                            [load_id, batch.source_file])
                con.unregister("_rejected")
            if batch.findings is not None and len(batch.findings):
                f = batch.findings
                raised = pa.table({  # noqa: F841 - read by DuckDB by its name
                    "curve": _str(f["curve"]), "as_of": _date32(f["as_of"]), "check_name": _str(f["check_name"]),
                    "severity": _str(f["severity"]), "tenor": _str(f["tenor"]), "detail": _str(f["detail"]),
                })
                con.execute("INSERT INTO finding SELECT curve, as_of, check_name, severity, tenor, detail, ?, ?, "
                            "NULL, NULL FROM raised", [started, load_id])
            # the log row goes in last, so its finished_at is the moment just before the commit
            con.execute(
                "INSERT INTO load_log VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [load_id, batch.source_file, batch.file_name, batch.sha256, batch.size_bytes,
                 ",".join(curves) or batch.curve, batch.layout, started, utc_now(), len(rows) + n_rej, len(rows),
                 revised, unchanged, n_rej, status, batch.error,
                 json.dumps(batch.validations, default=str) if batch.validations else None],
            )
            con.execute("COMMIT")
        except BaseException:
            try:
                con.execute("ROLLBACK")
            except duckdb.Error:
                pass
            # the in-memory state below changes only after a commit, so it stays true
            raise
        self._last_id = load_id
        if batch.error is not None:
            return LoadOutcome(batch.source_file, "refused", load_id, detail=batch.error)
        loaded[batch.sha256] = load_id
        if write.any():
            self._remember(names, keys, rates, write)
        span = rows["as_of"] if len(rows) else None
        return LoadOutcome(batch.source_file, "loaded", load_id, len(rows) + n_rej, len(rows), new, revised,
                           unchanged, n_rej, curves=curves,
                           first_day=None if span is None else span.min(),
                           last_day=None if span is None else span.max())
