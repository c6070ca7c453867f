-- Overlap-honest inference in the audit: beside the plain HAC / Diebold-Mariano figures, the number of
-- non-overlapping forecast periods a cell holds, fixed-b p-values (pipeline/audit/fixed_b.py) and the
-- "indicative only" flag. Appended after the existing columns of the stored result.
ALTER TABLE audit_result ADD COLUMN IF NOT EXISTS n_effective DOUBLE;        -- n / h, h the overlap horizon
ALTER TABLE audit_result ADD COLUMN IF NOT EXISTS hac_pvalue DOUBLE;         -- two-sided fixed-b p of hac_t
ALTER TABLE audit_result ADD COLUMN IF NOT EXISTS dm_pvalue_fixed_b DOUBLE;  -- fixed-b p of dm_stat before HLN
ALTER TABLE audit_result ADD COLUMN IF NOT EXISTS indicative BOOLEAN;        -- n_effective < 10

-- Rows stored before this file: n_effective and indicative follow from the stored lag (h = lags + 1);
-- the p-values and the verdict lines need the audit's code, so the running state is forgotten (derived
-- data, see sql/006) and the next audit or daily refresh recomputes every curve from its record.
UPDATE audit_result SET n_effective = n / (lags + 1), indicative = n / (lags + 1) < 10 WHERE lags IS NOT NULL;
DELETE FROM audit_state_tail;
DELETE FROM audit_state_cell;
DELETE FROM audit_state_curve;
