"""The whole comparison of contenders in one call: scores, tests, confidence set and verdicts.

A step calls :func:`compare` with the ``contender_outcomes`` rows (built-ins from
:func:`pipeline.contenders.forecasts.builtin_contenders`, plus any user, model or what-if rows)
and stores the four frames. Each view's columns are the first ones of its frame, in the order the
contract lists them (:data:`VIEW_COLUMNS`); the extra columns after them (``h``, ``lags``, the
fixed-b and plain p-values) are for the report and the command line.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.contenders.cells import aligned_cells
from pipeline.contenders.comparisons import TEST_COLUMNS, TEST_EXTRA_COLUMNS, cell_tests
from pipeline.contenders.confidence_set import MCS_COLUMNS, MCS_REPS, MCS_SEED, MCS_SIZE, cell_confidence_set
from pipeline.contenders.scores import SCORE_COLUMNS, SCORE_EXTRA_COLUMNS, cell_scores
from pipeline.contenders.verdicts import verdicts

__all__ = ["VIEW_COLUMNS", "Comparison", "compare"]

VIEW_COLUMNS = {
    "contender_scores": SCORE_COLUMNS,
    "contender_tests": TEST_COLUMNS,
    "confidence_set": MCS_COLUMNS,
}
_INTS = ("start_months", "tenor_months", "n")


@dataclass(frozen=True)
class Comparison:
    """Frames of one comparison (see :func:`compare`)."""

    scores: pd.DataFrame
    tests: pd.DataFrame
    confidence_set: pd.DataFrame
    verdicts: pd.DataFrame


def _frame(rows: list[dict], columns: Sequence[str]) -> pd.DataFrame:
    out = pd.DataFrame(rows, columns=list(columns))
    for c in _INTS:
        if c in out.columns:
            out[c] = out[c].astype(np.int64)
    return out


def compare(contender_outcomes: pd.DataFrame, *, contenders: Sequence[str] | None = None,
            size: float = MCS_SIZE, reps: int = MCS_REPS, seed: int = MCS_SEED,
            labels: Mapping[str, str] | None = None, confidence_set: bool = True) -> Comparison:
    """Score, test and rank the contenders of every (curve, start, tenor) cell.

    ``contender_outcomes`` has the ``contender_outcomes`` view's columns (errors in bp, rates in
    decimals). Each cell is compared on the as-of dates every one of its contenders has an outcome
    (restrict them with ``contenders``). ``size``, ``reps`` and ``seed`` go to the Model Confidence
    Set (``confidence_set=False`` skips it, and the verdicts then say so); ``labels`` names user
    contenders in the verdicts. Loops over cells; everything within a cell is vectorised.
    """
    s_rows, t_rows, m_rows = [], [], []
    for cell in aligned_cells(contender_outcomes, contenders):
        s_rows += cell_scores(cell)
        t_rows += cell_tests(cell)
        if confidence_set:
            m_rows += cell_confidence_set(cell, size=size, reps=reps, seed=seed)
    scores = _frame(s_rows, SCORE_COLUMNS + SCORE_EXTRA_COLUMNS)
    tests = _frame(t_rows, TEST_COLUMNS + TEST_EXTRA_COLUMNS)
    mcs = _frame(m_rows, MCS_COLUMNS)
    return Comparison(scores, tests, mcs, verdicts(mcs, scores, labels, size))
