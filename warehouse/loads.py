"""Transactional loads: one file, one transaction, checksum lineage, versioned quotes.

A file whose content was already loaded into the same curve changes nothing (lineage is per curve
and checksum; a load that accepted no row does not count, so a file refused or wholly rejected under a
wrong config can be loaded once the config is fixed, and ``reprocess`` loads the same bytes again).
Within a load, a quote for an existing (curve, as_of, tenor) with a different rate supersedes the
current version (stamped, kept); one with the same rate is counted as unchanged and adds no version.
Frames go in through Arrow.

:class:`Loader` is the one writer's view of the archive for the length of a command: it reads the
current quotes and the loaded checksums once, keeps them up to date as it records files, and so
classifies each file's rows without a join against the whole history. That is sound because only
one process can hold the store's write lock.
"""

from __future__ import annotations

import itertools
import json
from dataclasses import dataclass
from datetime import UTC, datetime

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from warehouse.query import fetch_one

__all__ = ["FileBatch", "LoadOutcome", "Loader", "file_batch", "utc_now"]

# equal rates within this are the same quote re-sent, not a restatement (decimals)
RATE_EPS = 1e-12


def utc_now() -> datetime:
    """The store's clock: naive UTC with microseconds (TIMESTAMP columns hold UTC)."""
    return datetime.now(UTC).replace(tzinfo=None)


def _date32(values: pd.Series | np.ndarray) -> pa.Array:
    return pa.array(np.asarray(values, dtype="datetime64[D]"), type=pa.date32())


def _str(values: pd.Series) -> pa.Array:
    return pa.array(values.tolist(), type=pa.string())


def _repeated_str(values: pd.Series) -> pa.Array:
    """Text in which most values repeat (rejection reasons, the raw line of each of a wide line's cells),
    dictionary-encoded: a flood of a million rejected rows holds each distinct text once."""
    codes, uniques = pd.factorize(values.to_numpy(dtype=object), use_na_sentinel=True)
    return pa.DictionaryArray.from_arrays(pa.array(codes, type=pa.int32(), mask=codes < 0),
                                          pa.array(np.asarray(uniques, dtype=object), type=pa.string()))


@dataclass
class FileBatch:
    """One file, read and validated, in the store's layout: ready to record.

    Built by :func:`file_batch` where the file was read (possibly another process), so the one
    writer only classifies keys and runs its statements.

    ``quotes``: Arrow table of curve, as_of (date32), tenor, maturity_date (date32), rate (decimal),
    source_file, line (int32), sorted by (curve, as_of, tenor). ``days`` (int64 days since
    1970-01-01) and ``tenors`` hold the same rows' keys; ``curve_spans`` the (curve, start, stop) row
    ranges of each curve. ``rejected``: line, raw, reason, check_name. ``findings``: curve, as_of,
    check_name, severity, tenor, detail. ``error`` set means the file was refused whole.
    """

    source_file: str
    file_name: str
    sha256: str
    size_bytes: int
    curve: str | None
    layout: str | None
    quotes: pa.Table
    days: np.ndarray
    tenors: list[str]
    curve_spans: tuple[tuple[str, int, int], ...] = ()
    rejected: pa.Table | None = None
    findings: pa.Table | None = None
    error: str | None = None
    validation_json: str | None = None
    first_day: object = None
    last_day: object = None

    @property
    def rows_rejected(self) -> int:
        return 0 if self.rejected is None else self.rejected.num_rows


_QUOTE_SCHEMA = pa.schema([("curve", pa.string()), ("as_of", pa.date32()), ("tenor", pa.string()),
                           ("maturity_date", pa.date32()), ("rate", pa.float64()), ("source_file", pa.string()),
                           ("line", pa.int32())])


