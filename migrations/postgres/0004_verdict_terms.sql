-- Verdicts a client engineer can sign: curve approval, clause terms for moisture,
-- plausibility and rounding, and re-sampling of quality-index lots.

-- A curve with a quality concern needs a QC manager's written approval before it
-- can be a lot's reference: 'not_needed', 'needs_approval' or 'approved'.
ALTER TABLE lab_tests ADD COLUMN approval TEXT NOT NULL DEFAULT 'not_needed';
ALTER TABLE lab_tests ADD COLUMN approval_concerns_json TEXT NOT NULL DEFAULT '[]';
ALTER TABLE lab_tests ADD COLUMN approval_reason TEXT;
ALTER TABLE lab_tests ADD COLUMN approved_by TEXT;
ALTER TABLE lab_tests ADD COLUMN approved_at TEXT;
-- 0 for curves stored before these rules: the server re-checks them at start.
ALTER TABLE lab_tests ADD COLUMN quality_checked BIGINT NOT NULL DEFAULT 0;
-- What the stored fit warnings already tell: an unbracketed peak or a point above
-- zero air voids needs approval (the start-up re-check adds the other concerns).
UPDATE lab_tests SET approval = 'needs_approval'
 WHERE warnings_json LIKE '%"peak_not_bracketed"%'
    OR warnings_json LIKE '%"above_zero_air_voids"%'
    OR warnings_json LIKE '%"peak_above_zero_air_voids"%';

-- How moisture is judged: 'per_test' (the window, every test) or 'pwl' (two-sided).
ALTER TABLE clauses ADD COLUMN moisture_judgement TEXT NOT NULL DEFAULT 'per_test';
ALTER TABLE clauses ADD COLUMN moisture_min_pwl_pct DOUBLE PRECISION;
-- Relative compaction above this is flagged as implausible (common practice: 103 %).
ALTER TABLE clauses ADD COLUMN rc_plausible_max_pct DOUBLE PRECISION NOT NULL DEFAULT 103;
-- 'astm_e29' (round to the limit's written decimals, then compare) or 'absolute'.
ALTER TABLE clauses ADD COLUMN rounding TEXT NOT NULL DEFAULT 'astm_e29';
ALTER TABLE clauses ADD COLUMN limit_decimals BIGINT NOT NULL DEFAULT 1;

-- Oversize (ASTM D4718): the sieve the coarse fraction is retained on (4.75 or 19 mm) and
-- the coarse water content assumed when a test gives none. Existing clauses were judged
-- with 0 % assumed; that assumption is now written down (and shown as assumed).
ALTER TABLE clauses ADD COLUMN oversize_sieve_mm DOUBLE PRECISION NOT NULL DEFAULT 4.75;
ALTER TABLE clauses ADD COLUMN coarse_water_default_pct DOUBLE PRECISION;
UPDATE clauses SET coarse_water_default_pct = 0;

-- A quality-index lot re-sampled after rework is judged on its latest sample; tests
-- with ids up to sample_after_test_id belong to earlier samples and stay on record.
ALTER TABLE lots ADD COLUMN sample BIGINT NOT NULL DEFAULT 1;
ALTER TABLE lots ADD COLUMN sample_after_test_id BIGINT;
