-- The query surface: the current definition of every view and macro, in one place.
--
-- The numbered files beside this one are migrations: applied once each, in order, they change the
-- store's tables (and restate the views of their day, kept as history). This file is applied after
-- them whenever it changes (warehouse/schema.py keeps its checksum), so the definitions below are the
-- ones every store has. Each view's comment starts with its grain ("one row per ..."); column names
-- carry units (_bp, _date, _at, tenor_months). Rates are decimals; errors in basis points.

-- a tenor label as months, for sorting by maturity: whole months for M and Y; nominal days / 30.4375 for
-- ON (1), TN (2), SN (3), nD (n) and nW (7n)
CREATE OR REPLACE MACRO tenor_in_months(label) AS
    CASE
        WHEN label = 'ON' THEN CAST(1 AS DOUBLE) / 30.4375
        WHEN label = 'TN' THEN CAST(2 AS DOUBLE) / 30.4375
        WHEN label = 'SN' THEN CAST(3 AS DOUBLE) / 30.4375
        WHEN right(label, 1) = 'D' THEN TRY_CAST(left(label, length(label) - 1) AS DOUBLE) / 30.4375
        WHEN right(label, 1) = 'W' THEN 7 * TRY_CAST(left(label, length(label) - 1) AS DOUBLE) / 30.4375
        WHEN right(label, 1) = 'M' THEN TRY_CAST(left(label, length(label) - 1) AS DOUBLE)
        WHEN right(label, 1) = 'Y' THEN 12 * TRY_CAST(left(label, length(label) - 1) AS DOUBLE)
    END;

-- one row per (curve, as_of, tenor, version): every quote version ever loaded; superseded_at NULL while current
CREATE OR REPLACE VIEW quote_history AS
SELECT curve, as_of, tenor, maturity_date, rate, recorded_at, source_file, superseded_at,
       tenor_in_months(tenor) AS tenor_months
FROM quote_version;

-- one row per (curve, as_of, tenor): the latest version of each quote
CREATE OR REPLACE VIEW quotes AS
SELECT curve, as_of, tenor, maturity_date, rate, recorded_at, source_file,
       tenor_in_months(tenor) AS tenor_months
FROM quote_version
WHERE superseded_at IS NULL;

-- one row per (curve, as_of, tenor) known at timestamp ts: the quotes as they stood then
CREATE OR REPLACE MACRO quotes_as_of(ts) AS TABLE
SELECT curve, as_of, tenor, maturity_date, rate, recorded_at, source_file,
       tenor_in_months(tenor) AS tenor_months
FROM quote_version
WHERE recorded_at <= CAST(ts AS TIMESTAMP)
  AND (superseded_at IS NULL OR superseded_at > CAST(ts AS TIMESTAMP));

-- one row per load attempt; detail: why a file was refused, or that it was reprocessed on request
CREATE OR REPLACE VIEW loads AS
SELECT load_id, source_file, sha256, started_at, finished_at, rows_read, rows_accepted, rows_revised,
       rows_rejected, status, detail
FROM load_log;

-- one row per rejected input row (line 0 = the whole file could not be read)
CREATE OR REPLACE VIEW rejected_rows AS
SELECT load_id, source_file, line, raw, reason
FROM rejected_row;

-- one row per (curve, contender, as_of, start_months, tenor_months): the current version of each user
-- forecast (`afterward forecasts load`); forecast_rate decimal, a zero rate in the curve's own compounding
CREATE OR REPLACE VIEW forecasts AS
SELECT curve, contender, as_of, start_months, tenor_months, forecast_rate, recorded_at, source_file
FROM forecast_version
WHERE superseded_at IS NULL;

-- one row per (curve, contender, as_of, start_months, tenor_months, version): every user forecast ever
-- loaded; superseded_at NULL while current
CREATE OR REPLACE VIEW forecast_history AS
SELECT curve, contender, as_of, start_months, tenor_months, forecast_rate, recorded_at, superseded_at, source_file
FROM forecast_version;

