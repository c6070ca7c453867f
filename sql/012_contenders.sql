-- Forecast contenders: every forecast the team weighs, realised by the forwards' own rule and scored
-- on one footing. Derived data: `afterward compare` (and the daily job when a curve's outcomes
-- changed) replaces a curve's rows in every table below as a whole, in one transaction.

-- one row per (curve, contender, as_of, start_months, tenor_months): a realised contender forecast
CREATE TABLE IF NOT EXISTS contender_outcome (
    curve            VARCHAR NOT NULL,
    contender        VARCHAR NOT NULL,          -- forward | no_change | premium_adjusted | model_expected
                                                -- | forward@METHOD | a user name
    as_of            DATE NOT NULL,
    start_months     INTEGER NOT NULL,
    tenor_months     INTEGER NOT NULL,
    target_date      DATE NOT NULL,
    observed_on      DATE NOT NULL,
    forecast_rate    DOUBLE NOT NULL,           -- decimal, the curve's compounding and day count
    realized_rate    DOUBLE NOT NULL,
    error_bp         DOUBLE NOT NULL            -- (forecast_rate - realized_rate) * 1e4
);

-- one row per (curve, contender, start_months, tenor_months), on the cell's common sample
CREATE TABLE IF NOT EXISTS contender_score (
    curve            VARCHAR NOT NULL,
    contender        VARCHAR NOT NULL,
    start_months     INTEGER NOT NULL,
    tenor_months     INTEGER NOT NULL,
    n                INTEGER NOT NULL,
    n_effective      DOUBLE NOT NULL,           -- n / h: non-overlapping forecast periods
    mean_error_bp    DOUBLE,
    hac_t            DOUBLE,                    -- plain Newey-West t, max(h-1, 0) lags
    rmse_bp          DOUBLE,
    mae_bp           DOUBLE,
    rmse_ratio       DOUBLE,                    -- RMSE over that of no_change on the same days
    indicative       BOOLEAN NOT NULL,          -- n_effective < 10
    h                INTEGER NOT NULL,
    lags             INTEGER NOT NULL,
    hac_p_value      DOUBLE                     -- two-sided, overlap-aware fixed-b null
);

-- one row per (curve, start_months, tenor_months, contender_a, contender_b, test)
CREATE TABLE IF NOT EXISTS contender_test (
    curve            VARCHAR NOT NULL,
    start_months     INTEGER NOT NULL,
    tenor_months     INTEGER NOT NULL,
    contender_a      VARCHAR NOT NULL,
    contender_b      VARCHAR NOT NULL,
    test             VARCHAR NOT NULL,          -- dm | clark_west | gw
    statistic        DOUBLE,
    p_value          DOUBLE,                    -- dm, clark_west: fixed-b; gw: chi-square(2)
    n                INTEGER NOT NULL,
    p_value_plain    DOUBLE,                    -- dm, clark_west: the normal figure, kept beside
    n_effective      DOUBLE NOT NULL,
    indicative       BOOLEAN NOT NULL
);

-- one row per (curve, start_months, tenor_months, contender): the Model Confidence Set at 10 %
CREATE TABLE IF NOT EXISTS confidence_set_result (
    curve            VARCHAR NOT NULL,
    start_months     INTEGER NOT NULL,
    tenor_months     INTEGER NOT NULL,
    contender        VARCHAR NOT NULL,
    mcs_p_value      DOUBLE NOT NULL,
    included         BOOLEAN NOT NULL
);

-- one row per (curve, start_months, tenor_months): the plain-language line of the cell
CREATE TABLE IF NOT EXISTS contender_verdict (
    curve            VARCHAR NOT NULL,
    start_months     INTEGER NOT NULL,
    tenor_months     INTEGER NOT NULL,
    verdict          VARCHAR NOT NULL
);

-- one row per curve: the latest comparison's bookkeeping (what the daily job compares to decide
-- whether the comparison is due again)
CREATE TABLE IF NOT EXISTS compare_run (
    curve              VARCHAR NOT NULL,
    computed_at        TIMESTAMP NOT NULL,
    first_as_of        DATE,                    -- the window compared (NULL: the whole record)
    last_as_of         DATE,
    contenders         VARCHAR[] NOT NULL,
    outcomes_realized  TIMESTAMP,               -- latest realized_at of the forward outcomes used
    outcomes_superseded TIMESTAMP,              -- latest superseded_at
    outcomes_current   BIGINT NOT NULL,         -- count of current forward outcomes
    observed_through   DATE,                    -- latest observed_on of those outcomes (the daily job
                                                -- recomputes once a later month has closed)
    inputs_digest      VARCHAR NOT NULL,        -- what else the contenders rest on (model, what-if, user files)
    mcs_reps           INTEGER NOT NULL,
    mcs_seed           INTEGER NOT NULL,
    code_version       VARCHAR NOT NULL
);
