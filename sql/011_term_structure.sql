-- The term-structure lens: the month-end panel, excess returns, expectations-hypothesis regressions
-- and the model term premium of each curve. Derived data: `afterward model` (and the daily job when
-- a month closes) replaces a curve's rows as a whole, from its official built curves.

-- one row per (curve, as_of, maturity_months): month-end continuous zero rates at n/12 years
CREATE TABLE IF NOT EXISTS term_panel_point (
    curve            VARCHAR NOT NULL,
    as_of            DATE NOT NULL,
    maturity_months  INTEGER NOT NULL,
    zero_rate_cc     DOUBLE NOT NULL
);

-- one row per (curve, as_of, maturity_months, holding_months): log excess return, annualised,
-- dated at the month end it is realised
CREATE TABLE IF NOT EXISTS excess_return_point (
    curve            VARCHAR NOT NULL,
    as_of            DATE NOT NULL,
    maturity_months  INTEGER NOT NULL,
    holding_months   INTEGER NOT NULL,
    rx               DOUBLE NOT NULL
);

-- one row per (curve, test, maturity_months)
CREATE TABLE IF NOT EXISTS eh_regression_result (
    curve            VARCHAR NOT NULL,
    test             VARCHAR NOT NULL,          -- campbell_shiller | fama_bliss | cochrane_piazzesi
    maturity_months  INTEGER NOT NULL,
    coef             DOUBLE,
    se               DOUBLE,
    hac_t            DOUBLE,
    r2               DOUBLE,
    n                INTEGER NOT NULL,
    lags             INTEGER NOT NULL,
    first_as_of      DATE,
    last_as_of       DATE
);

-- one row per (curve, test): the plain-language verdict of each regression family
CREATE TABLE IF NOT EXISTS eh_verdict (
    curve            VARCHAR NOT NULL,
    test             VARCHAR NOT NULL,
    verdict          VARCHAR NOT NULL
);

-- one row per (curve, as_of, maturity_months, fit): continuous decimals a year
CREATE TABLE IF NOT EXISTS model_term_premium_point (
    curve              VARCHAR NOT NULL,
    as_of              DATE NOT NULL,
    maturity_months    INTEGER NOT NULL,
    fit                VARCHAR NOT NULL,        -- realtime | full
    model_yield        DOUBLE NOT NULL,
    risk_neutral_yield DOUBLE NOT NULL,
    term_premium       DOUBLE NOT NULL,
    estimated_through  DATE NOT NULL            -- the last month end the fit's data reach
);

-- one row per curve: the latest estimate's bookkeeping (what the daily job compares to decide
-- whether a month has closed since)
CREATE TABLE IF NOT EXISTS model_estimate (
    curve              VARCHAR NOT NULL,
    computed_at        TIMESTAMP NOT NULL,
    factors            INTEGER NOT NULL,
    max_months         INTEGER NOT NULL,        -- the panel's N (the setting, capped by the longest tenor)
    panel_through      DATE,                    -- the panel's last (closed) month end
    months             INTEGER NOT NULL,        -- month ends in the panel
    skipped_months     VARCHAR[] NOT NULL,      -- YYYY-MM of months with no built day
    realtime_fits      INTEGER NOT NULL,        -- month-end estimates made
    realtime_passed    VARCHAR[] NOT NULL,      -- "YYYY-MM-DD: reason" of those passed over
    full_problem       VARCHAR                  -- why the full-sample fit is not to be trusted, or NULL
);
