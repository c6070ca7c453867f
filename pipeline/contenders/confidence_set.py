"""The Model Confidence Set of a cell (Hansen, Lunde and Nason 2011): the ``confidence_set`` view.

Computed by :class:`arch.bootstrap.MCS` (not by hand) on squared errors (bp^2) of the cell's common
sample: the range statistic (``method="R"``), a circular block bootstrap with block length ``h``
(the overlap: a block keeps one forecast period's dependence whole), 1,000 replications, size 10 %.
The seed is fixed per cell (a CRC-32 of its key plus ``seed``), so a rerun gives the same set and
the same p-values. A contender is ``included`` ("not beaten") when its MCS p-value exceeds the size.

Contenders whose forecasts are the same on every day (start 0: forward, spot and premium-adjusted
forward coincide) share one column in the bootstrap and take its p-value: the MCS cannot separate
identical losses (their bootstrap variance is zero). A cell whose distinct contenders reduce to
one includes it with p-value 1. A cell with ``h >= n`` or fewer than 8 days has no rows.
"""

from __future__ import annotations

import zlib

import numpy as np

from pipeline.audit import MIN_OBS, TIE
from pipeline.contenders.cells import Cell

__all__ = ["MCS_COLUMNS", "MCS_REPS", "MCS_SIZE", "MCS_SEED", "cell_confidence_set", "cell_seed"]

MCS_COLUMNS = ("curve", "start_months", "tenor_months", "contender", "mcs_p_value", "included")
MCS_SIZE = 0.10
MCS_REPS = 1000
MCS_SEED = 17


def cell_seed(cell: Cell, seed: int = MCS_SEED) -> int:
    """The cell's bootstrap seed: stable across runs and machines (no Python ``hash``)."""
    return (zlib.crc32(f"{cell.curve}|{cell.start_months}|{cell.tenor_months}".encode()) + int(seed)) % 2**32


def _distinct(forecasts: np.ndarray) -> np.ndarray:
    """For each column, the index of the first column with the same forecasts (within TIE)."""
    k = forecasts.shape[1]
    rep = np.arange(k)
    for j in range(1, k):  # k <= a handful of contenders
        for i in range(j):
            if rep[i] == i and np.max(np.abs(forecasts[:, j] - forecasts[:, i])) <= TIE:
                rep[j] = i
                break
    return rep


def cell_confidence_set(cell: Cell, *, size: float = MCS_SIZE, reps: int = MCS_REPS,
                        seed: int = MCS_SEED) -> list[dict[str, object]]:
    """One row per contender of ``cell`` (:data:`MCS_COLUMNS`), or none if the sample is too short."""
    if cell.n < MIN_OBS or cell.h >= cell.n:
        return []
    rep = _distinct(cell.forecasts)
    uniq = np.unique(rep)
    pvals = np.ones(len(cell.names))
    if uniq.size > 1:
        from arch.bootstrap import MCS  # imported here: only the comparison needs arch

        losses = cell.errors[:, uniq] ** 2
        mcs = MCS(losses, size=size, reps=reps, block_size=cell.h, method="R", bootstrap="circular",
                  seed=cell_seed(cell, seed))
        mcs.compute()
        p = mcs.pvalues["Pvalue"]
        by_col = {int(c): float(v) for c, v in zip(p.index, p.to_numpy(), strict=True)}
        pvals = np.array([by_col[int(np.flatnonzero(uniq == rep[j])[0])] for j in range(len(cell.names))])
    return [{**cell.key(), "contender": name, "mcs_p_value": float(pvals[j]), "included": bool(pvals[j] > size)}
            for j, name in enumerate(cell.names)]
