"""The audit step: forecast-error statistics and the term-premium record from the current outcomes.

Two ways to the same rows of ``audit_summary`` and ``term_premium``:

* :func:`run_audit` recomputes a curve's whole record (:func:`pipeline.audit.summarize` and
  :func:`pipeline.audit.term_premium`, the reference), optionally over an as-of window, and records
  the window and the data version (the latest ``realized_at`` used) beside the figures. An
  unwindowed run also stores the curve's running state (``audit_state_*``, see
  :mod:`pipeline.audit_state`); a windowed run drops it, since the stored rows no longer describe the
  whole record.
* :func:`refresh_audit_incremental` is the daily path: it folds only the outcomes realised since
  the state was stored into it, appends the term-premium rows of the windows that end at them, and
  rewrites the curve's summary rows from the state. A cell (start x tenor) is recomputed from its
  record when an assumption fails (a new outcome not after the cell's last as-of date, a
  Newey-West lag outside the cell's stored lag band, an exhausted median band); the whole curve is,
  when outcomes were superseded since (a restatement), when the counts do not add up, or when the
  state is missing, was stored in an older layout (without the lag band, sql/008) or was built for
  another premium window or inversion pair.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline.audit import SUMMARY_COLUMNS, Z95, summarize, term_premium, verdict
from pipeline.audit_state import TAIL_COLUMNS, CellState, append_cell, build_cell, cell_summary, premium_increment
from pipeline.config import Config, CurveConfig
from warehouse.connect import writer
from warehouse.frames import read_frame
from warehouse.loads import utc_now
from warehouse.query import fetch_one

__all__ = ["STATE_FORMAT", "AuditRefresh", "CurveRecord", "WholeAudit", "audit_record", "join_audits",
           "read_outcomes", "read_record", "refresh_audit_incremental", "run_audit", "split_record",
           "store_whole_audit", "whole_record_due"]

STATE_FORMAT = 2  # bump when CellState's layout or meaning changes: stored states are then rebuilt
_REGIMES = ("all", "inverted", "normal")
_KEY = ["start_months", "tenor_months"]
_PREMIUM = ["curve", "as_of", "start_months", "tenor_months", "window_days", "premium_bp", "lower_bp", "upper_bp"]
_INT_FIELDS = {"n", "horizon", "lags", "premium_lags", "n_moved", "n_hit", "band_below", "band_above"}
_LIST_TYPES = {"sums": pa.float64(), "cross_moments": pa.float64(), "hist": pa.int64(), "band": pa.float64(),
               "lag_band": pa.int64(), "lag_cross": pa.float64()}


@dataclass
class AuditRefresh:
    """What :func:`refresh_audit_incremental` did for one curve.

    ``mode`` is ``incremental``, ``full`` (the whole curve recomputed, ``reason`` says why) or
    ``unchanged`` (no new outcomes). ``recomputed`` lists the (start, tenor) cells recomputed from
    their record during an incremental refresh; ``new_outcomes`` counts the outcomes folded in.
    """

    curve: str
    mode: str
    summary: pd.DataFrame
    reason: str = ""
    new_outcomes: int = 0
    recomputed: list[tuple[int, int]] = field(default_factory=list)


def _inversion_label(c: CurveConfig) -> str:
    if not c.inversion_pairs:
        return ""
    short, long = c.inversion_pairs[0]
    return f"{short.label}/{long.label}"


def read_outcomes(con, cfg: Config, curve: str, where: str = "", params: list | None = None,  # noqa: ANN001
                  quotes_between: tuple | None = None) -> pd.DataFrame:
    """The current outcomes of ``curve``, with ``inverted``: the first inversion pair's long quote below
    its short quote on the as-of date (NULL when the curve has no pair or a quote is missing).

    ``where`` (SQL starting with ``AND``, on the outcome alias ``o``) and ``params`` narrow the rows;
    ``quotes_between`` (first, last as-of date), when the rows' as-of dates are known to lie within
    it, narrows the quotes joined (a few new rows then do not scan a curve's whole quote record).
    """
    c = cfg.curve(curve)
    if c.inversion_pairs:
        short, long = c.inversion_pairs[0]
        inverted = "ql.rate < qs.rate"
        span = (f" AND as_of BETWEEN DATE '{np.datetime64(quotes_between[0], 'D')}' "
                f"AND DATE '{np.datetime64(quotes_between[1], 'D')}'") if quotes_between else ""
        joins = " ".join(
            f"LEFT JOIN (SELECT as_of, rate FROM quotes WHERE curve = ? AND tenor = '{t.label}'{span}) {alias} "
            f"ON {alias}.as_of = o.as_of" for alias, t in (("qs", short), ("ql", long)))
        bound = [curve, curve, curve]  # the two joins, then the outcomes
    else:
        inverted, joins = "CAST(NULL AS BOOLEAN)", ""
        bound = [curve]
    frame = read_frame(
        con,
        f"""SELECT o.curve, o.as_of, o.start_months, o.tenor_months, o.target_date, o.observed_on, o.forward_rate,
                   o.realized_rate, o.spot_rate, o.error_bp, o.rw_error_bp, {inverted} AS inverted, o.realized_at
            FROM outcome o {joins}
            WHERE o.curve = ? AND o.superseded_at IS NULL {where}
            ORDER BY o.start_months, o.tenor_months, o.as_of""",
        [*bound, *(params or [])], date_as_object=False,
    )
    for col in ("as_of", "target_date", "observed_on"):
        frame[col] = frame[col].to_numpy().astype("datetime64[D]")
    frame["inverted"] = frame["inverted"].astype("boolean")
    return frame


def _cells_sql(cells: list[tuple[int, int]]) -> str:
    return "AND (" + " OR ".join(f"(o.start_months = {int(s)} AND o.tenor_months = {int(m)})" for s, m in cells) + ")"


def _regime_masks(frame: pd.DataFrame) -> dict[str, np.ndarray]:
    inv = frame["inverted"].astype("boolean")
    return {"all": np.ones(len(frame), dtype=bool), "inverted": inv.fillna(False).to_numpy(dtype=bool),
            "normal": (~inv).fillna(False).to_numpy(dtype=bool)}


def _rows(frame: pd.DataFrame, mask: np.ndarray | None = None) -> dict[str, np.ndarray]:
    return {c: (frame[c].to_numpy() if mask is None else frame[c].to_numpy()[mask]) for c in TAIL_COLUMNS}


def _build_states(frame: pd.DataFrame, window: int) -> dict[tuple, tuple[CellState, dict]]:
    """State and tail of every (start, tenor, regime) cell of ``frame`` (sorted by start, tenor, as_of)."""
    out: dict[tuple, tuple[CellState, dict]] = {}
    for (s, m), grp in frame.groupby(_KEY, sort=True):
        for regime, mask in _regime_masks(grp).items():
            if mask.any():
                out[(int(s), int(m), regime)] = build_cell(_rows(grp, mask), window=window if regime == "all" else None)
    return out


def _premium_frame(curve: str, pieces: list[tuple[int, int, dict]], window: int) -> pd.DataFrame:
    pieces = [p for p in pieces if p[2]["as_of"].size]
    if not pieces:
        return pd.DataFrame({c: [] for c in _PREMIUM})
    size = [p[2]["as_of"].size for p in pieces]
    mean = np.concatenate([p[2]["premium_bp"] for p in pieces])
    se = np.concatenate([p[2]["se_bp"] for p in pieces])
    return pd.DataFrame({
        "curve": curve,
        "as_of": np.concatenate([p[2]["as_of"] for p in pieces]),
        "start_months": np.repeat([p[0] for p in pieces], size),
        "tenor_months": np.repeat([p[1] for p in pieces], size),
        "window_days": window, "premium_bp": mean, "lower_bp": mean - Z95 * se, "upper_bp": mean + Z95 * se,
    })


def _finish_summary(summary: pd.DataFrame, data_version, now, first=None, last=None) -> pd.DataFrame:  # noqa: ANN001
    summary = summary.copy()
    summary["verdict"] = [verdict(r) for r in summary.to_dict("records")]
    summary["window_from"] = pd.to_datetime(first) if first else pd.NaT
    summary["window_to"] = pd.to_datetime(last) if last else pd.NaT
    summary["data_version"] = data_version
    summary["computed_at"] = now
    return summary


def _write_results(con, name: str, summary: pd.DataFrame, premium: pd.DataFrame,  # noqa: ANN001
                   premium_cells: list[tuple[int, int]] | None) -> None:
    """Replace the curve's summary rows; replace its premium rows (all, or only ``premium_cells``'s) and
    append ``premium``."""
    con.execute("DELETE FROM audit_result WHERE curve = ?", [name])
    if premium_cells is None:
        con.execute("DELETE FROM term_premium_result WHERE curve = ?", [name])
    elif premium_cells:
        con.execute(f"DELETE FROM term_premium_result o WHERE o.curve = ? {_cells_sql(premium_cells)}", [name])
    cols = [r[0] for r in con.execute("DESCRIBE audit_result").fetchall()]
    s = summary[cols]  # noqa: F841 - read by DuckDB by its name
    con.execute(f"INSERT INTO audit_result SELECT {', '.join(cols)} FROM s")
    if len(premium):
        p = premium[_PREMIUM]  # noqa: F841
        con.execute("INSERT INTO term_premium_result SELECT curve, CAST(as_of AS DATE), start_months, "
                    "tenor_months, window_days, premium_bp, lower_bp, upper_bp FROM p")


def _state_table(name: str, keys: list[tuple], recs: list[dict]) -> pa.Table:
    cols: dict[str, pa.Array] = {
        "curve": pa.array([name] * len(keys), pa.string()),
        "start_months": pa.array([k[0] for k in keys], pa.int32()),
        "tenor_months": pa.array([k[1] for k in keys], pa.int32()),
        "regime": pa.array([k[2] for k in keys], pa.string()),
    }
    for f in recs[0]:
        values = [r[f] for r in recs]
        if f in _LIST_TYPES:
            arrays = [np.asarray(v) for v in values]
            offsets = np.concatenate([[0], np.cumsum([a.size for a in arrays])]).astype(np.int32)
            flat = np.concatenate(arrays).astype(np.float64 if _LIST_TYPES[f] == pa.float64() else np.int64)
            cols[f] = pa.ListArray.from_arrays(pa.array(offsets), pa.array(flat, _LIST_TYPES[f]))
        elif f in ("first_as_of", "last_as_of"):
            cols[f] = pa.array(np.array(values, dtype="datetime64[D]"), pa.date32())
        elif f in _INT_FIELDS:
            cols[f] = pa.array([int(v) for v in values], pa.int64())
        else:
            cols[f] = pa.array([float(v) for v in values], pa.float64())
    return pa.table(cols)


def _tail_table(name: str, pieces: list[tuple[tuple, dict]]) -> pa.Table:
    sizes = [p[1]["as_of"].size for p in pieces]
    return pa.table({
        "curve": pa.array([name] * sum(sizes), pa.string()),
        "start_months": pa.array(np.repeat([k[0] for k, _ in pieces], sizes), pa.int32()),
        "tenor_months": pa.array(np.repeat([k[1] for k, _ in pieces], sizes), pa.int32()),
        "regime": pa.array(np.repeat(np.array([k[2] for k, _ in pieces], dtype=object), sizes), pa.string()),
        **{col: pa.array(np.concatenate([t[col] for _, t in pieces]),
                         pa.date32() if col in ("as_of", "target_date") else pa.float64())
           for col in TAIL_COLUMNS},
    })


def _write_state(con, name: str, c: CurveConfig, states: dict[tuple, tuple[CellState, dict]],  # noqa: ANN001
                 seen: tuple, data_version, now, tail_changes: dict[tuple, tuple] | None = None) -> None:  # noqa: ANN001
    """Store the curve's state: the meta row and cell rows are replaced; the tails too, unless
    ``tail_changes`` maps each changed cell to ``(keep_from, rows)``: its stored tail rows before
    ``keep_from`` (all when None) are dropped and ``rows`` appended."""
    con.execute("DELETE FROM audit_state_curve WHERE curve = ?", [name])
    con.execute("DELETE FROM audit_state_cell WHERE curve = ?", [name])
    keys = sorted(states)
    if keys:
        cells = _state_table(name, keys, [states[k][0].as_record() for k in keys])  # noqa: F841
        names = ", ".join(cells.column_names)
        con.execute(f"INSERT INTO audit_state_cell ({names}) SELECT {names} FROM cells")
    if tail_changes is None:
        con.execute("DELETE FROM audit_state_tail WHERE curve = ?", [name])
        pieces = [(k, states[k][1]) for k in keys]
    else:
        ck = sorted(tail_changes)
        cut = pa.table({  # noqa: F841
            "start_months": pa.array([k[0] for k in ck], pa.int32()),
            "tenor_months": pa.array([k[1] for k in ck], pa.int32()),
            "regime": pa.array([k[2] for k in ck], pa.string()),
            "keep_from": pa.array(np.array([np.datetime64("NaT") if tail_changes[k][0] is None else tail_changes[k][0]
                                            for k in ck], dtype="datetime64[D]"), pa.date32(), from_pandas=True),
        })
        con.execute("DELETE FROM audit_state_tail t USING cut c WHERE t.curve = ? AND t.start_months = c.start_months "
                    "AND t.tenor_months = c.tenor_months AND t.regime = c.regime "
                    "AND (c.keep_from IS NULL OR t.as_of < c.keep_from)", [name])
        pieces = [(k, tail_changes[k][1]) for k in ck]
    pieces = [p for p in pieces if p[1]["as_of"].size]
    if pieces:
        tails = _tail_table(name, pieces)  # noqa: F841
        names = f"curve, start_months, tenor_months, regime, {', '.join(TAIL_COLUMNS)}"
        con.execute(f"INSERT INTO audit_state_tail ({names}) SELECT {names} FROM tails")
    con.execute("INSERT INTO audit_state_curve VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [name, STATE_FORMAT, c.premium_window_days, _inversion_label(c), seen[0], seen[1], int(seen[2]),
                 data_version, now])


def _tail_change(old: dict, new: dict) -> tuple:
    """(keep_from, rows to append) turning the stored tail ``old`` into ``new``."""
    keep_from = new["as_of"][0] if new["as_of"].size else None
    if old["as_of"].size and keep_from is not None:
        fresh = new["as_of"] > old["as_of"][-1]
    else:
        fresh = np.ones(new["as_of"].size, dtype=bool)
    if keep_from is not None and old["as_of"].size and keep_from > old["as_of"][-1]:
        keep_from = None  # nothing of the old tail is kept
    return keep_from, {c: v[fresh] for c, v in new.items()}


def _seen(con, name: str) -> tuple:  # noqa: ANN001
    """(latest realized_at of any row, latest superseded_at, count of current rows) of a curve's outcomes."""
    return fetch_one(con, "SELECT max(realized_at), max(superseded_at), count(*) FILTER (WHERE superseded_at IS NULL) "
                          "FROM outcome WHERE curve = ?", [name])


