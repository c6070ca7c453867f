"""The build step: zero curves and forward surfaces for the days not yet built.

A day is (re)built when it has quotes and no build, or its quotes changed after its build, unless an
open reject finding holds it back; a held day's earlier build is withdrawn. Days are built many at a
time (arrays of days x tenors) and each chunk of days is written in one transaction, so no day is
ever half built. ``method`` other than the configured one writes a what-if scenario beside the
official surface, never over it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from pipeline.checks import curve_shape_checks
from pipeline.config import Config, CurveConfig
from pipeline.curves import build_curves
from pipeline.forwards import ForwardGrid, ZeroGrid, forward_grid, zero_grid
from warehouse.connect import writer
from warehouse.frames import QuotePanel
from warehouse.loads import utc_now

__all__ = ["BuildSummary", "code_version", "run_build", "scenario_name"]

CHUNK_DAYS = 2500
SHAPE_CHECKS = ("negative_forward", "non_monotone_discount")
GRID_BLOCK = 24  # shape-check grid columns evaluated at a time (see _discount_in_blocks)


def code_version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return f"afterward {version('afterward')}"
    except PackageNotFoundError:  # running from a source tree that is not installed
        return "afterward (source)"


def scenario_name(cfg: CurveConfig, method: str | None) -> str:
    return "official" if method in (None, cfg.interpolation) else f"what-if:{method}"


@dataclass
class BuildSummary:
    curves: dict[str, dict] = field(default_factory=dict)

    @property
    def days_built(self) -> int:
        return sum(c["days_built"] for c in self.curves.values())

    @property
    def forwards_built(self) -> int:
        return sum(c["forwards"] for c in self.curves.values())


def _grid_times(max_years: float) -> np.ndarray:
    """Year fractions for the shape checks: monthly to 2 years, where curves bend most and money-market
    tenors sit, then quarterly out to the longest tenor (a 30-year curve: 136 points, not 360)."""
    months = np.r_[np.arange(1, 25), np.arange(27, int(np.ceil(max_years * 12)) + 3, 3)]
    return months[months <= max(24, int(np.ceil(max_years * 12)))] / 12.0


@dataclass
class BuiltDays:
    """What one batch of days builds, ready for :func:`_write_chunk`: ``ok`` ``(D,)`` per day, the zero
    rates and forward surface of the days built (arrays, cheap to send between processes), curve-shape
    findings (or None), fitted parameters of the days built (parametric methods, else None), and the
    count of failures by reason."""

    ok: np.ndarray
    zeros: ZeroGrid
    forwards: ForwardGrid
    shape: pd.DataFrame | None
    params: np.ndarray | None
    reasons: dict[str, int]


def compute_days(as_of: np.ndarray, tenors: list[str], rates: np.ndarray, c: CurveConfig, method: str,
                 warm: np.ndarray | None = None) -> BuiltDays:
    """Build ``(D,)`` days of ``(D, T)`` quotes (decimals as quoted) with ``method``: pure, no store.

    The one computation behind ``build`` and the backfill's parallel chunks, so both store the same rows.
    """
    cs = build_curves(as_of, tenors, rates, c, method=method, warm_start=warm)
    ok = np.asarray(cs.ok, dtype=bool)
    reasons: dict[str, int] = {}
    for r in (cs.reason[i] for i in np.flatnonzero(~ok)):
        reasons[r] = reasons.get(r, 0) + 1
    zero_tenors = sorted(set(c.tenors) | set(c.forward_tenors))
    grid_times = _grid_times(max(t.approx_days for t in c.tenors) / 365.25)
    return BuiltDays(ok, zero_grid(cs, zero_tenors, c), forward_grid(cs, c), _shape_findings(cs, grid_times, c),
                     cs.params[ok] if cs.params is not None else None, reasons)


def run_build(cfg: Config, curve: str | None = None, first: object = None, last: object = None,
              rebuild: bool = False, method: str | None = None,
              on_progress: Callable[[str, int, int], None] | None = None) -> BuildSummary:
    """Build the chosen curves (all by default); ``on_progress(curve, done, total)`` reports days.

    Which days are due is decided in the store (one aggregate over the curve's current quotes joined
    with its built days), and only those days' quotes are read: a daily run that adds one day reads
    one day, whatever the length of the history.
    """
    summary = BuildSummary()
    version = code_version()
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            scenario = scenario_name(c, method)
            use = method or c.interpolation
            due, n_held = _due_days(con, name, scenario, first, last, rebuild)
            withdrawn = _withdraw_held(con, name, scenario)
            total = len(due)
            info = {"days_built": 0, "forwards": 0, "failed": 0, "held": n_held,
                    "withdrawn": withdrawn, "scenario": scenario, "method": use, "reasons": {}}
            panel = _read_due_quotes(con, name, list(c.tenor_labels), due)
            warm = _last_params(con, name, scenario) if use == "nss" else None
            quoted = set(c.tenor_labels)
            for k in range(0, total, CHUNK_DAYS):
                part = panel.select(slice(k, k + CHUNK_DAYS))
                built = compute_days(part.as_of, panel.tenors, part.rates, c, use, warm)
                ok, zeros, fwd, shape, params = built.ok, built.zeros, built.forwards, built.shape, built.params
                for r, n in built.reasons.items():
                    info["reasons"][r] = info["reasons"].get(r, 0) + n
                if params is not None and len(params):
                    warm = params[-1]
                _write_chunk(con, name, scenario, use, version, part, ok, zeros, fwd, shape, params, quoted)
                info["days_built"] += int(ok.sum())
                info["failed"] += int((~ok).sum())
                info["forwards"] += len(fwd)
                if on_progress is not None:
                    on_progress(name, min(k + CHUNK_DAYS, total), total)
            summary.curves[name] = info
    return summary


def _range_sql(first: object, last: object, column: str = "as_of") -> tuple[str, dict]:
    where, params = "", {}
    if first is not None:
        where += f" AND {column} >= CAST($first AS DATE)"
        params["first"] = str(first)
    if last is not None:
        where += f" AND {column} <= CAST($last AS DATE)"
        params["last"] = str(last)
    return where, params


def _due_days(con, curve: str, scenario: str, first: object, last: object,  # noqa: ANN001
              rebuild: bool) -> tuple[pa.Table, int]:
    """The days to build, sorted: ``as_of`` and ``recorded_at`` (the latest among the day's current
    quotes); and how many days in the range an open reject finding holds back.

    A day is due when it has current quotes in ``[first, last]``, is not held, and has no build of
    ``scenario`` or its quotes changed after that build (every day not held, with ``rebuild``).
    """
    where, params = _range_sql(first, last)
    t = con.sql(
        f"""WITH q AS (SELECT as_of, max(recorded_at) AS recorded_at FROM quotes
                       WHERE curve = $curve{where} GROUP BY as_of),
                 h AS (SELECT DISTINCT as_of FROM held_days WHERE curve = $curve),
                 b AS (SELECT as_of, quotes_as_of FROM built_day WHERE curve = $curve AND scenario = $scenario)
            SELECT q.as_of, q.recorded_at, h.as_of IS NOT NULL AS held
            FROM q LEFT JOIN b ON b.as_of = q.as_of LEFT JOIN h ON h.as_of = q.as_of
            WHERE h.as_of IS NOT NULL OR $rebuild OR b.as_of IS NULL OR q.recorded_at > b.quotes_as_of
            ORDER BY q.as_of""",
        params={"curve": curve, "scenario": scenario, "rebuild": bool(rebuild), **params},
    ).to_arrow_table()
    held = t["held"].to_numpy(zero_copy_only=False).astype(bool)
    return t.filter(pa.array(~held)).select(["as_of", "recorded_at"]), int(held.sum())


def _withdraw_held(con, curve: str, scenario: str) -> int:  # noqa: ANN001
    """Delete the builds of days an open reject finding now holds back; returns how many."""
    keys = con.sql("SELECT build_key, as_of FROM built_day WHERE curve = $curve AND scenario = $scenario "
                   "AND as_of IN (SELECT as_of FROM held_days WHERE curve = $curve)",
                   params={"curve": curve, "scenario": scenario}).to_arrow_table()
    if keys.num_rows == 0:
        return 0
    con.execute("BEGIN TRANSACTION")
    try:
        _delete_builds(con, curve, scenario, keys)
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise
    return keys.num_rows


def _delete_builds(con, curve: str, scenario: str, keys: pa.Table) -> None:  # noqa: ANN001
    """Delete the rows of the builds ``keys`` (``build_key``, ``as_of``) from every built table.

    The key range goes in as constants beside the semi-join so that DuckDB skips the row groups of
    other days (the forward table holds ~100 rows a day).
    """
    gone = keys  # noqa: F841 - read by DuckDB by its name
    k = keys["build_key"].to_numpy()
    bounds = {"lo": int(k.min()), "hi": int(k.max())}
    for table in ("forward_point", "zero_point"):
        con.execute(f"DELETE FROM {table} WHERE build_key BETWEEN $lo AND $hi "
                    "AND build_key IN (SELECT build_key FROM gone)", bounds)
    con.execute("DELETE FROM built_day WHERE build_key BETWEEN $lo AND $hi "
                "AND build_key IN (SELECT build_key FROM gone)", bounds)
    con.execute("DELETE FROM curve_fit WHERE curve = $curve AND scenario = $scenario "
                "AND as_of IN (SELECT as_of FROM gone)", {"curve": curve, "scenario": scenario})


def _read_due_quotes(con, curve: str, tenors: list[str], due: pa.Table) -> QuotePanel:  # noqa: ANN001
    """The current quotes of the ``due`` days pivoted to days x ``tenors`` (NaN = missing)."""
    days = due["as_of"].to_numpy().astype("datetime64[D]")
    recorded = due["recorded_at"].to_numpy().astype("datetime64[us]")
    rates = np.full((len(days), len(tenors)), np.nan)
    if len(days) == 0:
        return QuotePanel(days, list(tenors), rates, recorded)
    wanted = due.select(["as_of"])  # noqa: F841 - read by DuckDB by its name
    t = con.sql("SELECT as_of, tenor, rate FROM quotes WHERE curve = $curve AND as_of BETWEEN $lo AND $hi "
                "AND as_of IN (SELECT as_of FROM wanted)",
                params={"curve": curve, "lo": str(days[0]), "hi": str(days[-1])}).to_arrow_table()
    col = pc.index_in(t["tenor"], value_set=pa.array(list(tenors), pa.string()))
    keep = col.is_valid().to_numpy(zero_copy_only=False)
    row = np.searchsorted(days, t["as_of"].to_numpy().astype("datetime64[D]"))
    rates[row[keep], col.drop_null().to_numpy()] = t["rate"].to_numpy()[keep]
    return QuotePanel(days, list(tenors), rates, recorded)


def _shape_findings(cs, grid_times: np.ndarray, cfg: CurveConfig) -> pd.DataFrame | None:  # noqa: ANN001
    """Shape-check findings of the built days on the check grid.

    Days whose method guarantees non-negative forwards everywhere (``forwards_nonnegative``) cannot
    fail either check, so the grid is evaluated only on the others: the same findings for a fraction
    of the work (monotone convex with positive discrete forwards never needs it).
    """
    need = np.flatnonzero(cs.ok & ~cs.forwards_nonnegative())
    if need.size == 0:
        return None
    grid = np.broadcast_to(grid_times, (need.size, grid_times.size))
    return curve_shape_checks(cs.as_of[need], grid, np.exp(_ln_discount_in_blocks(cs, need, grid)), cfg)


def _ln_discount_in_blocks(cs, rows: np.ndarray, grid: np.ndarray) -> np.ndarray:  # noqa: ANN001
    """``cs.ln_discount_rows(rows, grid)`` for a (rows, K) grid, evaluated GRID_BLOCK columns at a time.

    The same numbers; but evaluating all 360 monthly points of 2,500 days at once made the curve
    methods' temporaries (days x points x nodes) so large that monotone convex ran 3-4x slower.
    """
    k = grid.shape[1]
    if k <= GRID_BLOCK:
        return cs.ln_discount_rows(rows, grid)
    return np.concatenate([cs.ln_discount_rows(rows, grid[:, j:j + GRID_BLOCK]) for j in range(0, k, GRID_BLOCK)],
                          axis=1)


def _discount_in_blocks(cs, grid: np.ndarray) -> np.ndarray:  # noqa: ANN001
    """``cs.discount(grid)`` for a (days, K) grid, GRID_BLOCK columns at a time (see above)."""
    return np.exp(_ln_discount_in_blocks(cs, np.arange(len(cs)), grid))


def _last_params(con, curve: str, scenario: str) -> np.ndarray | None:  # noqa: ANN001
    """The NSS parameters of the latest fitted day (the warm start of the next fit)."""
    rows = con.execute("SELECT params FROM curve_fit WHERE curve = $curve AND scenario = $scenario AND as_of = "
                       "(SELECT max(as_of) FROM curve_fit WHERE curve = $curve AND scenario = $scenario) LIMIT 1",
                       {"curve": curve, "scenario": scenario}).fetchall()
    return np.asarray(rows[0][0], dtype=float) if rows else None


def _days_of(values: object) -> np.ndarray:
    return np.asarray(values).astype("datetime64[D]")


def _key_of_rows(keys: np.ndarray, days: np.ndarray, row_days: object) -> np.ndarray:
    """The build key of each row of a long frame, found by its date among ``days`` (keyed ``keys``)."""
    order = np.argsort(days, kind="stable")
    return keys[order][np.searchsorted(days[order], _days_of(row_days))]


def _same_days(grid: ZeroGrid | ForwardGrid, days: np.ndarray) -> None:
    if not np.array_equal(_days_of(grid.as_of), days):
        raise ValueError("the zero rates and forwards must be those of the chunk's built days, in order")


def _zero_table(zeros: ZeroGrid | pd.DataFrame, keys: np.ndarray, days: np.ndarray, quoted: set[str]) -> pa.Table:
    """The ``zero_point`` rows of the built days ``days`` keyed ``keys`` (aligned)."""
    if isinstance(zeros, ZeroGrid):
        _same_days(zeros, days)
        n, k = zeros.maturity_date.shape
        codes = pa.array(np.tile(np.arange(k, dtype=np.int32), n))
        return pa.table({
            "build_key": pa.array(np.repeat(keys, k)),
            "tenor": pa.DictionaryArray.from_arrays(codes, pa.array(list(zeros.tenor), pa.string())),
            "tenor_months": pc.take(pa.array(list(zeros.tenor_months), pa.int32()), codes),
            "quoted": pc.take(pa.array([x in quoted for x in zeros.tenor]), codes),
            "maturity_date": pa.array(zeros.maturity_date.reshape(-1), pa.date32()),
            "year_fraction": pa.array(zeros.year_fraction.reshape(-1)),
            "zero_rate": pa.array(zeros.zero_rate.reshape(-1)),
            "zero_rate_cc": pa.array(zeros.zero_rate_cc.reshape(-1)),
            "discount_factor": pa.array(zeros.discount_factor.reshape(-1)),
        })
    # a long frame (the backfill's chunks)
    tenor = zeros["tenor"].astype(str).to_numpy(dtype=object)
    return pa.table({
        "build_key": pa.array(_key_of_rows(keys, days, zeros["as_of"].to_numpy())),
        "tenor": pa.array(tenor, pa.string()),
        "tenor_months": pa.array(zeros["tenor_months"].astype("Int64"), pa.int32()),
        "quoted": pa.array(np.isin(tenor, list(quoted))),
        "maturity_date": pa.array(_days_of(zeros["maturity_date"].to_numpy()), pa.date32()),
        "year_fraction": pa.array(zeros["year_fraction"].to_numpy(dtype=float)),
        "zero_rate": pa.array(zeros["zero_rate"].to_numpy(dtype=float)),
        "zero_rate_cc": pa.array(zeros["zero_rate_cc"].to_numpy(dtype=float)),
        "discount_factor": pa.array(zeros["discount_factor"].to_numpy(dtype=float)),
    })


def _forward_table(fwd: ForwardGrid | pd.DataFrame, keys: np.ndarray, days: np.ndarray) -> pa.Table:
    """The ``forward_point`` rows of the built days ``days`` keyed ``keys`` (aligned), in the table's
    own column types (the million-row insert is the largest single cost of a long build)."""
    if isinstance(fwd, ForwardGrid):
        _same_days(fwd, days)
        n, g = fwd.forward_rate.shape
        key = np.repeat(keys, g)
        start_months, tenor_months = np.tile(fwd.start_months, n), np.tile(fwd.tenor_months, n)
        cols = (fwd.start_date, fwd.end_date, fwd.forward_rate, fwd.forward_rate_cc)
        start_date, end_date, rate, rate_cc = (a.reshape(-1) for a in cols)
    else:  # a long frame (the backfill's chunks)
        key = _key_of_rows(keys, days, fwd["as_of"].to_numpy())
        start_months, tenor_months = fwd["start_months"].to_numpy(), fwd["tenor_months"].to_numpy()
        start_date, end_date = _days_of(fwd["start_date"].to_numpy()), _days_of(fwd["end_date"].to_numpy())
        rate, rate_cc = fwd["forward_rate"].to_numpy(dtype=float), fwd["forward_rate_cc"].to_numpy(dtype=float)
    return pa.table({
        "build_key": pa.array(key),
        "start_months": pa.array(start_months.astype(np.int32)),
        "tenor_months": pa.array(tenor_months.astype(np.int32)),
        "start_date": pa.array(start_date.astype("datetime64[D]"), pa.date32()),
        "end_date": pa.array(end_date.astype("datetime64[D]"), pa.date32()),
        "forward_rate": pa.array(rate),
        "forward_rate_cc": pa.array(rate_cc),
    })


def _write_chunk(con, curve: str, scenario: str, method: str, version: str, part, ok: np.ndarray,  # noqa: ANN001
                 zeros: ZeroGrid | pd.DataFrame, fwd: ForwardGrid | pd.DataFrame, shape: pd.DataFrame | None,
                 params: np.ndarray | None, quoted: set[str]) -> None:
    """Store one chunk in one transaction: every day tried (``part.as_of``) loses its previous build of
    ``scenario``; the days built (``ok``) get a new build key, their zero rates, forwards, NSS
    parameters and (official scenario) shape findings, which replace the day's earlier ones."""
    now = utc_now()
    tried = _days_of(part.as_of)
    built_days = tried[ok]
    days = pa.table({"as_of": pa.array(tried, pa.date32())})  # noqa: F841 - read by DuckDB by its name
    span = {"curve": curve, "scenario": scenario, "lo": str(tried.min()), "hi": str(tried.max())} if len(tried) \
        else None
    con.execute("BEGIN TRANSACTION")
    try:
        if span is not None:
            old = con.sql("SELECT build_key, as_of FROM built_day WHERE curve = $curve AND scenario = $scenario "
                          "AND as_of BETWEEN $lo AND $hi AND as_of IN (SELECT as_of FROM days)",
                          params=span).to_arrow_table()
            if old.num_rows:
                _delete_builds(con, curve, scenario, old)
        n = len(built_days)
        if n:
            # keys rise with the date, so a day's rows sit together and in date order on disk
            keys = np.empty(n, dtype=np.int64)
            fresh = con.sql("SELECT nextval('build_key_seq') AS k FROM range($n)", params={"n": n}).to_arrow_table()
            keys[np.argsort(built_days, kind="stable")] = np.sort(fresh["k"].to_numpy())
            built = pa.table({  # noqa: F841 - read by DuckDB by its name
                "as_of": pa.array(built_days, pa.date32()),
                "quotes_as_of": pa.array(np.asarray(part.recorded_at)[ok].astype("datetime64[us]"), pa.timestamp("us")),
                "build_key": pa.array(keys),
            })
            consts = {"curve": curve, "scenario": scenario, "method": method, "version": version, "now": now}
            con.execute("INSERT INTO built_day (curve, scenario, as_of, method, code_version, built_at, quotes_as_of, "
                        "build_key) SELECT $curve, $scenario, as_of, $method, $version, $now, quotes_as_of, build_key "
                        "FROM built", consts)
            z = _zero_table(zeros, keys, built_days, quoted)  # noqa: F841 - read by DuckDB by its name
            con.execute("INSERT INTO zero_point SELECT * FROM z")
            f = _forward_table(fwd, keys, built_days)  # noqa: F841 - read by DuckDB by its name
            con.execute("INSERT INTO forward_point SELECT * FROM f")
            if params is not None and len(params):
                fits = pd.DataFrame({"curve": curve, "scenario": scenario,  # noqa: F841
                                     "as_of": built_days, "method": method, "params": list(params)})
                con.execute("INSERT INTO curve_fit SELECT curve, scenario, CAST(as_of AS DATE), method, params "
                            "FROM fits")
        if scenario == "official" and span is not None:
            con.execute(
                "UPDATE finding SET resolved_at = $now, resolution = 'rebuilt' WHERE curve = $curve "
                f"AND resolved_at IS NULL AND check_name IN ({', '.join(repr(x) for x in SHAPE_CHECKS)}) "
                "AND as_of BETWEEN $lo AND $hi AND as_of IN (SELECT as_of FROM days)",
                {"now": now, "curve": curve, "lo": span["lo"], "hi": span["hi"]})
            if shape is not None and len(shape):
                sh = pd.DataFrame({"curve": curve, "as_of": shape["as_of"].to_numpy(),  # noqa: F841
                                   "check_name": shape["check_name"].astype(str),
                                   "severity": shape["severity"].astype(str), "tenor": shape["tenor"].astype(object),
                                   "detail": shape["detail"].astype(str)})
                con.execute("INSERT INTO finding SELECT curve, CAST(as_of AS DATE), check_name, severity, tenor, "
                            "detail, ?, NULL, NULL, NULL FROM sh", [now])
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise
