"""The build step: zero curves and forward surfaces for the days not yet built.

A day is (re)built when it has quotes and no build, or its quotes changed after its build, unless an
open reject finding holds it back; a held day's earlier build is withdrawn. Days are built many at a
time (:func:`pipeline.surfaces.compute_days`, arrays of days x tenors) and each chunk of days is
written in one transaction, so no day is ever half built. ``method`` other than the configured one
writes a what-if scenario beside the official surface, never over it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import duckdb

from pipeline.config import Config, CurveConfig
from pipeline.surfaces import compute_days
from warehouse import builds
from warehouse.connect import transaction, writer_for
from warehouse.loads import utc_now

__all__ = ["CHUNK_DAYS", "BuildSummary", "code_version", "run_build", "scenario_name"]

CHUNK_DAYS = 2500


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


def run_build(cfg: Config, curve: str | None = None, first: object = None, last: object = None,
              rebuild: bool = False, method: str | None = None,
              on_progress: Callable[[str, int, int], None] | None = None, *,
              con: duckdb.DuckDBPyConnection | None = None) -> BuildSummary:
    """Build the chosen curves (all by default); ``on_progress(curve, done, total)`` reports days.
    ``con``: the store to use (default: open one for the call).

    Which days are due is decided in the store (one aggregate over the curve's current quotes joined
    with its built days), and only those days' quotes are read: a daily run that adds one day reads
    one day, whatever the length of the history.
    """
    summary = BuildSummary()
    version = code_version()
    names = [curve] if curve else list(cfg.curves)
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            c = cfg.curve(name)
            scenario = scenario_name(c, method)
            use = method or c.interpolation
            due, n_held = builds.due_days(con, name, scenario, first, last, rebuild)
            with transaction(con):
                withdrawn = builds.withdraw_held(con, name, scenario)
            total = due.num_rows
            info = {"days_built": 0, "forwards": 0, "failed": 0, "held": n_held,
                    "withdrawn": withdrawn, "scenario": scenario, "method": use, "reasons": {}}
            panel = builds.read_due_quotes(con, name, list(c.tenor_labels), due)
            warm = builds.last_params(con, name, scenario) if use == "nss" else None
            quoted = set(c.tenor_labels)
            for k in range(0, total, CHUNK_DAYS):
                part = panel.select(slice(k, k + CHUNK_DAYS))
                built = compute_days(part.as_of, panel.tenors, part.rates, c, use, warm)
                for r, n in built.reasons.items():
                    info["reasons"][r] = info["reasons"].get(r, 0) + n
                if built.params is not None and len(built.params):
                    warm = built.params[-1]
                with transaction(con):
                    builds.write_built(con, name, scenario, use, version, part.as_of, part.recorded_at, built.ok,
                                       built.zeros, built.forwards, built.shape, built.params, quoted, utc_now())
                info["days_built"] += int(built.ok.sum())
                info["failed"] += int((~built.ok).sum())
                info["forwards"] += len(built.forwards)
                if on_progress is not None:
                    on_progress(name, min(k + CHUNK_DAYS, total), total)
            summary.curves[name] = info
    return summary