@dataclass
class CurveRecord:
    """A curve's current outcomes (:func:`read_outcomes`) as read for a whole-record audit, with
    ``seen``: (latest realized_at, latest superseded_at, count of current rows) when they were read."""

    curve: str
    seen: tuple
    outcomes: pd.DataFrame
    reason: str = ""


@dataclass
class WholeAudit:
    """A whole-record audit of one curve, computed and not yet stored: the summary and term-premium
    rows, the running state of every cell (None for a windowed audit, which stores none) and the
    data version (the latest ``realized_at`` used)."""

    summary: pd.DataFrame
    premium: pd.DataFrame
    states: dict[tuple, tuple[CellState, dict]] | None
    data_version: object


def read_record(con, cfg: Config, name: str) -> CurveRecord:  # noqa: ANN001
    """The curve's current outcomes for a whole-record audit."""
    return CurveRecord(name, _seen(con, name), read_outcomes(con, cfg, name))


def audit_record(outcomes: pd.DataFrame, c: CurveConfig, now, first: str | None = None,  # noqa: ANN001
                 last: str | None = None, version: object = None) -> WholeAudit:
    """The whole-record audit of a curve's outcomes (over as-of ``first``..``last`` if given), stamped
    ``now`` (store clock, naive UTC) and ``version`` (default: the outcomes' latest ``realized_at``).
    Pure: no store, so it can run in any process.

    Every figure belongs to one (start, tenor) cell, so the audit of a record split by cells
    (:func:`split_record`) and put together again (:func:`join_audits`) is the audit of the whole,
    given the whole record's ``version``."""
    windowed = bool(first or last)
    version = outcomes["realized_at"].max() if version is None else version
    summary = _finish_summary(summarize(outcomes, first=first, last=last), version, now, first, last)
    window = outcomes
    if windowed:
        keep = pd.Series(True, index=outcomes.index)
        if first:
            keep &= outcomes["as_of"] >= pd.Timestamp(first)
        if last:
            keep &= outcomes["as_of"] <= pd.Timestamp(last)
        window = outcomes.loc[keep]
    premium = term_premium(window, c.premium_window_days)
    states = None if windowed else _build_states(outcomes, c.premium_window_days)
    return WholeAudit(summary, premium, states, version)


