-- The archive: every file received, every quote version it carried, every row it could not use.
-- Append-only: a restated quote adds a version and stamps the old one's superseded_at; nothing is deleted.

CREATE SEQUENCE IF NOT EXISTS load_id_seq START 1;

-- one row per attempt to load a file (a repeat of an already-loaded file adds none)
CREATE TABLE IF NOT EXISTS load_log (
    load_id        BIGINT PRIMARY KEY,
    source_file    VARCHAR NOT NULL,
    file_name      VARCHAR NOT NULL,
    sha256         VARCHAR NOT NULL,
    size_bytes     BIGINT NOT NULL,
    curve          VARCHAR,
    layout         VARCHAR,
    started_at     TIMESTAMP NOT NULL,
    finished_at    TIMESTAMP,
    rows_read      BIGINT NOT NULL DEFAULT 0,
    rows_accepted  BIGINT NOT NULL DEFAULT 0,
    rows_revised   BIGINT NOT NULL DEFAULT 0,
    rows_unchanged BIGINT NOT NULL DEFAULT 0,
    rows_rejected  BIGINT NOT NULL DEFAULT 0,
    status         VARCHAR NOT NULL,          -- loaded | refused
    detail         VARCHAR,                   -- why a file was refused
    validation     VARCHAR                    -- JSON: the row-level expectation results the rows took part in
);

-- one row per (curve, as_of, tenor, version): every value ever accepted
CREATE TABLE IF NOT EXISTS quote_version (
    curve          VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    tenor          VARCHAR NOT NULL,
    maturity_date  DATE NOT NULL,
    rate           DOUBLE NOT NULL,
    recorded_at    TIMESTAMP NOT NULL,
    superseded_at  TIMESTAMP,
    load_id        BIGINT NOT NULL,
    source_file    VARCHAR NOT NULL,
    line           INTEGER
);

-- one row per input row that did not enter the quote history (line 0: the file as a whole)
CREATE TABLE IF NOT EXISTS rejected_row (
    load_id        BIGINT NOT NULL,
    source_file    VARCHAR NOT NULL,
    line           INTEGER NOT NULL,
    raw            VARCHAR,
    reason         VARCHAR NOT NULL,
    check_name     VARCHAR NOT NULL            -- unparseable | out_of_range | duplicate | unknown_tenor | ...
);
