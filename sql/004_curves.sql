-- Built curves and forward surfaces. Derived data: every row can be rebuilt from the quote history,
-- and each records the method and program version that produced it. `scenario` is 'official' for the
-- configured method and 'what-if:<method>' for `afterward build --method`.

-- one row per (curve, scenario, as_of): a built day
CREATE TABLE IF NOT EXISTS built_day (
    curve          VARCHAR NOT NULL,
    scenario       VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    method         VARCHAR NOT NULL,
    code_version   VARCHAR NOT NULL,
    built_at       TIMESTAMP NOT NULL,
    quotes_as_of   TIMESTAMP NOT NULL          -- the latest recorded_at of the quotes it was built from
);

-- one row per (curve, scenario, as_of, tenor)
CREATE TABLE IF NOT EXISTS zero_rate_built (
    curve          VARCHAR NOT NULL,
    scenario       VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    tenor          VARCHAR NOT NULL,
    tenor_months   INTEGER,
    quoted         BOOLEAN NOT NULL,           -- false: a forward tenor the curve does not quote
    maturity_date  DATE NOT NULL,
    year_fraction  DOUBLE NOT NULL,
    zero_rate      DOUBLE NOT NULL,
    zero_rate_cc   DOUBLE NOT NULL,
    discount_factor DOUBLE NOT NULL,
    method         VARCHAR NOT NULL,
    code_version   VARCHAR NOT NULL
);

-- one row per (curve, scenario, as_of, start_months, tenor_months)
CREATE TABLE IF NOT EXISTS forward_built (
    curve          VARCHAR NOT NULL,
    scenario       VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    start_months   INTEGER NOT NULL,
    tenor_months   INTEGER NOT NULL,
    start_date     DATE NOT NULL,
    end_date       DATE NOT NULL,
    forward_rate   DOUBLE NOT NULL,
    forward_rate_cc DOUBLE NOT NULL,
    method         VARCHAR NOT NULL,
    code_version   VARCHAR NOT NULL
);

-- one row per (curve, scenario, as_of) fitted by a parametric method: the fitted parameters
CREATE TABLE IF NOT EXISTS curve_fit (
    curve          VARCHAR NOT NULL,
    scenario       VARCHAR NOT NULL,
    as_of          DATE NOT NULL,
    method         VARCHAR NOT NULL,
    params         DOUBLE[] NOT NULL           -- nss: b0, b1, b2, b3, tau1, tau2 (decimals, years)
);

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