def split_record(outcomes: pd.DataFrame, parts: int) -> list[pd.DataFrame]:
    """``outcomes`` (sorted by start, tenor, as-of, as :func:`read_outcomes` gives them) cut between
    (start, tenor) cells into at most ``parts`` runs of cells of about equal rows, in order."""
    start = outcomes["start_months"].to_numpy()
    tenor = outcomes["tenor_months"].to_numpy()
    n = len(outcomes)
    cells = np.flatnonzero((np.diff(start) != 0) | (np.diff(tenor) != 0)) + 1  # where each new cell starts
    if parts <= 1 or not cells.size:
        return [outcomes]
    # the cell boundary nearest each equal-rows cut point
    wanted = n * np.arange(1, parts) / parts
    cuts = np.unique(cells[np.abs(cells[None, :] - wanted[:, None]).argmin(axis=1)])
    edges = np.concatenate([[0], cuts, [n]])
    return [outcomes.iloc[a:b] for a, b in zip(edges[:-1], edges[1:], strict=True)]


def join_audits(pieces: list[WholeAudit]) -> WholeAudit:
    """The audits of a record's runs of cells (:func:`split_record`, in order) as one."""
    if len(pieces) == 1:
        return pieces[0]

    def concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
        kept = [f for f in frames if len(f)] or frames[:1]
        return pd.concat(kept, ignore_index=True) if len(kept) > 1 else kept[0].reset_index(drop=True)

    states = None if pieces[0].states is None else {k: v for p in pieces for k, v in p.states.items()}
    return WholeAudit(concat([p.summary for p in pieces]), concat([p.premium for p in pieces]), states,
                      pieces[0].data_version)