def file_batch(*, source_file: str, file_name: str, sha256: str, size_bytes: int, curve: str | None,
               layout: str | None, rows: pd.DataFrame | None = None, rejected: pd.DataFrame | None = None,
               findings: pd.DataFrame | None = None, validations: list[dict] | None = None,
               error: str | None = None) -> FileBatch:
    """A :class:`FileBatch` from the frames of intake (no store access).

    ``rows``: curve, as_of, tenor, maturity_date, rate (decimal), line; ``rejected``: line, raw,
    reason, check_name; ``findings`` as :class:`FileBatch`. A refused file (``error``) keeps no rows.
    """
    lineage = dict(source_file=source_file, file_name=file_name, sha256=sha256, size_bytes=size_bytes,
                   curve=curve, layout=layout)
    if error is not None or rows is None or not len(rows):
        quotes, days, tenors, spans, first, last = _QUOTE_SCHEMA.empty_table(), np.zeros(0, np.int64), [], (), \
            None, None
    else:
        day = rows["as_of"].to_numpy(dtype="datetime64[D]")
        quotes = pa.table({
            "curve": _str(rows["curve"]), "as_of": pa.array(day, type=pa.date32()), "tenor": _str(rows["tenor"]),
            "maturity_date": _date32(rows["maturity_date"]), "rate": pa.array(rows["rate"].to_numpy(dtype=float)),
            "source_file": pa.repeat(pa.scalar(source_file, type=pa.string()), len(rows)),
            "line": pa.array(rows["line"].to_numpy(dtype=np.int32)),
        }, schema=_QUOTE_SCHEMA).sort_by([("curve", "ascending"), ("as_of", "ascending"), ("tenor", "ascending")])
        days = quotes.column("as_of").cast(pa.int32()).to_numpy().astype(np.int64)
        tenors = quotes.column("tenor").to_pylist()
        names = np.asarray(quotes.column("curve").to_pylist(), dtype=object)
        cuts = [0, *(np.flatnonzero(names[1:] != names[:-1]) + 1).tolist(), len(names)]
        spans = tuple((str(names[a]), a, z) for a, z in itertools.pairwise(cuts))
        first, last = rows["as_of"].min(), rows["as_of"].max()
    rj = None
    if error is None and rejected is not None and len(rejected):
        rj = pa.table({"line": pa.array(rejected["line"].to_numpy(dtype=np.int32)),
                       "raw": _repeated_str(rejected["raw"]), "reason": _repeated_str(rejected["reason"]),
                       "check_name": _repeated_str(rejected["check_name"])})
    raised = None
    if error is None and findings is not None and len(findings):
        raised = pa.table({
            "curve": _str(findings["curve"]), "as_of": _date32(findings["as_of"]),
            "check_name": _str(findings["check_name"]), "severity": _str(findings["severity"]),
            "tenor": _str(findings["tenor"]), "detail": _str(findings["detail"]),
        })
    return FileBatch(**lineage, quotes=quotes, days=days, tenors=tenors, curve_spans=spans, rejected=rj,
                     findings=raised, error=error,
                     validation_json=json.dumps(validations, default=str) if validations else None,
                     first_day=first, last_day=last)


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


