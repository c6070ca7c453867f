"""The compare step: every contender forecast realised and scored against the forwards, on one footing.

Read (the forward outcomes, the model's risk-neutral yields, the what-if surfaces and the user's
forecast files) -> compute (:mod:`pipeline.contenders`: the built-in contenders, the others realised
by the forwards' own rule, scores, DM / Clark-West / GW tests, the Model Confidence Set, verdicts)
-> write (each curve's rows replaced in one transaction, :mod:`warehouse.contenders`).

The comparison is recomputed whole: the confidence set is a bootstrap over the whole common sample
of a cell and has no running form to fold new outcomes into, and a whole pass of a long record takes
seconds, not the daily job's fraction of one. So the daily job keeps a comparison current at the
pace the evidence moves: :func:`compare_due` names the curves compared before whose outcomes
reach into a month later than at their last comparison (a month has closed), whose model estimate,
what-if builds, user forecasts or settings changed, or whose last comparison was over a window.
A curve never compared is left to ``afterward compare`` (the demo runs it).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field

import duckdb
import numpy as np
import pandas as pd

from pipeline.config import Config, CurveConfig
from pipeline.contenders import (
    CONTENDER_OUTCOME_COLUMNS,
    attach_outcomes,
    builtin_contenders,
    compare,
    model_expected_forecasts,
    realize_forecasts,
)
from pipeline.contenders.confidence_set import MCS_REPS, MCS_SEED
from warehouse import audit as audit_store
from warehouse import contenders as store
from warehouse import outcomes as outcome_store
from warehouse.connect import transaction, writer_for
from warehouse.forecasts import current_forecasts
from warehouse.loads import utc_now

__all__ = ["CompareSummary", "compare_due", "run_compare"]


@dataclass
class CompareSummary:
    """Per curve: ``contenders`` compared, ``cells``, the stored frames (``scores``, ``tests``,
    ``confidence_set``, ``verdicts``), ``rows`` written per table, ``window`` and
    ``not_realised`` (per contender: forecasts with no outcome yet or off every stored tenor)."""

    curves: dict[str, dict] = field(default_factory=dict)


def _model_expected(con, c: CurveConfig, name: str, keys: pd.DataFrame) -> pd.DataFrame:  # noqa: ANN001
    """The ``model_expected`` forecasts of the forward cells ``keys`` (empty until the model has run)."""
    cells = keys[["start_months", "tenor_months"]].drop_duplicates()
    maturities = np.unique(np.concatenate([cells["start_months"].to_numpy(),
                                           (cells["start_months"] + cells["tenor_months"]).to_numpy()]))
    rn = store.risk_neutral_yields(con, name, [int(m) for m in maturities])
    return model_expected_forecasts(keys, rn, compounding=c.compounding, day_count=c.day_count,
                                    calendar=c.calendar)


def _realise_off_grid(con, c: CurveConfig, name: str, forecasts: pd.DataFrame) -> pd.DataFrame:  # noqa: ANN001
    """Realise forecasts that have no forward of the same key (off the grid, or on days without a
    build) by the forwards' rule, on the stored official zero rates of their tenors."""
    stored = {int(m) for (m,) in con.execute(
        "SELECT DISTINCT tenor_months FROM zero_point z JOIN built_day b ON b.build_key = z.build_key "
        "WHERE b.curve = ? AND b.scenario = 'official' AND z.tenor_months IS NOT NULL", [name]).fetchall()}
    usable = forecasts[forecasts["tenor_months"].isin(stored)]
    if usable.empty:
        return pd.DataFrame({k: [] for k in CONTENDER_OUTCOME_COLUMNS})
    observed = outcome_store.observed_days(con, name)["as_of"].to_numpy().astype("datetime64[D]")
    # zeros of every day from the first as-of on: a superset of the targets' observation days
    cand = usable.assign(start_date=usable["as_of"].to_numpy().astype("datetime64[D]"))
    zeros = outcome_store.zeros_for(con, name, cand)
    return realize_forecasts(usable, zeros, observed, c.calendar, c.tolerance_days)


def _digest(parts: list[object]) -> str:
    h = hashlib.sha256()
    for p in parts:
        if isinstance(p, pd.DataFrame):
            h.update(pd.util.hash_pandas_object(p, index=False).to_numpy().tobytes())
        else:
            h.update(repr(p).encode())
        h.update(b"\x1f")
    return h.hexdigest()[:32]


def _inputs_digest(con, c: CurveConfig, name: str, user: pd.DataFrame) -> str:  # noqa: ANN001
    """What a comparison rests on besides the forward outcomes, as one digest."""
    model = con.execute("SELECT max(computed_at) FROM model_estimate WHERE curve = ?", [name]).fetchall()[0][0]
    return _digest([c.premium_window_days, c.compare_min_history, c.tolerance_days, model,
                    store.what_if_stamp(con, name), user])