def _store_whole(con, name: str, c: CurveConfig, audit: WholeAudit, seen: tuple, now) -> None:  # noqa: ANN001
    _write_results(con, name, audit.summary, audit.premium, None)
    if audit.states is None:
        for table in ("audit_state_curve", "audit_state_cell", "audit_state_tail"):
            con.execute(f"DELETE FROM {table} WHERE curve = ?", [name])
    else:
        _write_state(con, name, c, audit.states, seen, audit.data_version, now)


def _full_curve(con, cfg: Config, name: str, now, first: str | None = None,  # noqa: ANN001
                last: str | None = None) -> pd.DataFrame:
    """Recompute a curve's audit from its whole record (over ``first``..``last`` if given) and store it."""
    record = read_record(con, cfg, name)
    if record.outcomes.empty:
        return pd.DataFrame()
    c = cfg.curve(name)
    audit = audit_record(record.outcomes, c, now, first, last)
    _store_whole(con, name, c, audit, record.seen, now)
    return audit.summary


def _transaction(con, fn, *args):  # noqa: ANN001, ANN202
    con.execute("BEGIN TRANSACTION")
    try:
        out = fn(con, *args)
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise
    return out


def run_audit(cfg: Config, curve: str | None = None, first: str | None = None,
              last: str | None = None) -> dict[str, pd.DataFrame]:
    """Recompute and store the audit of the chosen curves; returns each curve's summary frame."""
    out: dict[str, pd.DataFrame] = {}
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            out[name] = _transaction(con, _full_curve, cfg, name, utc_now(), first, last)
    return out


