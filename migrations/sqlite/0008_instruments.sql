-- The instrument register (organisation-wide): gauges, sand-cone apparatus, sand batches,
-- balloon and drive-cylinder volumes; their dated records, their assignments to projects,
-- the people licensed to run gauges, daily standard counts and material offsets.
CREATE TABLE instruments (
    id INTEGER PRIMARY KEY,
    kind TEXT NOT NULL CHECK (kind IN ('nuclear_gauge', 'sand_cone', 'sand_batch', 'balloon', 'drive_cylinder')),
    serial TEXT NOT NULL UNIQUE,
    description TEXT NOT NULL DEFAULT '',
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL
);

-- Dated records of an instrument: calibrations (with the calibrated value of its kind),
-- leak tests and licences. Never edited: a new record supersedes an older one.
CREATE TABLE instrument_records (
    id INTEGER PRIMARY KEY,
    instrument_id INTEGER NOT NULL REFERENCES instruments(id),
    kind TEXT NOT NULL CHECK (kind IN ('calibration', 'leak_test', 'licence')),
    done_on TEXT NOT NULL,
    due_on TEXT,
    reference TEXT NOT NULL DEFAULT '',
    cone_sand_mass_g REAL,
    sand_density_kg_m3 REAL,
    volume_cm3 REAL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL
);
CREATE INDEX instrument_records_by_instrument ON instrument_records (instrument_id, kind, done_on);

CREATE TABLE instrument_assignments (
    id INTEGER PRIMARY KEY,
    instrument_id INTEGER NOT NULL REFERENCES instruments(id),
    project_id INTEGER NOT NULL REFERENCES projects(id),
    from_on TEXT NOT NULL,
    to_on TEXT,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL
);
CREATE INDEX instrument_assignments_by_project ON instrument_assignments (project_id, from_on);

CREATE TABLE gauge_operators (
    id INTEGER PRIMARY KEY,
    code TEXT NOT NULL UNIQUE,
    name TEXT NOT NULL,
    certification TEXT NOT NULL,
    expires_on TEXT NOT NULL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL
);

CREATE TABLE standard_counts (
    id INTEGER PRIMARY KEY,
    instrument_id INTEGER NOT NULL REFERENCES instruments(id),
    project_id INTEGER NOT NULL REFERENCES projects(id),
    counted_on TEXT NOT NULL,
    density_count INTEGER NOT NULL,
    moisture_count INTEGER NOT NULL,
    outcome TEXT NOT NULL CHECK (outcome IN ('baseline', 'accepted', 'failed')),
    density_mean REAL,
    moisture_mean REAL,
    density_deviation_pct REAL,
    moisture_deviation_pct REAL,
    density_tolerance_pct REAL NOT NULL,
    moisture_tolerance_pct REAL NOT NULL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL
);
CREATE INDEX standard_counts_by_instrument ON standard_counts (instrument_id, counted_on, id);

-- A project's standard-count tolerances (absent: the defaults recalled in DOMAIN.md).
CREATE TABLE instrument_tolerances (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL UNIQUE REFERENCES projects(id),
    density_pct REAL NOT NULL,
    moisture_pct REAL NOT NULL,
    updated_at TEXT NOT NULL,
    updated_by TEXT NOT NULL
);

-- Whether a clause lets a test from an instrument out of check be recorded (marked,
-- out of the statistics, blocking submission) instead of refused.
CREATE TABLE clause_instrument_policy (
    id INTEGER PRIMARY KEY,
    clause_id INTEGER NOT NULL UNIQUE REFERENCES clauses(id),
    record_out_of_check INTEGER NOT NULL,
    updated_at TEXT NOT NULL,
    updated_by TEXT NOT NULL
);

CREATE TABLE gauge_offsets (
    id INTEGER PRIMARY KEY,
    instrument_id INTEGER NOT NULL REFERENCES instruments(id),
    source_id INTEGER NOT NULL REFERENCES sources(id),
    mode TEXT NOT NULL CHECK (mode IN ('direct_transmission', 'backscatter')),
    effective_on TEXT NOT NULL,
    density_offset_kg_m3 REAL NOT NULL,
    moisture_offset_pct REAL NOT NULL,
    pairs INTEGER NOT NULL,
    pairs_json TEXT NOT NULL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL
);

-- What the register said of a test's instrument when it was recorded. Tests stored before
-- this migration name no registered instrument: 'not_recorded'.
ALTER TABLE field_tests ADD COLUMN instrument_check TEXT NOT NULL DEFAULT 'not_recorded';
ALTER TABLE field_tests ADD COLUMN instrument_note TEXT;
ALTER TABLE field_tests ADD COLUMN operator_id INTEGER;
ALTER TABLE field_tests ADD COLUMN density_offset_kg_m3 REAL;
ALTER TABLE field_tests ADD COLUMN moisture_offset_pct REAL;
