-- Data-quality findings: row-level ones recorded by loads, curve-level ones by `afterward check`.
-- A finding is never deleted: a re-check or a restatement closes it (resolved_at) and records why.

-- one row per finding ever raised
CREATE TABLE IF NOT EXISTS finding (
    curve          VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    check_name     VARCHAR NOT NULL,
    severity       VARCHAR NOT NULL,          -- reject | warn | info
    tenor          VARCHAR,
    detail         VARCHAR NOT NULL,
    found_at       TIMESTAMP NOT NULL,
    load_id        BIGINT,                    -- set for findings raised while loading a file
    resolved_at    TIMESTAMP,
    resolution     VARCHAR
);

-- one row per (curve, run): how far curve-level checks have got
CREATE TABLE IF NOT EXISTS check_run (
    curve          VARCHAR NOT NULL,
    ran_at         TIMESTAMP NOT NULL,
    first_day      DATE,
    last_day       DATE,
    days_checked   INTEGER NOT NULL,
    findings       INTEGER NOT NULL,
    all_days       BOOLEAN NOT NULL
);

-- one row per override of a day's reject findings (afterward check --accept CURVE DAY)
CREATE TABLE IF NOT EXISTS acceptance (
    curve          VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    accepted_by    VARCHAR NOT NULL,
    accepted_at    TIMESTAMP NOT NULL,
    note           VARCHAR
);

-- one row per (curve, short_tenor, long_tenor, first_day): consecutive inverted observed days
CREATE TABLE IF NOT EXISTS inversion_episode (
    curve          VARCHAR NOT NULL,
    short_tenor    VARCHAR NOT NULL,
    long_tenor     VARCHAR NOT NULL,
    first_day      DATE NOT NULL,
    last_day       DATE NOT NULL,
    days           INTEGER NOT NULL,
    deepest_bp     DOUBLE NOT NULL
);

-- one row per open finding (not resolved)
CREATE OR REPLACE VIEW findings AS
SELECT curve, as_of, check_name, severity, tenor, detail
FROM finding
WHERE resolved_at IS NULL;

-- one row per open finding that still holds its day back or warns (accepted days excluded)
CREATE OR REPLACE VIEW open_findings AS
SELECT f.curve, f.as_of, f.check_name, f.severity, f.tenor, f.detail, f.found_at
FROM finding f
WHERE f.resolved_at IS NULL
  AND NOT EXISTS (SELECT 1 FROM acceptance a
                  WHERE a.curve = f.curve AND a.as_of = f.as_of AND a.accepted_at >= f.found_at);

-- one row per (curve, as_of) kept out of build by an open, unaccepted reject finding
CREATE OR REPLACE VIEW held_days AS
SELECT DISTINCT curve, as_of
FROM open_findings
WHERE severity = 'reject';

-- one row per (curve, short_tenor, long_tenor, first_day)
CREATE OR REPLACE VIEW inversion_episodes AS
SELECT curve, short_tenor, long_tenor, first_day, last_day, days, deepest_bp
FROM inversion_episode;