def _column(table: pa.Table, name: str) -> np.ndarray | list[np.ndarray]:
    """A column as one numpy array, or a list column as one numpy array per row (views of one buffer)."""
    col = table.column(name).combine_chunks()
    if pa.types.is_list(col.type):
        offsets = col.offsets.to_numpy()
        values = col.values.to_numpy(zero_copy_only=False)
        return [values[offsets[i] : offsets[i + 1]] for i in range(len(col))]
    return col.to_numpy(zero_copy_only=False)


def _read_state(con, name: str) -> dict[tuple, tuple[CellState, dict]]:  # noqa: ANN001
    cells = con.sql("SELECT * FROM audit_state_cell WHERE curve = ?", params=[name]).to_arrow_table()
    tails = con.sql(f"SELECT start_months, tenor_months, regime, {', '.join(TAIL_COLUMNS)} FROM audit_state_tail "
                    "WHERE curve = ? ORDER BY start_months, tenor_months, regime, as_of",
                    params=[name]).to_arrow_table()
    st, te, rg = (_column(tails, c) for c in ("start_months", "tenor_months", "regime"))
    cut = np.flatnonzero((st[1:] != st[:-1]) | (te[1:] != te[:-1]) | (rg[1:] != rg[:-1])) + 1
    lo_all, hi_all = np.concatenate([[0], cut]), np.concatenate([cut, [tails.num_rows]])
    bounds = {(int(st[i]), int(te[i]), str(rg[i])): (i, j) for i, j in zip(lo_all, hi_all, strict=True) if j > i}
    arrays = {col: _column(tails, col) for col in TAIL_COLUMNS}
    for col in ("as_of", "target_date"):
        arrays[col] = arrays[col].astype("datetime64[D]")
    columns = {c: _column(cells, c) for c in cells.column_names}
    out = {}
    for i in range(cells.num_rows):
        rec = {c: v[i] for c, v in columns.items()}
        key = (int(rec["start_months"]), int(rec["tenor_months"]), str(rec["regime"]))
        lo, hi = bounds.get(key, (0, 0))
        out[key] = (CellState.from_record(rec), {col: v[lo:hi] for col, v in arrays.items()})
    return out


