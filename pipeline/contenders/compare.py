"""The whole comparison of contenders in one call: scores, tests, confidence set and verdicts.

A step calls :func:`compare` with the ``contender_outcomes`` rows (built-ins from
:func:`pipeline.contenders.forecasts.builtin_contenders`, plus any user, model or what-if rows)
and stores the four frames. Each view's columns are the first ones of its frame, in the order the
contract lists them (:data:`VIEW_COLUMNS`); the extra columns after them (``h``, ``lags``, the
fixed-b and plain p-values) are for the report and the command line.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.contenders.cells import Cell, aligned_cells
from pipeline.contenders.comparisons import TEST_COLUMNS, TEST_EXTRA_COLUMNS, cell_tests
from pipeline.contenders.confidence_set import MCS_COLUMNS, MCS_REPS, MCS_SEED, MCS_SIZE, cell_confidence_set
from pipeline.contenders.scores import SCORE_COLUMNS, SCORE_EXTRA_COLUMNS, cell_scores
from pipeline.contenders.verdicts import verdicts

__all__ = ["THREAD_MIN_DAYS", "VIEW_COLUMNS", "Comparison", "compare", "default_workers"]

VIEW_COLUMNS = {
    "contender_scores": SCORE_COLUMNS,
    "contender_tests": TEST_COLUMNS,
    "confidence_set": MCS_COLUMNS,
}
_INTS = ("start_months", "tenor_months", "n")
# Below about 3,000 days a cell's bootstrap arrays are too small for NumPy to work long outside the
# GIL: two threads then run slower than one (measured: 0.7x at 1,000 days, 1.3x at 4,000, 1.7x at
# 8,000, 2 cores). Such cells run on the calling thread.
THREAD_MIN_DAYS = 3000


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


def default_workers() -> int:
    """Threads for the cells: the machine's cores, at most 4 (the cells' NumPy work, most of it the
    confidence set's bootstrap, runs outside the GIL, and four already leave little to gain)."""
    return max(1, min(os.cpu_count() or 1, 4))


def compare(contender_outcomes: pd.DataFrame, *, contenders: Sequence[str] | None = None,
            size: float = MCS_SIZE, reps: int = MCS_REPS, seed: int = MCS_SEED,
            labels: Mapping[str, str] | None = None, confidence_set: bool = True,
            workers: int | None = None) -> Comparison:
    """Score, test and rank the contenders of every (curve, start, tenor) cell.

    ``contender_outcomes`` has the ``contender_outcomes`` view's columns (errors in bp, rates in
    decimals). Each cell is compared on the as-of dates every one of its contenders has an outcome
    (restrict them with ``contenders``). ``size``, ``reps`` and ``seed`` go to the Model Confidence
    Set (``confidence_set=False`` skips it, and the verdicts then say so); ``labels`` names user
    contenders in the verdicts. Everything within a cell is vectorised; cells of at least
    :data:`THREAD_MIN_DAYS` days run on ``workers`` threads (default :func:`default_workers`), the
    rest on the calling thread. Each cell has its own bootstrap seed, so the result is the same,
    bit for bit, whatever the number of threads.
    """
    def one(cell: Cell) -> tuple[list[dict], list[dict], list[dict]]:
        mcs = cell_confidence_set(cell, size=size, reps=reps, seed=seed) if confidence_set else []
        return cell_scores(cell), cell_tests(cell), mcs

    cells = list(aligned_cells(contender_outcomes, contenders))
    big = [i for i, c in enumerate(cells) if c.n >= THREAD_MIN_DAYS]
    n_threads = min(default_workers() if workers is None else max(int(workers), 1), len(big))
    parts: list = [None] * len(cells)
    if n_threads > 1:
        with ThreadPoolExecutor(n_threads, thread_name_prefix="compare") as pool:
            for i, part in zip(big, pool.map(one, [cells[i] for i in big]), strict=True):
                parts[i] = part
    for i, cell in enumerate(cells):
        if parts[i] is None:
            parts[i] = one(cell)
    s_rows = [r for p in parts for r in p[0]]
    t_rows = [r for p in parts for r in p[1]]
    m_rows = [r for p in parts for r in p[2]]
    scores = _frame(s_rows, SCORE_COLUMNS + SCORE_EXTRA_COLUMNS)
    tests = _frame(t_rows, TEST_COLUMNS + TEST_EXTRA_COLUMNS)
    mcs = _frame(m_rows, MCS_COLUMNS)
    return Comparison(scores, tests, mcs, verdicts(mcs, scores, labels, size))
