"""The invented demo market: thirty years of rate curves from the Republic of Orvane.

Everything here is fiction. Orvane is an island republic that does not exist; its currency is the
orv (code ``ORV``), its sovereign issuer is the Orvane National Treasury, and its swap market fixes
against the Orvane Harbour Rate, published by an imaginary panel of island banks. Two curves are
generated, one per business day of the Orvane calendar (Saturdays, Sundays and four fixed holidays),
from 1996-01-02 to 2025-12-31:

``govt``
    Treasury par yields: semiannual coupons, ACT/365F, tenors 1M-30Y, delivered in percent.
``swap``
    Harbour-rate swap zero rates: annual compounding, ACT/360, tenors 1W-30Y, delivered as decimals.

The modules:

* :mod:`~pipeline.demo.orvane`: the market's names, sample dates, calendar, curves and tenors;
* :mod:`~pipeline.demo.model`: the three-factor model, its parameters, the tightening episode and the
  term premium it builds into every forward (:func:`expected_forward_error_bp`);
* :mod:`~pipeline.demo.market`: the model simulated and priced into clean quotes (:func:`generate_market`);
* :mod:`~pipeline.demo.feed`: those quotes as the inbox's files, with planted defects (:func:`render_feed`);
* :mod:`~pipeline.demo.inbox`: the demo's config text and the files written to a folder
  (:func:`write_demo_inbox`).

Purity: every function returns frames, arrays or bytes, except :func:`write_demo_inbox`, the one
function that writes files (to the directory it is given).
"""

from __future__ import annotations

from pipeline.demo.feed import Defect, render_feed
from pipeline.demo.inbox import DemoManifest, demo_config_toml, write_demo_inbox
from pipeline.demo.market import DemoMarket, generate_market, par_yields
from pipeline.demo.model import (
    DEFAULT_PARAMS,
    DemoModel,
    Episode,
    ModelParams,
    expected_forward_error_bp,
    spread_premium,
    term_premium,
)
from pipeline.demo.orvane import (
    COUNTRY,
    CURRENCY,
    CURVES,
    DEFAULT_SEED,
    FIRST_DAY,
    GOVT_TENORS,
    HOLIDAY_YEARS,
    HOLIDAYS,
    ISSUER,
    LAST_DAY,
    RATE_PANEL,
    SWAP_TENORS,
    demo_calendar,
    demo_holidays,
)

__all__ = [
    "CURRENCY",
    "COUNTRY",
    "CURVES",
    "DEFAULT_PARAMS",
    "DEFAULT_SEED",
    "FIRST_DAY",
    "GOVT_TENORS",
    "HOLIDAYS",
    "HOLIDAY_YEARS",
    "ISSUER",
    "LAST_DAY",
    "RATE_PANEL",
    "SWAP_TENORS",
    "Defect",
    "DemoManifest",
    "DemoMarket",
    "DemoModel",
    "Episode",
    "ModelParams",
    "demo_calendar",
    "demo_config_toml",
    "demo_holidays",
    "expected_forward_error_bp",
    "generate_market",
    "par_yields",
    "render_feed",
    "spread_premium",
    "term_premium",
    "write_demo_inbox",
]