def _summary_rows(name: str, states: dict[tuple, tuple[CellState, dict]]) -> pd.DataFrame:
    rows = []
    for key in sorted(states, key=lambda k: (k[0], k[1], _REGIMES.index(k[2]))):
        row = {"curve": name, "start_months": key[0], "tenor_months": key[1], "regime": key[2]}
        row.update(cell_summary(states[key][0]))
        rows.append(row)
    out = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    out["n"] = out["n"].astype(np.int64)
    out["lags"] = out["lags"].astype(np.int64)
    return out


def _refresh_plan(con, cfg: Config, name: str) -> tuple[str, str, tuple, tuple | None]:  # noqa: ANN001
    """How a refresh treats the curve: (mode, reason, seen, stored meta row), mode ``unchanged`` (no
    outcomes), ``full`` (recompute the whole record; reason says why) or ``incremental``."""
    c = cfg.curve(name)
    # the last column counts cell rows stored without the lag band (before sql/008)
    meta = fetch_one(con, "SELECT state_format, window_days, inversion_pair, seen_realized_at, seen_superseded_at, "
                          "n_current, data_version, (SELECT count(*) FROM audit_state_cell s WHERE s.curve = ? AND "
                          "(s.lag_band IS NULL OR s.lag_cross IS NULL OR len(s.lag_band) = 0)) "
                          "FROM audit_state_curve WHERE curve = ?", [name, name])
    seen = _seen(con, name)
    if not seen[2]:
        return "unchanged", "no outcomes", seen, meta
    if meta is None:
        return "full", "no stored state", seen, meta
    fmt, window_days, pair, _, seen_superseded, _, _, older = meta
    if fmt != STATE_FORMAT or window_days != c.premium_window_days or pair != _inversion_label(c):
        return "full", "state built for another format, premium window or inversion pair", seen, meta
    if older:
        return "full", "state stored in an older layout (without the lag band)", seen, meta
    if seen[1] is not None and (seen_superseded is None or seen[1] > seen_superseded):
        return "full", "outcomes superseded since the state was stored", seen, meta
    return "incremental", "", seen, meta


