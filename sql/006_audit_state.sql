-- Running state of the forecast audit, so that the daily refresh folds in only the new outcomes
-- (flows/audit_step.py refresh_audit_incremental; the figures follow from pipeline/audit_state.py).
-- Derived data: dropping these tables only makes the next refresh recompute the audit in full.

-- one row per curve: what the stored state has seen of the outcome record
CREATE TABLE IF NOT EXISTS audit_state_curve (
    curve               VARCHAR NOT NULL,
    state_format        INTEGER NOT NULL,   -- layout of the cell state; another value means recompute
    window_days         INTEGER NOT NULL,   -- the term premium window the state was built for
    inversion_pair      VARCHAR NOT NULL,   -- the regime's tenor pair ('' when the curve has none)
    seen_realized_at    TIMESTAMP,          -- the latest realized_at of any outcome row seen
    seen_superseded_at  TIMESTAMP,          -- the latest superseded_at seen (NULL: none)
    n_current           BIGINT NOT NULL,    -- current outcomes covered
    data_version        TIMESTAMP,          -- the latest realized_at of the current outcomes covered
    updated_at          TIMESTAMP NOT NULL
);

-- one row per (curve, start_months, tenor_months, regime): sums, Bartlett cross moments, counts
CREATE TABLE IF NOT EXISTS audit_state_cell (
    curve VARCHAR NOT NULL, start_months INTEGER NOT NULL, tenor_months INTEGER NOT NULL,
    regime VARCHAR NOT NULL,
    n BIGINT NOT NULL, first_as_of DATE NOT NULL, last_as_of DATE NOT NULL,
    horizon INTEGER NOT NULL, lags INTEGER NOT NULL, premium_lags INTEGER NOT NULL,
    centre DOUBLE NOT NULL, centre_s DOUBLE NOT NULL, centre_v DOUBLE NOT NULL,
    centre_e DOUBLE NOT NULL, centre_d DOUBLE NOT NULL,
    sums DOUBLE[] NOT NULL, cross_moments DOUBLE[] NOT NULL,
    mean_e DOUBLE, m2_e DOUBLE, mean_v DOUBLE, m2_v DOUBLE, sum_e2 DOUBLE, sum_u2 DOUBLE, sum_v2 DOUBLE,
    sum_abs_e DOUBLE, min_e DOUBLE, max_e DOUBLE, min_f DOUBLE, max_f DOUBLE, min_s DOUBLE, max_s DOUBLE,
    n_moved BIGINT NOT NULL, n_hit BIGINT NOT NULL,
    hist_from INTEGER NOT NULL, hist BIGINT[] NOT NULL,  -- hist[i]: rows whose overlap count is final, = hist_from + i
    band DOUBLE[] NOT NULL, band_below BIGINT NOT NULL, band_above BIGINT NOT NULL  -- errors around the median
);

-- one row per (curve, start_months, tenor_months, regime, as_of): the last outcomes of each cell that
-- the next update needs (the last max(lag, window - 1) rows and every row whose target is still ahead)
CREATE TABLE IF NOT EXISTS audit_state_tail (
    curve VARCHAR NOT NULL, start_months INTEGER NOT NULL, tenor_months INTEGER NOT NULL,
    regime VARCHAR NOT NULL, as_of DATE NOT NULL, target_date DATE NOT NULL,
    forward_rate DOUBLE NOT NULL, realized_rate DOUBLE NOT NULL, spot_rate DOUBLE NOT NULL,
    error_bp DOUBLE NOT NULL, rw_error_bp DOUBLE NOT NULL
);
