"""The executive summary's judgements: each horizon against no-change, the premium's sign and weight of
evidence, and how often the confidence set keeps each contender. Frames in, frames out; the words and
the page are :mod:`pipeline.report.html`'s.

Significance is judged at 5 % by the fixed-b p-values the audit stores (``dm_pvalue_fixed_b`` for the
comparison with no-change, ``hac_pvalue`` for the mean error), as the verdict lines judge it; a horizon
with fewer than :data:`pipeline.audit.INDICATIVE_BELOW` non-overlapping periods is indicative only.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipeline.audit import INDICATIVE_BELOW

__all__ = ["LEVEL", "confidence_counts", "horizon_verdicts"]

LEVEL = 0.05  # significance level of the summary's judgements


def horizon_verdicts(summary: pd.DataFrame) -> pd.DataFrame:
    """One row per horizon (start > 0) of the ``regime == 'all'`` audit rows, sorted by start, tenor.

    Columns: ``start_months, tenor_months, n, n_effective, rmse_ratio, mean_error_bp``, ``against``
    (``"better"``: the forwards' squared error is significantly below no-change's (DM statistic < 0,
    fixed-b p < 5 %); ``"worse"``: significantly above; ``"even"``: no significant difference;
    ``"untested"``: no p-value), ``premium`` (``"positive"`` forwards above what followed, significant;
    ``"negative"`` below, significant; ``"unclear"`` otherwise) and ``indicative`` (bool).
    """
    cols = ["start_months", "tenor_months", "n", "n_effective", "rmse_ratio", "mean_error_bp", "against", "premium",
            "indicative"]
    if summary is None or summary.empty:
        return pd.DataFrame(columns=cols)
    s = summary[(summary["regime"] == "all") & (summary["start_months"] > 0)] if "regime" in summary else summary
    s = s[s["start_months"] > 0].sort_values(["start_months", "tenor_months"]).reset_index(drop=True)

    def col(name: str) -> np.ndarray:
        return pd.to_numeric(s[name], errors="coerce").to_numpy(dtype=float) if name in s else np.full(len(s), np.nan)

    dm, p_dm = col("dm_stat"), col("dm_pvalue_fixed_b")
    mean, p_mean = col("mean_error_bp"), col("hac_pvalue")
    n_eff = col("n_effective")
    sig_dm = np.isfinite(p_dm) & (p_dm < LEVEL) & np.isfinite(dm)
    against = np.select([sig_dm & (dm < 0), sig_dm & (dm > 0), np.isfinite(p_dm)], ["better", "worse", "even"],
                        "untested")
    sig_mean = np.isfinite(p_mean) & (p_mean < LEVEL)
    premium = np.select([sig_mean & (mean > 0), sig_mean & (mean < 0)], ["positive", "negative"], "unclear")
    flag = s["indicative"].astype(object) if "indicative" in s else pd.Series(None, index=s.index, dtype=object)
    known = flag.notna().to_numpy()
    indicative = np.where(known, flag.where(known, False).astype(bool).to_numpy(),
                          np.isfinite(n_eff) & (n_eff < INDICATIVE_BELOW))
    return pd.DataFrame({"start_months": s["start_months"].astype(int).to_numpy(),
                         "tenor_months": s["tenor_months"].astype(int).to_numpy(),
                         "n": s["n"].to_numpy(), "n_effective": n_eff, "rmse_ratio": col("rmse_ratio"),
                         "mean_error_bp": mean, "against": against, "premium": premium,
                         "indicative": indicative.astype(bool)})


def confidence_counts(confidence_set: pd.DataFrame) -> tuple[pd.DataFrame, int]:
    """How often the confidence set keeps each contender over the horizons beyond 0M.

    Returns (``contender, kept, compared``: horizons where it is kept and where it was scored, most
    often kept first; the number of horizons compared).
    """
    if confidence_set is None or confidence_set.empty:
        return pd.DataFrame(columns=["contender", "kept", "compared"]), 0
    m = confidence_set[confidence_set["start_months"] > 0]
    cells = int(m[["start_months", "tenor_months"]].drop_duplicates().shape[0])
    out = (m.assign(kept=m["included"].astype(bool)).groupby("contender", sort=False)
           .agg(kept=("kept", "sum"), compared=("kept", "size")).reset_index()
           .sort_values(["kept", "contender"], ascending=[False, True]).reset_index(drop=True))
    out["kept"] = out["kept"].astype(int)
    return out, cells
