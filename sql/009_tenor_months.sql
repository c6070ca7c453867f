-- A tenor's length as a number, so that `ORDER BY tenor_months` sorts tenors by maturity
-- (ON < TN < SN < 1W < 1M < 1Y < 10Y) where `ORDER BY tenor` sorts labels as text (10Y < 1M < 3M).
-- Month and year tenors: whole months (3M = 3, 10Y = 120). Day and week tenors: their nominal days
-- (ON = 1, TN = 2, SN = 3, nD = n, nW = 7n) in months of 365.25 / 12 = 30.4375 days (1W = 0.22998).
-- A sort key, not a pricing input: a curve's own maturities are in `maturity_date` and `year_fraction`.
-- The same numbers as pipeline.tenors.Tenor.sort_months. NULL for a label that is not canonical.

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

-- the views of 002 and 007, restated with tenor_months at the end (their other columns unchanged)

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

-- one row per (curve, as_of, tenor): the official zero curve at its quoted tenors
CREATE OR REPLACE VIEW zero_rates AS
SELECT curve, as_of, tenor, maturity_date, year_fraction, zero_rate, zero_rate_cc, discount_factor,
       tenor_in_months(tenor) AS tenor_months
FROM zero_rate_built
WHERE scenario = 'official' AND quoted;
