-- The lab's compaction moulds with their calibrated volumes: a specimen's dry density
-- is only as good as the volume it is divided by.
CREATE TABLE moulds (
    id INTEGER PRIMARY KEY,
    project_id INTEGER NOT NULL REFERENCES projects(id),
    code TEXT NOT NULL,
    volume_cm3 REAL NOT NULL,
    mass_g REAL,
    calibrated_on TEXT NOT NULL,
    created_at TEXT NOT NULL,
    created_by TEXT NOT NULL,
    UNIQUE (project_id, code)
);
