-- The running record: each forward scored against the rate realised on its target date.
-- Outcomes are kept: a restated day re-derives its outcomes and stamps the old ones superseded_at.

-- one row per (curve, as_of, start_months, tenor_months, version)
CREATE TABLE IF NOT EXISTS outcome (
    curve          VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    start_months   INTEGER NOT NULL,
    tenor_months   INTEGER NOT NULL,
    target_date    DATE NOT NULL,
    observed_on    DATE NOT NULL,
    forward_rate   DOUBLE NOT NULL,
    realized_rate  DOUBLE NOT NULL,
    spot_rate      DOUBLE NOT NULL,
    error_bp       DOUBLE NOT NULL,
    rw_error_bp    DOUBLE NOT NULL,
    realized_at    TIMESTAMP NOT NULL,
    superseded_at  TIMESTAMP
);

-- one row per (curve, start_months, tenor_months, regime) of the latest audit run
CREATE TABLE IF NOT EXISTS audit_result (
    curve VARCHAR NOT NULL, start_months INTEGER NOT NULL, tenor_months INTEGER NOT NULL,
    regime VARCHAR NOT NULL, n BIGINT NOT NULL, first_as_of DATE, last_as_of DATE,
    mean_error_bp DOUBLE, median_error_bp DOUBLE, std_error_bp DOUBLE, rmse_bp DOUBLE, mae_bp DOUBLE,
    hac_t DOUBLE, hac_se_bp DOUBLE, lags INTEGER, rw_rmse_bp DOUBLE, rmse_ratio DOUBLE,
    dm_stat DOUBLE, dm_pvalue DOUBLE, mz_alpha DOUBLE, mz_beta DOUBLE, mz_pvalue DOUBLE,
    fb_beta DOUBLE, fb_beta_se DOUBLE, fb_r2 DOUBLE, hit_rate DOUBLE,
    window_from DATE, window_to DATE,           -- the as-of window the figures cover (NULL: all)
    data_version TIMESTAMP,                     -- the latest realized_at of the outcomes used
    computed_at TIMESTAMP NOT NULL,
    verdict VARCHAR
);

-- one row per (curve, as_of, start_months, tenor_months) of the latest audit run
CREATE TABLE IF NOT EXISTS term_premium_result (
    curve VARCHAR NOT NULL, as_of DATE NOT NULL, start_months INTEGER NOT NULL, tenor_months INTEGER NOT NULL,
    window_days INTEGER NOT NULL, premium_bp DOUBLE, lower_bp DOUBLE, upper_bp DOUBLE
);

-- one row per (curve, as_of, start_months, tenor_months): the current outcome of each forward
CREATE OR REPLACE VIEW outcomes AS
SELECT curve, as_of, start_months, tenor_months, target_date, observed_on, forward_rate, realized_rate,
       spot_rate, error_bp, rw_error_bp
FROM outcome
WHERE superseded_at IS NULL;

-- one row per official forward that has no outcome yet (its target date not yet observed)
CREATE OR REPLACE VIEW pending_forwards AS
SELECT f.curve, f.as_of, f.start_months, f.tenor_months, f.start_date AS target_date
FROM forwards f
WHERE NOT EXISTS (SELECT 1 FROM outcome o
                  WHERE o.superseded_at IS NULL AND o.curve = f.curve AND o.as_of = f.as_of
                    AND o.start_months = f.start_months AND o.tenor_months = f.tenor_months);

-- one row per (curve, start_months, tenor_months, regime)
CREATE OR REPLACE VIEW audit_summary AS
SELECT curve, start_months, tenor_months, regime, n, first_as_of, last_as_of, mean_error_bp, rmse_bp, mae_bp,
       hac_t, rw_rmse_bp, rmse_ratio, dm_stat, dm_pvalue, mz_alpha, mz_beta, mz_pvalue, fb_beta, fb_beta_se,
       fb_r2, hit_rate
FROM audit_result;

-- one row per (curve, as_of, start_months, tenor_months)
CREATE OR REPLACE VIEW term_premium AS
SELECT curve, as_of, start_months, tenor_months, window_days, premium_bp, lower_bp, upper_bp
FROM term_premium_result;
