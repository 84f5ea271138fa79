-- Where and what to test: random test-location plans, one-point checks and the clause terms
-- that govern them.

-- Clause terms: how far (metres) a test may stand from its nearest planned location before it
-- is flagged; whether a one-point check may be a test's reference; the window dry of optimum
-- (percentage points) a one-point must fall in.
ALTER TABLE clauses ADD COLUMN plan_tolerance_m REAL NOT NULL DEFAULT 5;
ALTER TABLE clauses ADD COLUMN one_point_allowed INTEGER NOT NULL DEFAULT 0;
ALTER TABLE clauses ADD COLUMN one_point_dry_window_pct REAL NOT NULL DEFAULT 4;

-- A lot's test-location plan, drawn when the lot is declared ready for testing. A replan
-- supersedes the current plan (superseded_at, superseded_reason) and keeps it on record.
CREATE TABLE test_plans (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id),
    lot_id INTEGER NOT NULL REFERENCES lots(id),
    revision INTEGER NOT NULL,
    seed INTEGER NOT NULL,
    location_count INTEGER NOT NULL,
    edge_m REAL NOT NULL,
    exclusions_json TEXT NOT NULL,
    locations_json TEXT NOT NULL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL,
    superseded_at TEXT,
    superseded_reason TEXT,
    UNIQUE (lot_id, revision)
);

-- A one-point compaction of field material at the reference effort, placed in its source's
-- family of curves; optionally the reference of the field test it was paired with.
CREATE TABLE one_point_checks (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id),
    source_id INTEGER NOT NULL REFERENCES sources(id),
    field_test_id INTEGER REFERENCES field_tests(id),
    code TEXT NOT NULL,
    tested_on TEXT NOT NULL,
    effort TEXT NOT NULL,
    water_content_pct REAL NOT NULL,
    dry_density_kg_m3 REAL NOT NULL,
    dry_window_pct REAL NOT NULL,
    max_dry_density_kg_m3 REAL NOT NULL,
    optimum_water_content_pct REAL NOT NULL,
    lower_lab_test_id INTEGER NOT NULL REFERENCES lab_tests(id),
    upper_lab_test_id INTEGER NOT NULL REFERENCES lab_tests(id),
    fraction REAL NOT NULL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL,
    UNIQUE (project_id, code),
    UNIQUE (field_test_id)
);