def _refresh_curve(con, cfg: Config, name: str, now) -> AuditRefresh:  # noqa: ANN001, C901
    c = cfg.curve(name)
    w = c.premium_window_days
    mode, reason, seen, meta = _refresh_plan(con, cfg, name)

    def full(reason: str) -> AuditRefresh:
        summary = _full_curve(con, cfg, name, now)
        return AuditRefresh(name, "full", summary, reason, int(seen[2] or 0))

    if mode == "unchanged":
        return AuditRefresh(name, "unchanged", pd.DataFrame(), reason)
    if mode == "full":
        return full(reason)
    _, _, _, seen_realized, _, n_current, data_version, _ = meta
    span = fetch_one(con, "SELECT min(as_of), max(as_of) FROM outcome WHERE curve = ? AND superseded_at IS NULL "
                          "AND realized_at > ?", [name, seen_realized])
    new = read_outcomes(con, cfg, name, "AND o.realized_at > ?", [seen_realized],
                        quotes_between=span if span and span[0] is not None else None)
    if int(n_current) + len(new) != int(seen[2]):
        return full("the current outcomes do not add up to the state's count plus the new ones")
    if new.empty:
        summary = read_frame(con, "SELECT * FROM audit_result WHERE curve = ? ORDER BY start_months, tenor_months",
                             [name], date_as_object=False)
        return AuditRefresh(name, "unchanged", summary)

    states = _read_state(con, name)
    recompute: list[tuple[int, int]] = []
    premium_pieces: list[tuple[int, int, dict]] = []
    tail_changes: dict[tuple, tuple] = {}
    cols = {c: new[c].to_numpy() for c in TAIL_COLUMNS}
    masks = _regime_masks(new)
    start, tenor = new["start_months"].to_numpy(), new["tenor_months"].to_numpy()
    cut = np.flatnonzero((np.diff(start) != 0) | (np.diff(tenor) != 0)) + 1
    for g0, g1 in zip(np.concatenate([[0], cut]), np.concatenate([cut, [len(new)]]), strict=True):
        s, m = int(start[g0]), int(tenor[g0])
        key = (s, m, "all")
        if key not in states or cols["as_of"][g0] <= states[key][0].last_as_of:
            recompute.append((s, m))
            continue
        updated: dict[tuple, tuple[CellState, dict]] = {}
        piece = None
        for regime in _REGIMES:
            mask = masks[regime][g0:g1]
            if not mask.any():
                continue
            k = (s, m, regime)
            if k not in states:
                break
            state, tail = states[k]
            rows = {c: v[g0:g1][mask] for c, v in cols.items()}
            res = append_cell(state, tail, rows, window=w if regime == "all" else None)
            if res is None:
                break
            if regime == "all":
                piece = (s, m, premium_increment(tail, rows, w, res[0].premium_lags))
            updated[k] = res
        else:
            for k, res in updated.items():
                tail_changes[k] = _tail_change(states[k][1], res[1])
                states[k] = res
            premium_pieces.append(piece)  # type: ignore[arg-type]
            continue
        recompute.append((s, m))

    summary = _summary_rows(name, states)
    premium = _premium_frame(name, premium_pieces, w)
    if recompute:
        frame = read_outcomes(con, cfg, name, _cells_sql(recompute))
        rebuilt = _build_states(frame, w)
        empty = {c: v[:0] for c, v in cols.items()}
        for k in [k for k in states if (k[0], k[1]) in set(recompute)]:
            del states[k]
            tail_changes[k] = (None, empty)
        states.update(rebuilt)
        tail_changes.update({k: (None, v[1]) for k, v in rebuilt.items()})
        ref = summarize(frame)
        summary = summary[~pd.MultiIndex.from_frame(summary[_KEY]).isin(recompute)]
        summary = pd.concat([summary, ref], ignore_index=True)
        order = np.lexsort((summary["regime"].map(_REGIMES.index).to_numpy(), summary["tenor_months"].to_numpy(),
                            summary["start_months"].to_numpy()))
        summary = summary.iloc[order].reset_index(drop=True)
        premium = pd.concat([premium, term_premium(frame, w)], ignore_index=True)
    version = max(pd.Timestamp(data_version), new["realized_at"].max()) if data_version is not None \
        else new["realized_at"].max()
    summary = _finish_summary(summary, version, now)
    _write_results(con, name, summary, premium, recompute)
    _write_state(con, name, c, states, seen, version, now, tail_changes)
    return AuditRefresh(name, "incremental", summary, new_outcomes=len(new), recomputed=recompute)


