"""A plain-language line per cell: which contenders the confidence set keeps, on how much evidence.

Example: ``"1Y rate 2Y ahead: the house view and the premium-adjusted forward are not beaten
(MCS 10 %); the raw forward is (MCS p = 0.03), and so is no change (MCS p = 0.01); n = 4,800,
about 19 non-overlapping periods"``, ending with ``"; indicative only (fewer than 10
non-overlapping periods)"`` when ``n / h < 10``. A statistical finding, not advice.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from pipeline.audit import INDICATIVE_BELOW

__all__ = ["VERDICT_COLUMNS", "cell_verdict", "contender_label", "verdicts"]

VERDICT_COLUMNS = ("curve", "start_months", "tenor_months", "verdict")
_LABELS = {
    "forward": "the raw forward",
    "no_change": "no change",
    "premium_adjusted": "the premium-adjusted forward",
    "model_expected": "the model's expected rate",
}


def _months(m: int) -> str:
    m = int(m)
    return f"{m // 12}Y" if m > 0 and m % 12 == 0 else f"{m}M"


def contender_label(name: str, labels: Mapping[str, str] | None = None) -> str:
    """Words for a contender: ``labels`` first, then the built-ins', ``forward@nss`` as "the forward
    built by nss", a user name as "the <name> view" (underscores as spaces)."""
    if labels and name in labels:
        return labels[name]
    if name in _LABELS:
        return _LABELS[name]
    if name.startswith("forward@"):
        return f"the forward built by {name.split('@', 1)[1]}"
    words = name.replace("_", " ")
    return f"the {words}" if words.endswith("view") else f"the {words} view"


def _p(p: float) -> str:
    return "p < 0.001" if p < 0.001 else f"p = {p:.2g}"


def _join(words: Sequence[str]) -> str:
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def cell_verdict(start_months: int, tenor_months: int, mcs: pd.DataFrame, n: int, n_effective: float,
                 labels: Mapping[str, str] | None = None, size: float = 0.10) -> str:
    """The line for one cell from its ``confidence_set`` rows (``contender, mcs_p_value, included``)."""
    ahead = f"{_months(start_months)} ahead" if start_months else "at the as-of date"
    what = f"{_months(tenor_months)} rate {ahead}"
    pct = f"{size * 100:g} %"
    if mcs.empty:
        body = "too few outcomes for a confidence set"
    else:
        kept = mcs[mcs["included"]]
        out = mcs[~mcs["included"]].sort_values("mcs_p_value", ascending=False)
        inn = [contender_label(c, labels) for c in kept["contender"]]
        body = f"{_join(inn)} {'is' if len(inn) == 1 else 'are'} not beaten (MCS {pct})"
        beaten = [f"{contender_label(c, labels)} {'is' if k == 0 else ''}".rstrip() + f" (MCS {_p(p)})"
                  for k, (c, p) in enumerate(zip(out["contender"], out["mcs_p_value"], strict=True))]
        if beaten:
            body += "; " + beaten[0] + "".join(f", and so is {b}" for b in beaten[1:])
    tail = f"; n = {int(n):,}, about {n_effective:,.0f} non-overlapping period{'s' if round(n_effective) != 1 else ''}"
    if n_effective < INDICATIVE_BELOW:
        tail += f"; indicative only (fewer than {INDICATIVE_BELOW:.0f} non-overlapping periods)"
    return f"{what}: {body}{tail}"


def verdicts(confidence_set: pd.DataFrame, scores: pd.DataFrame, labels: Mapping[str, str] | None = None,
             size: float = 0.10) -> pd.DataFrame:
    """One line per (curve, start, tenor) of ``scores`` (:data:`VERDICT_COLUMNS`)."""
    key = ["curve", "start_months", "tenor_months"]
    if scores.empty:
        return pd.DataFrame({c: [] for c in VERDICT_COLUMNS})
    by_cell = confidence_set.groupby(key).indices if not confidence_set.empty else {}
    rows = []
    for (curve, s, m), idx in scores.groupby(key, sort=True).indices.items():
        first = scores.iloc[idx[0]]
        sel = by_cell.get((curve, s, m))
        mcs = confidence_set.iloc[sel] if sel is not None else confidence_set.iloc[0:0]
        rows.append({"curve": curve, "start_months": int(s), "tenor_months": int(m),
                     "verdict": cell_verdict(s, m, mcs, int(first["n"]), float(first["n_effective"]), labels, size)})
    out = pd.DataFrame(rows, columns=list(VERDICT_COLUMNS))
    return out.astype({"start_months": np.int64, "tenor_months": np.int64})