class Loader:
    """Records files through one writer connection (see the module docstring)."""

    def __init__(self, con: duckdb.DuckDBPyConnection, known_since: datetime | None = None) -> None:
        self.con = con
        self.known_since = known_since  # when the files' data was first available (None: the load time)
        # current rate by key (day number << 20 | tenor code), one dict per curve
        self._current: dict[str, dict[int, float]] = {}
        # the span of day numbers (inclusive) whose current quotes have been read, per curve: a daily file
        # reads its own days, not the whole history
        self._cover: dict[str, tuple[int, int]] = {}
        self._tenor_code: dict[str, int] = {}
        self._loaded: dict[tuple[str, str], int] | None = None
        self._last_id: int | None = None

    def _next_load_id(self) -> int:
        # the one writer numbers loads itself; an id of a rolled-back load is simply reused
        if self._last_id is None:
            self._last_id = int(fetch_one(self.con, "SELECT coalesce(max(load_id), 0) FROM load_log")[0])  # type: ignore[index]
        return self._last_id + 1

    def _loaded_shas(self) -> dict[tuple[str, str], int]:
        """The first load of each (curve, checksum) that accepted rows: what makes a repeat "already loaded"."""
        if self._loaded is None:
            self._loaded = {
                (curve or "", sha): int(lid) for curve, sha, lid in self.con.execute(
                    "SELECT curve, sha256, min(load_id) FROM load_log WHERE status = 'loaded' AND rows_accepted > 0 "
                    "GROUP BY curve, sha256"
                ).fetchall()
            }
        return self._loaded

    def _earlier_load(self, sha256: str) -> int | None:
        """The latest earlier load of the same bytes into any curve (for a reprocess note)."""
        row = fetch_one(self.con, "SELECT max(load_id) FROM load_log WHERE sha256 = ?", [sha256])
        return None if row is None or row[0] is None else int(row[0])

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
            for curve, a, z in b.curve_spans:
                part = b.days[a:z]
                lo, hi = int(part.min()), int(part.max())
                old = spans.get(curve)
                spans[curve] = (lo, hi) if old is None else (min(lo, old[0]), max(hi, old[1]))
        for curve, (lo, hi) in spans.items():
            self._curve_state(curve, lo, hi)

    def _classify(self, batch: FileBatch, keys: list[int]) -> np.ndarray:
        """Each row's previous current rate (NaN where the key is new)."""
        old = np.full(len(keys), np.nan)
        nan = float("nan")
        for curve, a, z in batch.curve_spans:
            # rows are sorted by (curve, as_of): a span's first and last rows hold its day range
            state = self._curve_state(curve, int(batch.days[a]), int(batch.days[z - 1]))
            if state:
                get = state.get
                old[a:z] = [get(k, nan) for k in keys[a:z]]
        return old

    def record(self, batch: FileBatch, reprocess: bool = False) -> LoadOutcome:
        """Record one file in a single transaction. Safe to rerun: a repeat into the same curve is
        "already loaded", unless ``reprocess`` (the same bytes read again as a new load that says why)."""
        con = self.con
        loaded = self._loaded_shas()
        curves = tuple(sorted({c for c, _, _ in batch.curve_spans}))
        lineage = ",".join(curves) or batch.curve or ""
        prior = loaded.get((lineage, batch.sha256))
        note = batch.error
        if prior is not None and not reprocess:
            return LoadOutcome(batch.source_file, "already loaded", prior, detail=f"same content as load {prior}")
        if reprocess and batch.error is None:
            earlier = self._earlier_load(batch.sha256) if prior is None else prior
            note = (f"reprocessed: the same content as load {earlier}, read again on request"
                    if earlier is not None else None)
        started = utc_now()
        status = "refused" if batch.error is not None else "loaded"
        quotes = batch.quotes
        n_rows, n_rej = quotes.num_rows, batch.rows_rejected
        keys = self._encode(batch.days, batch.tenors) if n_rows else []
        old = self._classify(batch, keys) if n_rows else np.zeros(0)
        rates = quotes.column("rate").to_numpy()
        is_new = np.isnan(old)
        changed = ~is_new & (np.abs(old - rates) > RATE_EPS)
        write = is_new | changed
        new, revised = int(is_new.sum()), int(changed.sum())
        every = new + revised == n_rows

        con.execute("BEGIN TRANSACTION")
        try:
            load_id = self._next_load_id()
            if batch.error is not None:
                con.execute("INSERT INTO rejected_row VALUES (?, ?, 0, NULL, ?, 'unreadable')",
                            [load_id, batch.source_file, batch.error])
            # DuckDB reads each local Arrow table below by its name (a replacement scan, no catalog change)
            if revised:
                restated = quotes.filter(pa.array(changed)).select(["curve", "as_of", "tenor"])  # noqa: F841
                con.execute(
                    "UPDATE quote_version AS q SET superseded_at = ? FROM restated r "
                    "WHERE q.curve = r.curve AND q.as_of = r.as_of AND q.tenor = r.tenor AND q.superseded_at IS NULL",
                    [started],
                )
            if new or revised:
                incoming = quotes if every else quotes.filter(pa.array(write))  # noqa: F841
                con.execute("INSERT INTO quote_version SELECT curve, as_of, tenor, maturity_date, rate, ?, NULL, ?, "
                            "source_file, line FROM incoming", [started, load_id])
            if n_rej:
                rejected = batch.rejected  # noqa: F841
                con.execute("INSERT INTO rejected_row SELECT ?, ?, line, raw, reason, check_name FROM rejected",
                            [load_id, batch.source_file])
            if batch.findings is not None:
                raised = batch.findings  # noqa: F841
                con.execute("INSERT INTO finding SELECT curve, as_of, check_name, severity, tenor, detail, ?, ?, "
                            "NULL, NULL FROM raised", [started, load_id])
            # the log row goes in last, so its finished_at is the moment just before the commit
            con.execute(
                "INSERT INTO load_log VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [load_id, batch.source_file, batch.file_name, batch.sha256, batch.size_bytes,
                 lineage or None, batch.layout, started, utc_now(), n_rows + n_rej, n_rows,
                 revised, n_rows - new - revised, n_rej, status, note, batch.validation_json, self.known_since],
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
        if n_rows and (lineage, batch.sha256) not in loaded:
            loaded[(lineage, batch.sha256)] = load_id
        if new or revised:
            values, wrote = rates.tolist(), write.tolist()
            for curve, a, z in batch.curve_spans:
                state = self._current[curve]  # read by _classify before the write
                state.update((k, v) for k, v, w in zip(keys[a:z], values[a:z], wrote[a:z], strict=True) if w)
        return LoadOutcome(batch.source_file, "loaded", load_id, n_rows + n_rej, n_rows, new, revised,
                           n_rows - new - revised, n_rej, detail=note, curves=curves, first_day=batch.first_day,
                           last_day=batch.last_day)