def whole_record_due(cfg: Config, name: str) -> CurveRecord | None:
    """The curve's record when a refresh would recompute it whole (no stored state yet, say, as after
    a first backfill); None when the refresh has nothing to do or would be incremental.

    With :func:`audit_record` (anywhere) and :func:`store_whole_audit`, this is a refresh in three
    parts, so that the computation, the costly part, can run in another process."""
    with writer(cfg.store_path) as con:
        mode, reason, _, _ = _refresh_plan(con, cfg, name)
        if mode != "full":
            return None
        record = read_record(con, cfg, name)
    record.reason = reason
    return record if len(record.outcomes) else None


def store_whole_audit(cfg: Config, record: CurveRecord, audit: WholeAudit, now) -> AuditRefresh:  # noqa: ANN001
    """Store ``audit``, computed from ``record`` and stamped ``now``, in one transaction; if the
    curve's outcomes changed since the record was read, refresh the curve here instead (as
    :func:`refresh_audit_incremental` would), so nothing stale is stored."""
    name = record.curve

    def store(con) -> AuditRefresh:  # noqa: ANN001
        if _seen(con, name) != record.seen:
            return _refresh_curve(con, cfg, name, utc_now())
        _store_whole(con, name, cfg.curve(name), audit, record.seen, now)
        return AuditRefresh(name, "full", audit.summary, record.reason, int(record.seen[2] or 0))

    with writer(cfg.store_path) as con:
        return _transaction(con, store)


def refresh_audit_incremental(cfg: Config, curve: str | None = None) -> dict[str, AuditRefresh]:
    """Bring the stored audit of the chosen curves up to date with the outcomes, folding in only the
    outcomes realised since the last audit (see the module notes); the rows written equal those of
    :func:`run_audit` without a window. Returns what was done per curve."""
    out: dict[str, AuditRefresh] = {}
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            out[name] = _transaction(con, _refresh_curve, cfg, name, utc_now())
    return out
