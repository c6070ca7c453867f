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

from pipeline.checks import curve_shape_checks
from pipeline.config import Config, CurveConfig
from pipeline.curves import build_curves
from pipeline.forwards import forward_surface, zero_rate_table
from warehouse.connect import writer
from warehouse.frames import read_frame, read_quote_panel
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


def run_build(cfg: Config, curve: str | None = None, first: object = None, last: object = None,
              rebuild: bool = False, method: str | None = None,
              on_progress: Callable[[str, int, int], None] | None = None) -> BuildSummary:
    """Build the chosen curves (all by default); ``on_progress(curve, done, total)`` reports days."""
    summary = BuildSummary()
    version = code_version()
    names = [curve] if curve else list(cfg.curves)
    with writer(cfg.store_path) as con:
        for name in names:
            c = cfg.curve(name)
            scenario = scenario_name(c, method)
            use = method or c.interpolation
            panel = read_quote_panel(con, name, list(c.tenor_labels), first, last)
            built = read_frame(con, "SELECT as_of, quotes_as_of FROM built_day WHERE curve = ? AND scenario = ?",
                               [name, scenario])
            held = read_frame(con, "SELECT as_of FROM held_days WHERE curve = ?", [name])
            held_days = held["as_of"].to_numpy().astype("datetime64[D]") if len(held) else np.array([], "M8[D]")
            is_held = np.isin(panel.as_of, held_days)
            stamp = pd.Series(built["quotes_as_of"].to_numpy().astype("datetime64[us]"),
                              index=built["as_of"].to_numpy().astype("datetime64[D]")) if len(built) else None
            if stamp is None or rebuild:
                todo = ~is_held
            else:
                prev = stamp.reindex(panel.as_of).to_numpy()
                todo = ~is_held & (np.isnat(prev) | (panel.recorded_at > prev))
            withdrawn = 0
            if len(held_days) and stamp is not None:
                gone = held_days[np.isin(held_days, stamp.index.to_numpy())]
                if len(gone):
                    withdrawn = len(gone)
                    frame = pd.DataFrame({"as_of": gone})  # noqa: F841
                    con.execute("BEGIN TRANSACTION")
                    for table in ("zero_rate_built", "forward_built", "built_day", "curve_fit"):
                        con.execute(f"DELETE FROM {table} WHERE curve = ? AND scenario = ? "
                                    "AND as_of IN (SELECT CAST(as_of AS DATE) FROM frame)", [name, scenario])
                    con.execute("COMMIT")
            days = np.flatnonzero(todo)
            total = len(days)
            info = {"days_built": 0, "forwards": 0, "failed": 0, "held": int(is_held.sum()),
                    "withdrawn": withdrawn, "scenario": scenario, "method": use, "reasons": {}}
            warm = _last_params(con, name, scenario) if use == "nss" else None
            zero_tenors = sorted(set(c.tenors) | set(c.forward_tenors))
            grid_times = _grid_times(max(t.approx_days for t in c.tenors) / 365.25)
            quoted = set(c.tenor_labels)
            for k in range(0, total, CHUNK_DAYS):
                sel = days[k:k + CHUNK_DAYS]
                part = panel.select(sel)
                cs = build_curves(part.as_of, panel.tenors, part.rates, c, method=use, warm_start=warm)
                ok = np.asarray(cs.ok, dtype=bool)
                for r in (cs.reason[i] for i in np.flatnonzero(~ok)):
                    info["reasons"][r] = info["reasons"].get(r, 0) + 1
                zeros = zero_rate_table(cs, zero_tenors, c)
                fwd = forward_surface(cs, c)
                shape = None
                if ok.any():
                    grid = np.tile(grid_times, (len(ok), 1))
                    shape = curve_shape_checks(cs.as_of[ok], grid[ok], _discount_in_blocks(cs, grid)[ok], c)
                params = cs.params[ok] if cs.params is not None else None
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


def _discount_in_blocks(cs, grid: np.ndarray) -> np.ndarray:  # noqa: ANN001
    """``cs.discount(grid)`` for a (days, K) grid, evaluated GRID_BLOCK columns at a time.

    The same numbers; but evaluating all 360 monthly points of 2,500 days at once made the curve
    methods' temporaries (days x points x nodes) so large that monotone convex ran 3-4x slower.
    """
    k = grid.shape[1]
    if k <= GRID_BLOCK:
        return cs.discount(grid)
    return np.concatenate([cs.discount(grid[:, j:j + GRID_BLOCK]) for j in range(0, k, GRID_BLOCK)], axis=1)


