"""The forecast audit: statistics of each forward against the rate realised on its target date.

* :mod:`pipeline.audit.statistics`: the reference computation over a whole record (``summarize``,
  ``term_premium``, ``verdict``);
* :mod:`pipeline.audit.hac`: the Newey-West / Diebold-Mariano kernels on plain arrays;
* :mod:`pipeline.audit.fixed_b`: the overlap-aware fixed-b null of those t statistics;
* :mod:`pipeline.audit.state`: a cell's running state, built once and appended to;
* :mod:`pipeline.audit.refresh`: the whole-record audit and the incremental fold, on frames.
"""

from pipeline.audit.statistics import (
    INDICATIVE_BELOW,
    MIN_OBS,
    OVERLAP_COLUMNS,
    SUMMARY_COLUMNS,
    TERM_PREMIUM_COLUMNS,
    TIE,
    interval_half_width,
    overlap_horizon,
    overlap_inference,
    premium_band_critical,
    summarize,
    term_premium,
    verdict,
)

__all__ = ["INDICATIVE_BELOW", "MIN_OBS", "OVERLAP_COLUMNS", "SUMMARY_COLUMNS", "TERM_PREMIUM_COLUMNS", "TIE",
           "interval_half_width", "overlap_horizon", "overlap_inference", "premium_band_critical", "summarize",
           "term_premium", "verdict"]
