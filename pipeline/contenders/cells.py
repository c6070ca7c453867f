"""Cells of the comparison: each (curve, start, tenor) with its contenders on one common sample.

A cell's sample is the as-of dates on which *every* contender of the cell has an outcome, so each
figure of the cell (scores, tests, confidence set) compares like with like. A contender is in a
cell when it has at least one outcome there (restrict the set with ``contenders=``). The overlap
``h`` is :func:`pipeline.audit.overlap_horizon` of the common sample; the Newey-West lag is
``max(h - 1, 0)``, as in the audit.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from pipeline.audit import overlap_horizon
from pipeline.dates import as_days

__all__ = ["Cell", "aligned_cells", "contender_order"]

_BUILTIN_ORDER = ("forward", "premium_adjusted", "model_expected", "no_change")


@dataclass(frozen=True)
class Cell:
    """One (curve, start, tenor) cell on its common sample (n as-of dates, k contenders).

    ``errors`` (n, k) and ``forecasts`` (n, k) are bp and decimals; ``names`` the k contenders in
    :func:`contender_order`; dates ``datetime64[D]`` ascending by as-of date.
    """

    curve: str
    start_months: int
    tenor_months: int
    names: tuple[str, ...]
    as_of: np.ndarray
    target_date: np.ndarray
    observed_on: np.ndarray
    forecasts: np.ndarray
    realized: np.ndarray
    errors: np.ndarray
    h: int

    @property
    def n(self) -> int:
        return int(self.as_of.size)

    @property
    def lags(self) -> int:
        return max(self.h - 1, 0)

    @property
    def n_effective(self) -> float:
        return self.n / self.h

    def key(self) -> dict[str, object]:
        return {"curve": self.curve, "start_months": self.start_months, "tenor_months": self.tenor_months}


def contender_order(names: Sequence[str]) -> tuple[str, ...]:
    """Built-ins first (forward, premium_adjusted, model_expected, then what-if builds), user
    contenders alphabetically, ``no_change`` (the benchmark) last."""
    names = list(dict.fromkeys(names))
    head = [n for n in _BUILTIN_ORDER[:3] if n in names]
    whatif = sorted(n for n in names if n.startswith("forward@"))
    users = sorted(n for n in names if n not in _BUILTIN_ORDER and not n.startswith("forward@"))
    tail = ["no_change"] if "no_change" in names else []
    return tuple(head + whatif + users + tail)


def aligned_cells(contender_outcomes: pd.DataFrame, contenders: Sequence[str] | None = None) -> Iterator[Cell]:
    """Every cell of a ``contender_outcomes`` frame, sorted by (curve, start, tenor).

    Cells with fewer than two contenders, or no as-of date common to all of them, are skipped.
    Raises ``ValueError`` on a duplicate (curve, contender, as_of, start, tenor) key.
    """
    f = contender_outcomes
    if contenders is not None:
        f = f[f["contender"].isin(list(contenders))]
    if f.empty:
        return
    day = as_days(f["as_of"].to_numpy())
    target = as_days(f["target_date"].to_numpy())
    observed = as_days(f["observed_on"].to_numpy())
    fc = f["forecast_rate"].to_numpy(dtype=float)
    real = f["realized_rate"].to_numpy(dtype=float)
    err = f["error_bp"].to_numpy(dtype=float)
    who, labels = pd.factorize(f["contender"], sort=False)  # once: each cell then works on small integers
    labels = [str(x) for x in labels]
    for (curve, start, tenor), rows in sorted(f.groupby(["curve", "start_months", "tenor_months"]).indices.items()):
        present = np.unique(who[rows])
        names = contender_order([labels[c] for c in present])
        if len(names) < 2:
            continue
        lut = np.empty(len(labels), dtype=np.int64)
        lut[[labels.index(n) for n in names]] = np.arange(len(names))
        col = lut[who[rows]]
        days, inv = np.unique(day[rows], return_inverse=True)
        k = len(names)
        count = np.zeros((days.size, k), dtype=np.int64)
        np.add.at(count, (inv, col), 1)
        if (count > 1).any():
            raise ValueError(f"contender_outcomes has more than one row for a key in {curve} {start}x{tenor}")
        full = count.sum(axis=1) == k
        if not full.any():
            continue
        pos = np.cumsum(full) - 1  # row of each common day in the cell's arrays
        keep = full[inv]
        r, c, i = rows[keep], col[keep], pos[inv[keep]]
        n = int(full.sum())
        fmat = np.empty((n, k))
        emat = np.empty((n, k))
        fmat[i, c], emat[i, c] = fc[r], err[r]
        first = r[c == 0]
        first_i = i[c == 0]
        tgt = np.empty(n, dtype="datetime64[D]")
        obs = np.empty(n, dtype="datetime64[D]")
        rl = np.empty(n)
        tgt[first_i], obs[first_i], rl[first_i] = target[first], observed[first], real[first]
        a = days[full]
        yield Cell(str(curve), int(start), int(tenor), names, a, tgt, obs, fmat, rl, emat, overlap_horizon(a, tgt))