def _last_params(con, curve: str, scenario: str) -> np.ndarray | None:  # noqa: ANN001
    rows = con.execute("SELECT params FROM curve_fit WHERE curve = ? AND scenario = ? ORDER BY as_of DESC LIMIT 1",
                       [curve, scenario]).fetchall()
    return np.asarray(rows[0][0], dtype=float) if rows else None


def _write_chunk(con, curve: str, scenario: str, method: str, version: str, part, ok: np.ndarray,  # noqa: ANN001
                 zeros: pd.DataFrame, fwd: pd.DataFrame, shape: pd.DataFrame | None, params: np.ndarray | None,
                 quoted: set[str]) -> None:
    now = utc_now()
    # DuckDB reads these frames by their names; every day tried in the chunk loses its old build
    days = pd.DataFrame({"as_of": part.as_of})  # noqa: F841
    built = pd.DataFrame({  # noqa: F841 - read by DuckDB by its name
        "curve": curve, "scenario": scenario, "as_of": part.as_of[ok], "method": method, "code_version": version,
        "built_at": now, "quotes_as_of": part.recorded_at[ok],
    })
    z = zeros.assign(curve=curve, scenario=scenario, method=method, code_version=version,  # noqa: F841
                     quoted=zeros["tenor"].isin(quoted).to_numpy(),
                     tenor_months=zeros["tenor_months"].astype("Int64"))
    # forwards go in as Arrow columns of the table's own types, the per-chunk constants as parameters:
    # the million-row insert is the largest single cost of a long build
    f = pa.table({  # noqa: F841 - read by DuckDB by its name
        "as_of": pa.array(fwd["as_of"].to_numpy().astype("datetime64[D]"), pa.date32()),
        "start_months": pa.array(fwd["start_months"].to_numpy(), pa.int32()),
        "tenor_months": pa.array(fwd["tenor_months"].to_numpy(), pa.int32()),
        "start_date": pa.array(fwd["start_date"].to_numpy().astype("datetime64[D]"), pa.date32()),
        "end_date": pa.array(fwd["end_date"].to_numpy().astype("datetime64[D]"), pa.date32()),
        "forward_rate": pa.array(fwd["forward_rate"].to_numpy(dtype=float)),
        "forward_rate_cc": pa.array(fwd["forward_rate_cc"].to_numpy(dtype=float)),
    })
    con.execute("BEGIN TRANSACTION")
    try:
        for table in ("zero_rate_built", "forward_built", "built_day", "curve_fit"):
            con.execute(f"DELETE FROM {table} WHERE curve = ? AND scenario = ? "
                        "AND as_of IN (SELECT CAST(as_of AS DATE) FROM days)", [curve, scenario])
        con.execute("INSERT INTO built_day SELECT curve, scenario, CAST(as_of AS DATE), method, code_version, "
                    "built_at, quotes_as_of FROM built")
        con.execute(
            "INSERT INTO zero_rate_built SELECT curve, scenario, CAST(as_of AS DATE), tenor, tenor_months, quoted, "
            "CAST(maturity_date AS DATE), year_fraction, zero_rate, zero_rate_cc, discount_factor, method, "
            "code_version FROM z"
        )
        con.execute(
            "INSERT INTO forward_built SELECT $curve, $scenario, as_of, start_months, tenor_months, start_date, "
            "end_date, forward_rate, forward_rate_cc, $method, $version FROM f ORDER BY as_of, start_months, "
            "tenor_months", {"curve": curve, "scenario": scenario, "method": method, "version": version},
        )
        if params is not None and len(params):
            fits = pd.DataFrame({"curve": curve, "scenario": scenario,  # noqa: F841
                                 "as_of": part.as_of[ok], "method": method, "params": list(params)})
            con.execute("INSERT INTO curve_fit SELECT curve, scenario, CAST(as_of AS DATE), method, params FROM fits")
        if scenario == "official":
            con.execute(
                "UPDATE finding SET resolved_at = ?, resolution = 'rebuilt' WHERE curve = ? AND resolved_at IS NULL "
                f"AND check_name IN ({', '.join(repr(x) for x in SHAPE_CHECKS)}) "
                "AND as_of IN (SELECT CAST(as_of AS DATE) FROM days)", [now, curve])
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
