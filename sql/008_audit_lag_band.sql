-- The audit state keeps the Bartlett cross moments for a band of Newey-West lags around the lag at
-- build time (pipeline/audit_state.py), so that a lag moving by one or two (the overlap horizon is a
-- median of counts and can flip between two integers from day to day) needs no recompute of the cell.
-- A row without the band (stored before this file) makes the next refresh recompute its curve in full.

-- the lags of the band, ascending (the current lag among them)
ALTER TABLE audit_state_cell ADD COLUMN IF NOT EXISTS lag_band BIGINT[];
-- the cross moments of each lag of the band, in its order: (lags x 11 x 11) flattened, row-major
ALTER TABLE audit_state_cell ADD COLUMN IF NOT EXISTS lag_cross DOUBLE[];
