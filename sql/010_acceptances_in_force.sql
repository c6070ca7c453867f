-- Acceptances last until the day's quotes change (a re-check no longer reopens an accepted finding);
-- `findings` says of each open finding whether it is accepted; `loads` shows why a load was made
-- (a reprocess) or refused.

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

-- one row per load attempt; detail: why a file was refused, or that it was reprocessed on request
CREATE OR REPLACE VIEW loads AS
SELECT load_id, source_file, sha256, started_at, finished_at, rows_read, rows_accepted, rows_revised,
       rows_rejected, status, detail
FROM load_log;