-- one row per forecast-file load attempt; curve: the curves its rows went to; units NULL: each curve's own
CREATE OR REPLACE VIEW forecast_loads AS
SELECT load_id, contender, source_file, sha256, curve, units, started_at, finished_at, rows_read, rows_accepted,
       rows_revised, rows_rejected, status, detail
FROM forecast_load;

-- one row per rejected forecast-file row (line 0 = the whole file could not be read)
CREATE OR REPLACE VIEW forecast_rejected_rows AS
SELECT load_id, source_file, line, raw, reason, check_name
FROM forecast_rejected_row;

-- one row per acceptance still in force: no quote version of its day recorded after it was given
CREATE OR REPLACE VIEW acceptance_in_force AS
SELECT a.curve, a.as_of, a.accepted_by, a.accepted_at, a.note AS reason
FROM acceptance a
WHERE NOT EXISTS (SELECT 1 FROM quote_version q
                  WHERE q.curve = a.curve AND q.as_of = a.as_of AND q.recorded_at > a.accepted_at);

-- one row per unresolved finding; state: 'accepted' while an acceptance of its day is in force, else 'open'
CREATE OR REPLACE VIEW findings AS
SELECT f.curve, f.as_of, f.check_name, f.severity, f.tenor, f.detail,
       CASE WHEN EXISTS (SELECT 1 FROM acceptance_in_force a WHERE a.curve = f.curve AND a.as_of = f.as_of)
            THEN 'accepted' ELSE 'open' END AS state
FROM finding f
WHERE f.resolved_at IS NULL;

-- one row per open finding that still holds its day back or warns (days with an acceptance in force excluded)
CREATE OR REPLACE VIEW open_findings AS
SELECT f.curve, f.as_of, f.check_name, f.severity, f.tenor, f.detail, f.found_at
FROM finding f
WHERE f.resolved_at IS NULL
  AND NOT EXISTS (SELECT 1 FROM acceptance_in_force a WHERE a.curve = f.curve AND a.as_of = f.as_of);

-- one row per (curve, as_of) kept out of build by an open, unaccepted reject finding
CREATE OR REPLACE VIEW held_days AS
SELECT DISTINCT curve, as_of
FROM open_findings
WHERE severity = 'reject';

-- one row per (curve, short_tenor, long_tenor, first_day)
CREATE OR REPLACE VIEW inversion_episodes AS
SELECT curve, short_tenor, long_tenor, first_day, last_day, days, deepest_bp
FROM inversion_episode;

-- one row per (curve, scenario, as_of, start_months, tenor_months): every scenario's forward surface
CREATE OR REPLACE VIEW forward_built AS
SELECT b.curve, b.scenario, b.as_of, f.start_months, f.tenor_months, f.start_date, f.end_date, f.forward_rate,
       f.forward_rate_cc, b.method, b.code_version
FROM forward_point f JOIN built_day b ON b.build_key = f.build_key;

-- one row per (curve, scenario, as_of, tenor): every scenario's zero curve at its quoted and forward tenors
CREATE OR REPLACE VIEW zero_rate_built AS
SELECT b.curve, b.scenario, b.as_of, z.tenor, z.tenor_months, z.quoted, z.maturity_date, z.year_fraction,
       z.zero_rate, z.zero_rate_cc, z.discount_factor, b.method, b.code_version
FROM zero_point z JOIN built_day b ON b.build_key = z.build_key;

-- one row per (curve, as_of, tenor): the official zero curve at its quoted tenors
CREATE OR REPLACE VIEW zero_rates AS
SELECT curve, as_of, tenor, maturity_date, year_fraction, zero_rate, zero_rate_cc, discount_factor,
       tenor_in_months(tenor) AS tenor_months
FROM zero_rate_built
WHERE scenario = 'official' AND quoted;

-- one row per (curve, as_of, start_months, tenor_months): the official forward surface
CREATE OR REPLACE VIEW forwards AS
SELECT curve, as_of, start_months, tenor_months, start_date, end_date, forward_rate, forward_rate_cc
FROM forward_built
WHERE scenario = 'official';

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

