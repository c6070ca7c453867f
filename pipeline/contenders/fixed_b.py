"""The overlap-aware fixed-b null, now :mod:`pipeline.audit.fixed_b`: the audit's own HAC t and
Diebold-Mariano p-values use it too, and the audit does not import the contenders. This name is
kept so that code written against it still imports."""

from pipeline.audit.fixed_b import (  # noqa: F401 - re-exported
    C_GRID,
    PROBS,
    TABLE_SEED,
    bartlett_ratio,
    critical_value,
    nw_t_rows,
    overlap_null_t,
    pvalue_one_sided,
    pvalue_two_sided,
    simulate_abs_t_quantiles,
)

__all__ = ["C_GRID", "PROBS", "TABLE_SEED", "bartlett_ratio", "critical_value", "nw_t_rows", "overlap_null_t",
           "pvalue_one_sided", "pvalue_two_sided", "simulate_abs_t_quantiles"]
