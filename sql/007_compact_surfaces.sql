-- Built surfaces in narrow tables. A 50-year daily curve is about 1.2 million forward rows, and
-- writing a column costs about the same whatever it holds; so a forward row keeps only what varies
-- from row to row, and a built day's constants (curve, scenario, as_of, method, code version) live
-- once in built_day, which each row names by its build_key. The views answer with the columns and
-- values they always had; `forward_built` and `zero_rate_built` become views of the same shape as the
-- tables they replace, so queries written against those keep working.
--
-- A store from before this file is migrated: every built day gets a key, its rows move to the new
-- tables (rows that belong to no built day cannot be reached through the views and are dropped), and
-- the old tables are replaced by the views.

CREATE SEQUENCE IF NOT EXISTS build_key_seq START 1;

-- one key per built (curve, scenario, as_of); a rebuild gets a new key
ALTER TABLE built_day ADD COLUMN IF NOT EXISTS build_key BIGINT;
UPDATE built_day SET build_key = nextval('build_key_seq') WHERE build_key IS NULL;

-- one row per (build_key, start_months, tenor_months)
CREATE TABLE forward_point (
    build_key      BIGINT NOT NULL,
    start_months   INTEGER NOT NULL,
    tenor_months   INTEGER NOT NULL,
    start_date     DATE NOT NULL,
    end_date       DATE NOT NULL,
    forward_rate   DOUBLE NOT NULL,
    forward_rate_cc DOUBLE NOT NULL
);

-- one row per (build_key, tenor)
CREATE TABLE zero_point (
    build_key      BIGINT NOT NULL,
    tenor          VARCHAR NOT NULL,
    tenor_months   INTEGER,
    quoted         BOOLEAN NOT NULL,           -- false: a forward tenor the curve does not quote
    maturity_date  DATE NOT NULL,
    year_fraction  DOUBLE NOT NULL,
    zero_rate      DOUBLE NOT NULL,
    zero_rate_cc   DOUBLE NOT NULL,
    discount_factor DOUBLE NOT NULL
);

INSERT INTO forward_point
SELECT b.build_key, f.start_months, f.tenor_months, f.start_date, f.end_date, f.forward_rate, f.forward_rate_cc
FROM forward_built f JOIN built_day b USING (curve, scenario, as_of)
ORDER BY b.build_key, f.start_months, f.tenor_months;

INSERT INTO zero_point
SELECT b.build_key, z.tenor, z.tenor_months, z.quoted, z.maturity_date, z.year_fraction, z.zero_rate,
       z.zero_rate_cc, z.discount_factor
FROM zero_rate_built z JOIN built_day b USING (curve, scenario, as_of)
ORDER BY b.build_key, z.tenor_months, z.tenor;

DROP TABLE forward_built;
DROP TABLE zero_rate_built;

-- one row per (curve, scenario, as_of, start_months, tenor_months): every scenario's forward surface
CREATE VIEW forward_built AS
SELECT b.curve, b.scenario, b.as_of, f.start_months, f.tenor_months, f.start_date, f.end_date, f.forward_rate,
       f.forward_rate_cc, b.method, b.code_version
FROM forward_point f JOIN built_day b ON b.build_key = f.build_key;

-- one row per (curve, scenario, as_of, tenor): every scenario's zero curve at its quoted and forward tenors
CREATE VIEW zero_rate_built AS
SELECT b.curve, b.scenario, b.as_of, z.tenor, z.tenor_months, z.quoted, z.maturity_date, z.year_fraction,
       z.zero_rate, z.zero_rate_cc, z.discount_factor, b.method, b.code_version
FROM zero_point z JOIN built_day b ON b.build_key = z.build_key;

-- one row per (curve, as_of, tenor): the official zero curve at its quoted tenors
CREATE OR REPLACE VIEW zero_rates AS
SELECT curve, as_of, tenor, maturity_date, year_fraction, zero_rate, zero_rate_cc, discount_factor
FROM zero_rate_built
WHERE scenario = 'official' AND quoted;

-- one row per (curve, as_of, start_months, tenor_months): the official forward surface
CREATE OR REPLACE VIEW forwards AS
SELECT curve, as_of, start_months, tenor_months, start_date, end_date, forward_rate, forward_rate_cc
FROM forward_built
WHERE scenario = 'official';