-- one row per (curve, start_months, tenor_months, regime); after the contract's columns, the overlap-honest
-- ones: n_effective = n / h (non-overlapping forecast periods), hac_pvalue and dm_pvalue_fixed_b (fixed-b
-- p-values of hac_t and of the DM statistic before its HLN factor; dm_pvalue stays the plain figure) and
-- indicative (n_effective < 10)
CREATE OR REPLACE VIEW audit_summary AS
SELECT curve, start_months, tenor_months, regime, n, first_as_of, last_as_of, mean_error_bp, rmse_bp, mae_bp,
       hac_t, rw_rmse_bp, rmse_ratio, dm_stat, dm_pvalue, mz_alpha, mz_beta, mz_pvalue, fb_beta, fb_beta_se,
       fb_r2, hit_rate, n_effective, hac_pvalue, dm_pvalue_fixed_b, indicative
FROM audit_result;

-- one row per (curve, as_of, start_months, tenor_months)
CREATE OR REPLACE VIEW term_premium AS
SELECT curve, as_of, start_months, tenor_months, window_days, premium_bp, lower_bp, upper_bp
FROM term_premium_result;

-- one row per (curve, as_of, maturity_months): the month-end panel, continuous zero rates (decimal) at
-- exact n/12-year times on the curve's day count; as_of is the last built day of the month
CREATE OR REPLACE VIEW term_panel AS
SELECT curve, as_of, maturity_months, zero_rate_cc
FROM term_panel_point;

-- one row per (curve, as_of, maturity_months, holding_months): log excess holding-period return,
-- annualised (decimal), dated at the month end it is realised
CREATE OR REPLACE VIEW excess_returns AS
SELECT curve, as_of, maturity_months, holding_months, rx
FROM excess_return_point;

-- one row per (curve, test, maturity_months): campbell_shiller | fama_bliss | cochrane_piazzesi slope,
-- its Newey-West standard error and t, R^2, observations, lags and the regressor's first and last month end
CREATE OR REPLACE VIEW eh_regressions AS
SELECT curve, test, maturity_months, coef, se, hac_t, r2, n, lags, first_as_of, last_as_of
FROM eh_regression_result;

-- one row per (curve, as_of, maturity_months, fit): the model yield, the risk-neutral yield and the term
-- premium (model minus risk-neutral), continuous decimals a year; fit = realtime (the latest usable
-- estimate made with month ends up to estimated_through only) or full (every month end)
CREATE OR REPLACE VIEW model_term_premium AS
SELECT curve, as_of, maturity_months, fit, model_yield, risk_neutral_yield, term_premium, estimated_through
FROM model_term_premium_point;

-- one row per (curve, contender, as_of, start_months, tenor_months): every contender's realised
-- forecast of the zero rate for the tenor on the target date (decimals; error_bp in bp)
CREATE OR REPLACE VIEW contender_outcomes AS
SELECT curve, contender, as_of, start_months, tenor_months, target_date, observed_on, forecast_rate, realized_rate,
       error_bp
FROM contender_outcome;

-- one row per (curve, contender, start_months, tenor_months): scores on the cell's common sample;
-- n_effective = n / h, indicative when it is below 10
CREATE OR REPLACE VIEW contender_scores AS
SELECT curve, contender, start_months, tenor_months, n, n_effective, mean_error_bp, hac_t, rmse_bp, mae_bp,
       rmse_ratio, indicative
FROM contender_score;

-- one row per (curve, start_months, tenor_months, contender_a, contender_b, test): dm (HLN),
-- clark_west (one-sided, contender_a nested in contender_b) or gw (conditional, chi-square q = 2)
CREATE OR REPLACE VIEW contender_tests AS
SELECT curve, start_months, tenor_months, contender_a, contender_b, test, statistic, p_value, n
FROM contender_test;

-- one row per (curve, start_months, tenor_months, contender): Model Confidence Set p-value and
-- membership at 10 %
CREATE OR REPLACE VIEW confidence_set AS
SELECT curve, start_months, tenor_months, contender, mcs_p_value, included
FROM confidence_set_result;
