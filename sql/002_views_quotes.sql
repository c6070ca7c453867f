-- The stable query surface for the archive. Column names carry units; each view says its grain.

-- one row per (curve, as_of, tenor, version): every quote version ever loaded; superseded_at NULL while current
CREATE OR REPLACE VIEW quote_history AS
SELECT curve, as_of, tenor, maturity_date, rate, recorded_at, source_file, superseded_at
FROM quote_version;

-- one row per (curve, as_of, tenor): the latest version of each quote
CREATE OR REPLACE VIEW quotes AS
SELECT curve, as_of, tenor, maturity_date, rate, recorded_at, source_file
FROM quote_version
WHERE superseded_at IS NULL;

-- one row per (curve, as_of, tenor) known at timestamp ts: the quotes as they stood then
CREATE OR REPLACE MACRO quotes_as_of(ts) AS TABLE
SELECT curve, as_of, tenor, maturity_date, rate, recorded_at, source_file
FROM quote_version
WHERE recorded_at <= CAST(ts AS TIMESTAMP)
  AND (superseded_at IS NULL OR superseded_at > CAST(ts AS TIMESTAMP));

-- one row per load attempt
CREATE OR REPLACE VIEW loads AS
SELECT load_id, source_file, sha256, started_at, finished_at, rows_read, rows_accepted, rows_revised,
       rows_rejected, status
FROM load_log;

-- one row per rejected input row (line 0 = the whole file could not be read)
CREATE OR REPLACE VIEW rejected_rows AS
SELECT load_id, source_file, line, raw, reason
FROM rejected_row;