def _contender_outcomes(con, cfg: Config, name: str) -> tuple[pd.DataFrame, dict[str, int], pd.DataFrame]:  # noqa: ANN001
    """Every contender's realised forecasts of ``name`` (the ``contender_outcomes`` rows), the count of
    forecasts not realised per contender, and the user's forecasts as read."""
    c = cfg.curve(name)
    outcomes = audit_store.read_outcomes(con, name, None)
    parts = [builtin_contenders(outcomes, window=c.premium_window_days, min_history=c.compare_min_history)]
    keys = outcomes[["curve", "as_of", "start_months", "tenor_months"]]
    user = current_forecasts(con, name)
    found = [f for f in (_model_expected(con, c, name, keys), store.what_if_forecasts(con, name), user) if len(f)]
    not_realised: dict[str, int] = {}
    if found and len(outcomes):
        others = pd.concat(found, ignore_index=True)
        on_grid, rest = attach_outcomes(others, outcomes)
        parts.append(on_grid)
        if len(rest):
            # a model or what-if forecast without an outcome is a pending forward; a user forecast may be off grid
            user_rest = rest[~rest["contender"].isin(["model_expected"]) & ~rest["contender"].str.contains("@")]
            if len(user_rest):
                off = _realise_off_grid(con, c, name, user_rest)
                parts.append(off)
                user_rest = user_rest.merge(off[["contender", "as_of", "start_months", "tenor_months"]].assign(_r=1),
                                            how="left", on=["contender", "as_of", "start_months", "tenor_months"])
                user_rest = user_rest[user_rest["_r"].isna()]
            not_realised = {str(k): int(v) for k, v in user_rest.groupby("contender").size().items()}
    rows = pd.concat([p for p in parts if len(p)], ignore_index=True) if any(len(p) for p in parts) else parts[0]
    rows = rows.sort_values(["contender", "as_of", "start_months", "tenor_months"], kind="stable", ignore_index=True)
    return rows[list(CONTENDER_OUTCOME_COLUMNS)], not_realised, user


def _in_window(rows: pd.DataFrame, first: str | None, last: str | None) -> pd.DataFrame:
    keep = np.ones(len(rows), dtype=bool)
    as_of = rows["as_of"].to_numpy().astype("datetime64[D]")
    if first is not None:
        keep &= as_of >= np.datetime64(first, "D")
    if last is not None:
        keep &= as_of <= np.datetime64(last, "D")
    return rows[keep]


def run_compare(cfg: Config, curve: str | None = None, first: str | None = None, last: str | None = None, *,
                reps: int = MCS_REPS, seed: int = MCS_SEED,
                con: duckdb.DuckDBPyConnection | None = None) -> CompareSummary:
    """Realise, score, test and rank every contender of the chosen curves and store the results.

    ``first`` / ``last`` (ISO dates) narrow the as-of dates compared (the stored contender outcomes
    are always the whole record); ``reps`` and ``seed`` go to the Model Confidence Set's bootstrap
    (the defaults are the contract's: 1,000, seeded, so a rerun gives the same set).
    """
    from flows.build_step import code_version

    summary = CompareSummary()
    names = [curve] if curve else list(cfg.curves)
    with writer_for(cfg.store_path, con) as con:
        for name in names:
            c = cfg.curve(name)
            seen = audit_store.outcomes_seen(con, name)
            rows, not_realised, user = _contender_outcomes(con, cfg, name)
            comparison = compare(_in_window(rows, first, last), reps=reps, seed=seed)
            contenders = tuple(sorted(rows["contender"].unique())) if len(rows) else ()
            run = store.CompareRun(utc_now(), first, last, contenders, seen, store.observed_through(con, name),
                                   _inputs_digest(con, c, name, user), reps, seed, code_version())
            with transaction(con):
                written = store.replace_curve(con, name, rows, comparison, run)
            summary.curves[name] = {
                "contenders": contenders, "window": (first, last),
                "cells": int(comparison.verdicts.shape[0]), "rows": written, "not_realised": not_realised,
                "scores": comparison.scores, "tests": comparison.tests,
                "confidence_set": comparison.confidence_set, "verdicts": comparison.verdicts,
            }
    return summary


def compare_due(cfg: Config, *, con: duckdb.DuckDBPyConnection | None = None) -> list[str]:
    """The curves whose comparison the daily job recomputes (see the module notes): compared before,
    and since then a month has closed in their outcomes (the latest observed day is in a later month),
    their other inputs changed (model estimate, what-if builds, user forecasts, settings), or the
    last comparison was over a window."""
    due = []
    with writer_for(cfg.store_path, con) as con:
        for name, c in cfg.curves.items():
            last = store.last_run(con, name)
            if last is None:
                continue
            now_through = store.observed_through(con, name)
            month_closed = now_through is not None and (
                last.observed_through is None
                or np.datetime64(now_through, "M") > np.datetime64(last.observed_through, "M"))
            if (month_closed or last.first_as_of is not None or last.last_as_of is not None
                    or last.inputs_digest != _inputs_digest(con, c, name, current_forecasts(con, name))):
                due.append(name)
    return due
