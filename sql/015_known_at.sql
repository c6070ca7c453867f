-- Reproducible audits: when a load's data was first available, and which program computed each audit.

-- when the file's data was first available (received or published), for history loaded later than it
-- was known (`afterward load --known-since TS`); NULL: the load time (started_at)
ALTER TABLE load_log ADD COLUMN known_since TIMESTAMP;

-- one row per audit of a curve stored (whole or incremental): when, how and by which program version
CREATE TABLE IF NOT EXISTS audit_run (
    curve          VARCHAR NOT NULL,
    computed_at    TIMESTAMP NOT NULL,
    mode           VARCHAR NOT NULL,           -- full | incremental
    code_version   VARCHAR NOT NULL
);
