"""The term-structure lens: the month-end panel, excess returns, expectations-hypothesis
regressions and the Adrian-Crump-Moench model term premium, as pure functions of built curves.

What a step calls, per curve (each returns a frame with its view's columns)::

    panel = term_panel(curve_set, longest_tenor_months(cfg.tenors), max_months, name, calendar=cfg.calendar)
    panel.frame()                      -> term_panel
    excess_returns(panel)              -> excess_returns
    eh_regressions(panel)              -> eh_regressions   (+ cochrane_piazzesi_factor, eh_verdicts)
    model_term_premium(panel, factors) -> model_term_premium

``panel.skipped_months`` names the months with no built day (``panel.open_month`` a month not yet
closed); ``fit_acm(panel, factors).problem()`` and ``[f for f in realtime_fits(panel, factors) if
f.problem()]`` name estimates not to trust (the real-time rows skip those month ends).
``--full-sample-only`` is ``model_term_premium(panel, factors, fits=("full",))``.
:class:`ModelInputError` (a ``ValueError`` with a one-line message) is what a user's data or
settings can cause.
"""

from pipeline.term_structure.acm import (
    DEFAULT_FACTORS,
    DEFAULT_MAX_FIT_RMSE_BP,
    DEFAULT_MIN_MONTHS,
    MIN_MODEL_MONTHS,
    MODEL_COLUMNS,
    ACMFit,
    fit_acm,
    model_term_premium,
    realtime_fits,
)
from pipeline.term_structure.errors import ModelInputError
from pipeline.term_structure.panel import (
    DEFAULT_MAX_MONTHS,
    TERM_PANEL_COLUMNS,
    TermPanel,
    closed_month_ends,
    longest_tenor_months,
    term_panel,
    term_panel_from_yields,
)
from pipeline.term_structure.regressions import (
    CP_FACTOR_COLUMNS,
    EH_COLUMNS,
    EH_TESTS,
    cochrane_piazzesi_factor,
    eh_regressions,
    eh_verdicts,
)
from pipeline.term_structure.returns import EXCESS_RETURN_COLUMNS, excess_returns

__all__ = [
    "CP_FACTOR_COLUMNS",
    "DEFAULT_FACTORS",
    "DEFAULT_MAX_FIT_RMSE_BP",
    "DEFAULT_MAX_MONTHS",
    "DEFAULT_MIN_MONTHS",
    "EH_COLUMNS",
    "EH_TESTS",
    "EXCESS_RETURN_COLUMNS",
    "MIN_MODEL_MONTHS",
    "MODEL_COLUMNS",
    "TERM_PANEL_COLUMNS",
    "ACMFit",
    "ModelInputError",
    "TermPanel",
    "closed_month_ends",
    "cochrane_piazzesi_factor",
    "eh_regressions",
    "eh_verdicts",
    "excess_returns",
    "fit_acm",
    "longest_tenor_months",
    "model_term_premium",
    "realtime_fits",
    "term_panel",
    "term_panel_from_yields",
]
