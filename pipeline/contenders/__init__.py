"""Forecast contenders: the forwards scored against every forecast the team weighs, on one footing.

Pure computation (no store, no Prefect, no printing). The modules, in the order a step uses them:
:mod:`.forecasts` (built-in contenders and realising others), :mod:`.cells` (common samples),
:mod:`.scores`, :mod:`.comparisons` (DM-HLN, Clark-West, Giacomini-White), :mod:`.confidence_set`
(the MCS through ``arch``), :mod:`.verdicts`, and :mod:`.compare`, which runs them all. The
overlap-aware fixed-b null they use is :mod:`pipeline.audit.fixed_b`, shared with the audit.
"""

from pipeline.contenders.compare import VIEW_COLUMNS, Comparison, compare
from pipeline.contenders.forecasts import (
    CONTENDER_OUTCOME_COLUMNS,
    attach_outcomes,
    builtin_contenders,
    is_user_name,
    model_expected_forecasts,
    realize_forecasts,
    trailing_premium,
)

__all__ = [
    "CONTENDER_OUTCOME_COLUMNS",
    "VIEW_COLUMNS",
    "Comparison",
    "attach_outcomes",
    "builtin_contenders",
    "compare",
    "is_user_name",
    "model_expected_forecasts",
    "realize_forecasts",
    "trailing_premium",
]
