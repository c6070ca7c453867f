"""The contender tables (``sql/012_contenders.sql``): realised contender forecasts, their scores,
pairwise tests, the confidence set, the verdict lines and each curve's ``compare_run`` row; and what
the compare step reads besides the forward outcomes: the model's risk-neutral yields and the what-if
surfaces.

Functions take an open connection; the caller owns the transaction (:func:`warehouse.connect.transaction`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline.contenders import Comparison
from warehouse.frames import append_frame, read_frame

__all__ = ["RESULT_TABLES", "CompareRun", "last_run", "observed_through", "read_results", "replace_curve",
           "risk_neutral_yields", "what_if_forecasts", "what_if_stamp"]

# table -> (frame attribute of Comparison, or "outcomes") in the order they are written
RESULT_TABLES = {
    "contender_outcome": "outcomes",
    "contender_score": "scores",
    "contender_test": "tests",
    "confidence_set_result": "confidence_set",
    "contender_verdict": "verdicts",
}
_DATES = ("as_of", "target_date", "observed_on")


@dataclass(frozen=True)
class CompareRun:
    """The ``compare_run`` row of a curve (see ``sql/012_contenders.sql``)."""

    computed_at: object
    first_as_of: object
    last_as_of: object
    contenders: tuple[str, ...]
    outcomes_seen: tuple  # (latest realized_at, latest superseded_at, current count) of the forward outcomes
    observed_through: object  # latest observed_on of those outcomes
    inputs_digest: str
    mcs_reps: int
    mcs_seed: int
    code_version: str


def risk_neutral_yields(con, curve: str, maturities: list[int]) -> pd.DataFrame:  # noqa: ANN001
    """The model's daily real-time risk-neutral yields of ``curve`` at ``maturities`` (months):
    ``as_of`` (datetime64[D]), ``maturity_months``, ``risk_neutral_yield`` (continuous decimals a
    year); empty when the model has not run."""
    wanted = sorted({int(m) for m in maturities if int(m) > 0})
    if not wanted:
        return pd.DataFrame({"as_of": [], "maturity_months": [], "risk_neutral_yield": []})
    frame = read_frame(
        con,
        f"""SELECT as_of, maturity_months, risk_neutral_yield FROM model_term_premium_point
            WHERE curve = ? AND fit = 'realtime' AND maturity_months IN ({', '.join(map(str, wanted))})""",
        [curve], date_as_object=False)
    frame["as_of"] = frame["as_of"].to_numpy().astype("datetime64[D]")
    return frame


def what_if_forecasts(con, curve: str) -> pd.DataFrame:  # noqa: ANN001
    """Every what-if surface of ``curve`` as forecasts (``FORECAST_COLUMNS``): contender
    ``forward@METHOD`` (the method the scenario was built with), the forward rate as the forecast."""
    frame = read_frame(
        con,
        """SELECT b.curve, 'forward@' || b.method AS contender, b.as_of, f.start_months, f.tenor_months,
                  f.forward_rate AS forecast_rate
           FROM forward_point f JOIN built_day b ON b.build_key = f.build_key
           WHERE b.curve = ? AND b.scenario <> 'official'
           ORDER BY contender, b.as_of, f.start_months, f.tenor_months""",
        [curve], date_as_object=False)
    frame["as_of"] = frame["as_of"].to_numpy().astype("datetime64[D]")
    for c in ("start_months", "tenor_months"):
        frame[c] = frame[c].astype(np.int64)
    return frame


def what_if_stamp(con, curve: str) -> tuple:  # noqa: ANN001
    """(days, latest built_at) of the curve's what-if builds: what a comparison's what-if rows rest on."""
    row = con.execute("SELECT count(*), max(built_at) FROM built_day WHERE curve = ? AND scenario <> 'official'",
                      [curve]).fetchall()[0]
    return int(row[0]), row[1]


def _arrow(frame: pd.DataFrame, columns: list[str]) -> pa.Table:
    out = pa.Table.from_pandas(frame[columns], preserve_index=False)
    for name in _DATES:
        if name in columns:
            i = out.schema.get_field_index(name)
            out = out.set_column(i, name, out[name].cast(pa.timestamp("s")).cast(pa.date32()))
    return out


def _columns(con, table: str) -> list[str]:  # noqa: ANN001
    return [r[0] for r in con.execute(f"DESCRIBE {table}").fetchall()]


def replace_curve(con, curve: str, outcomes: pd.DataFrame, comparison: Comparison,  # noqa: ANN001
                  run: CompareRun) -> dict[str, int]:
    """Replace ``curve``'s rows in every contender table and its ``compare_run`` row, in the caller's
    transaction. ``outcomes`` has the ``contender_outcomes`` view's columns; ``comparison`` the frames of
    :func:`pipeline.contenders.compare`. Returns the rows written per table."""
    written = {}
    for table, attr in RESULT_TABLES.items():
        con.execute(f"DELETE FROM {table} WHERE curve = ?", [curve])
        frame = outcomes if attr == "outcomes" else getattr(comparison, attr)
        cols = _columns(con, table)
        written[table] = append_frame(con, table, _arrow(frame, cols), cols)
    con.execute("DELETE FROM compare_run WHERE curve = ?", [curve])
    seen = run.outcomes_seen
    con.execute("INSERT INTO compare_run VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [curve, run.computed_at, run.first_as_of, run.last_as_of, list(run.contenders), seen[0], seen[1],
                 int(seen[2] or 0), run.observed_through, run.inputs_digest, run.mcs_reps, run.mcs_seed,
                 run.code_version])
    return written


def last_run(con, curve: str) -> CompareRun | None:  # noqa: ANN001
    """The curve's ``compare_run`` row, or None when it was never compared."""
    rows = con.execute("SELECT computed_at, first_as_of, last_as_of, contenders, outcomes_realized, "
                       "outcomes_superseded, outcomes_current, observed_through, inputs_digest, mcs_reps, mcs_seed, "
                       "code_version FROM compare_run WHERE curve = ?", [curve]).fetchall()
    if not rows:
        return None
    r = rows[0]
    return CompareRun(r[0], r[1], r[2], tuple(r[3]), (r[4], r[5], int(r[6])), r[7], r[8], int(r[9]), int(r[10]),
                      r[11])


def observed_through(con, curve: str) -> object:  # noqa: ANN001
    """The latest ``observed_on`` of the curve's current forward outcomes (None without any)."""
    return con.execute("SELECT max(observed_on) FROM outcome WHERE curve = ? AND superseded_at IS NULL",
                       [curve]).fetchall()[0][0]


def read_results(con, curve: str) -> dict[str, pd.DataFrame]:  # noqa: ANN001
    """The curve's stored comparison: ``scores``, ``tests``, ``confidence_set`` and ``verdicts`` frames
    (every stored column), sorted by their keys."""
    keys = {
        "scores": ("contender_score", "start_months, tenor_months, contender"),
        "tests": ("contender_test", "start_months, tenor_months, contender_a, contender_b, test"),
        "confidence_set": ("confidence_set_result", "start_months, tenor_months, contender"),
        "verdicts": ("contender_verdict", "start_months, tenor_months"),
    }
    return {name: read_frame(con, f"SELECT * FROM {table} WHERE curve = ? ORDER BY {order}", [curve])
            for name, (table, order) in keys.items()}

