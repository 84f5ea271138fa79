-- More clause terms: the moisture window as points of OMC (the only form before, and the
-- default), as a percentage of OMC, or as an absolute range of water content; and an
-- optional maximum air-voids percentage. Existing clauses keep their points-of-OMC window.
ALTER TABLE clauses ADD COLUMN moisture_basis TEXT NOT NULL DEFAULT 'points_of_omc';
-- The window's bounds for the percent-of-OMC and absolute forms (percent); NULL otherwise.
ALTER TABLE clauses ADD COLUMN moisture_low_pct DOUBLE PRECISION;
ALTER TABLE clauses ADD COLUMN moisture_high_pct DOUBLE PRECISION;
ALTER TABLE clauses ADD COLUMN max_air_voids_pct DOUBLE PRECISION;
