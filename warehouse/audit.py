"""The audit's tables: outcomes read for an audit, the stored results (``audit_result``,
``term_premium_result``) and each curve's running state (``audit_state_curve``, ``_cell``, ``_tail``).

Functions take an open connection; the caller owns the transaction (:func:`warehouse.connect.transaction`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline.audit.refresh import PREMIUM_COLUMNS
from pipeline.audit.state import TAIL_COLUMNS, CellState
from warehouse.frames import read_frame
from warehouse.query import fetch_one

__all__ = ["audit_version_at", "cells_sql", "drop_state", "record_run",
           "new_outcome_span", "outcomes_seen", "read_outcomes", "read_state",
           "read_summary", "state_meta", "write_results", "write_state"]

_INT_FIELDS = {"n", "horizon", "lags", "premium_lags", "n_moved", "n_hit", "band_below", "band_above"}
_LIST_TYPES = {"sums": pa.float64(), "cross_moments": pa.float64(), "hist": pa.int64(), "band": pa.float64(),
               "lag_band": pa.int64(), "lag_cross": pa.float64()}


def cells_sql(cells: list[tuple[int, int]]) -> str:
    """SQL (starting with AND, on the outcome alias ``o``) selecting the (start, tenor) cells given."""
    return "AND (" + " OR ".join(f"(o.start_months = {int(s)} AND o.tenor_months = {int(m)})" for s, m in cells) + ")"


def read_outcomes(con, curve: str, pair: tuple[str, str] | None, where: str = "",  # noqa: ANN001
                  params: list | None = None, quotes_between: tuple | None = None) -> pd.DataFrame:
    """The current outcomes of ``curve``, sorted by (start, tenor, as_of), with ``inverted``: the long
    quote of ``pair`` (short, long tenor labels; the curve's first inversion pair) below its short quote
    on the as-of date (NULL when there is no pair or a quote is missing).

    ``where`` (SQL starting with ``AND``, on the outcome alias ``o``) and ``params`` narrow the rows;
    ``quotes_between`` (first, last as-of date), when the rows' as-of dates are known to lie within
    it, narrows the quotes joined (a few new rows then do not scan a curve's whole quote record).
    """
    if pair:
        inverted = "ql.rate < qs.rate"
        span = (f" AND as_of BETWEEN DATE '{np.datetime64(quotes_between[0], 'D')}' "
                f"AND DATE '{np.datetime64(quotes_between[1], 'D')}'") if quotes_between else ""
        joins = " ".join(
            f"LEFT JOIN (SELECT as_of, rate FROM quotes WHERE curve = ? AND tenor = '{t}'{span}) {alias} "
            f"ON {alias}.as_of = o.as_of" for alias, t in (("qs", pair[0]), ("ql", pair[1])))
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


def outcomes_seen(con, curve: str) -> tuple:  # noqa: ANN001
    """(latest realized_at of any row, latest superseded_at, count of current rows) of a curve's outcomes."""
    return fetch_one(con, "SELECT max(realized_at), max(superseded_at), count(*) FILTER (WHERE superseded_at IS NULL) "
                          "FROM outcome WHERE curve = ?", [curve])


def new_outcome_span(con, curve: str, since) -> tuple | None:  # noqa: ANN001
    """(first, last) as-of date of the current outcomes realised after ``since``; None when there are none."""
    span = fetch_one(con, "SELECT min(as_of), max(as_of) FROM outcome WHERE curve = ? AND superseded_at IS NULL "
                          "AND realized_at > ?", [curve, since])
    return span if span and span[0] is not None else None


def read_summary(con, curve: str) -> pd.DataFrame:  # noqa: ANN001
    """The stored ``audit_result`` rows of a curve."""
    return read_frame(con, "SELECT * FROM audit_result WHERE curve = ? ORDER BY start_months, tenor_months",
                      [curve], date_as_object=False)


def write_results(con, curve: str, summary: pd.DataFrame, premium: pd.DataFrame,  # noqa: ANN001
                  premium_cells: list[tuple[int, int]] | None) -> None:
    """Replace the curve's summary rows; replace its premium rows (all, or only ``premium_cells``'s) and
    append ``premium``."""
    con.execute("DELETE FROM audit_result WHERE curve = ?", [curve])
    if premium_cells is None:
        con.execute("DELETE FROM term_premium_result WHERE curve = ?", [curve])
    elif premium_cells:
        con.execute(f"DELETE FROM term_premium_result o WHERE o.curve = ? {cells_sql(premium_cells)}", [curve])
    cols = [r[0] for r in con.execute("DESCRIBE audit_result").fetchall()]
    s = summary[cols]  # noqa: F841 - read by DuckDB by its name
    con.execute(f"INSERT INTO audit_result SELECT {', '.join(cols)} FROM s")
    if len(premium):
        p = premium[PREMIUM_COLUMNS]  # noqa: F841
        con.execute("INSERT INTO term_premium_result SELECT curve, CAST(as_of AS DATE), start_months, "
                    "tenor_months, window_days, premium_bp, lower_bp, upper_bp FROM p")


def state_meta(con, curve: str) -> tuple | None:  # noqa: ANN001
    """The curve's stored state row: (state_format, window_days, inversion_pair, seen_realized_at,
    seen_superseded_at, n_current, data_version, cells stored without the lag band); None when none."""
    # the last column counts cell rows stored without the lag band (before sql/008)
    return fetch_one(con, "SELECT state_format, window_days, inversion_pair, seen_realized_at, seen_superseded_at, "
                          "n_current, data_version, (SELECT count(*) FROM audit_state_cell s WHERE s.curve = ? AND "
                          "(s.lag_band IS NULL OR s.lag_cross IS NULL OR len(s.lag_band) = 0)) "
                          "FROM audit_state_curve WHERE curve = ?", [curve, curve])


def _column(table: pa.Table, name: str) -> np.ndarray | list[np.ndarray]:
    """A column as one numpy array, or a list column as one numpy array per row (views of one buffer)."""
    col = table.column(name).combine_chunks()
    if pa.types.is_list(col.type):
        offsets = col.offsets.to_numpy()
        values = col.values.to_numpy(zero_copy_only=False)
        return [values[offsets[i] : offsets[i + 1]] for i in range(len(col))]
    return col.to_numpy(zero_copy_only=False)


def read_state(con, curve: str) -> dict[tuple, tuple[CellState, dict]]:  # noqa: ANN001
    """Every stored cell of the curve: (start, tenor, regime) -> (state, tail rows)."""
    cells = con.sql("SELECT * FROM audit_state_cell WHERE curve = ?", params=[curve]).to_arrow_table()
    tails = con.sql(f"SELECT start_months, tenor_months, regime, {', '.join(TAIL_COLUMNS)} FROM audit_state_tail "
                    "WHERE curve = ? ORDER BY start_months, tenor_months, regime, as_of",
                    params=[curve]).to_arrow_table()
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


def _state_table(curve: str, keys: list[tuple], recs: list[dict]) -> pa.Table:
    cols: dict[str, pa.Array] = {
        "curve": pa.array([curve] * len(keys), pa.string()),
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


def _tail_table(curve: str, pieces: list[tuple[tuple, dict]]) -> pa.Table:
    sizes = [p[1]["as_of"].size for p in pieces]
    return pa.table({
        "curve": pa.array([curve] * sum(sizes), pa.string()),
        "start_months": pa.array(np.repeat([k[0] for k, _ in pieces], sizes), pa.int32()),
        "tenor_months": pa.array(np.repeat([k[1] for k, _ in pieces], sizes), pa.int32()),
        "regime": pa.array(np.repeat(np.array([k[2] for k, _ in pieces], dtype=object), sizes), pa.string()),
        **{col: pa.array(np.concatenate([t[col] for _, t in pieces]),
                         pa.date32() if col in ("as_of", "target_date") else pa.float64())
           for col in TAIL_COLUMNS},
    })


def drop_state(con, curve: str) -> None:  # noqa: ANN001
    """Forget the curve's running state (a windowed audit's rows do not describe the whole record)."""
    for table in ("audit_state_curve", "audit_state_cell", "audit_state_tail"):
        con.execute(f"DELETE FROM {table} WHERE curve = ?", [curve])


def write_state(con, curve: str, states: dict[tuple, tuple[CellState, dict]], meta: tuple,  # noqa: ANN001
                tail_changes: dict[tuple, tuple] | None = None) -> None:
    """Store the curve's state: the meta row (state_format, window_days, inversion_pair,
    seen_realized_at, seen_superseded_at, n_current, data_version, computed_at) and the cell rows are
    replaced; the tails too, unless ``tail_changes`` maps each changed cell to ``(keep_from, rows)``:
    its stored tail rows before ``keep_from`` (all when None) are dropped and ``rows`` appended."""
    con.execute("DELETE FROM audit_state_curve WHERE curve = ?", [curve])
    con.execute("DELETE FROM audit_state_cell WHERE curve = ?", [curve])
    keys = sorted(states)
    if keys:
        cells = _state_table(curve, keys, [states[k][0].as_record() for k in keys])  # noqa: F841
        names = ", ".join(cells.column_names)
        con.execute(f"INSERT INTO audit_state_cell ({names}) SELECT {names} FROM cells")
    if tail_changes is None:
        con.execute("DELETE FROM audit_state_tail WHERE curve = ?", [curve])
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
                    "AND (c.keep_from IS NULL OR t.as_of < c.keep_from)", [curve])
        pieces = [(k, tail_changes[k][1]) for k in ck]
    pieces = [p for p in pieces if p[1]["as_of"].size]
    if pieces:
        tails = _tail_table(curve, pieces)  # noqa: F841
        names = f"curve, start_months, tenor_months, regime, {', '.join(TAIL_COLUMNS)}"
        con.execute(f"INSERT INTO audit_state_tail ({names}) SELECT {names} FROM tails")
    fmt, window, pair, seen_realized, seen_superseded, n_current, version, now = meta
    con.execute("INSERT INTO audit_state_curve VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [curve, fmt, window, pair, seen_realized, seen_superseded, int(n_current), version, now])


def record_run(con, curve: str, computed_at, mode: str, code_version: str) -> None:  # noqa: ANN001
    """Note an audit of ``curve`` stored at ``computed_at`` (``full`` or ``incremental``) and the program
    version that computed it (``audit_run``, sql/015)."""
    con.execute("INSERT INTO audit_run VALUES (?, ?, ?, ?)", [curve, computed_at, mode, code_version])


def audit_version_at(con, ts) -> str | None:  # noqa: ANN001
    """The program version of the latest audit stored at or before ``ts`` (None when none was)."""
    row = fetch_one(con, "SELECT code_version FROM audit_run WHERE computed_at <= ? ORDER BY computed_at DESC LIMIT 1",
                    [ts])
    return row[0] if row else None
