-- User forecast contenders (`afterward forecasts load`): every forecast file received, every forecast
-- version it carried, every row it could not use. Kept apart from the quote archive (load_log,
-- quote_version, rejected_row): see warehouse/forecasts.py for why. Append-only: a restated forecast
-- adds a version and stamps the old one's superseded_at; nothing is deleted.

-- one row per attempt to load a forecast file (a repeat of an already-loaded file adds none)
CREATE TABLE IF NOT EXISTS forecast_load (
    load_id        BIGINT PRIMARY KEY,
    contender      VARCHAR NOT NULL,           -- the user's name for the forecast ([a-z][a-z0-9_]*)
    source_file    VARCHAR NOT NULL,
    file_name      VARCHAR NOT NULL,
    sha256         VARCHAR NOT NULL,
    size_bytes     BIGINT NOT NULL,
    curve          VARCHAR,                    -- the curves its rows went to, comma-separated (lineage)
    units          VARCHAR,                    -- --units as given; NULL: each curve's own units
    started_at     TIMESTAMP NOT NULL,
    finished_at    TIMESTAMP,
    rows_read      BIGINT NOT NULL DEFAULT 0,
    rows_accepted  BIGINT NOT NULL DEFAULT 0,
    rows_revised   BIGINT NOT NULL DEFAULT 0,
    rows_unchanged BIGINT NOT NULL DEFAULT 0,
    rows_rejected  BIGINT NOT NULL DEFAULT 0,
    status         VARCHAR NOT NULL,           -- loaded | refused
    detail         VARCHAR                     -- why a file was refused
);

-- one row per (curve, contender, as_of, start_months, tenor_months, version): every forecast accepted;
-- forecast_rate decimal, a zero rate in the curve's own compounding and day count
CREATE TABLE IF NOT EXISTS forecast_version (
    curve          VARCHAR NOT NULL,
    contender      VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    start_months   INTEGER NOT NULL,
    tenor_months   INTEGER NOT NULL,
    forecast_rate  DOUBLE NOT NULL,
    recorded_at    TIMESTAMP NOT NULL,
    superseded_at  TIMESTAMP,
    load_id        BIGINT NOT NULL,
    source_file    VARCHAR NOT NULL,
    line           INTEGER
);

-- one row per input row of a forecast file that did not enter the store (line 0: the file as a whole)
CREATE TABLE IF NOT EXISTS forecast_rejected_row (
    load_id        BIGINT NOT NULL,
    source_file    VARCHAR NOT NULL,
    line           INTEGER NOT NULL,
    raw            VARCHAR,
    reason         VARCHAR NOT NULL,
    check_name     VARCHAR NOT NULL            -- unparseable | out_of_range | duplicate | unknown_curve | unreadable
);
