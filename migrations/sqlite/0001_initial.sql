-- liftledger schema, version 1.
-- Nothing is deleted: tests are voided, lab curves superseded, lots move through states.
-- Times are RFC 3339 UTC text; densities kg/m³, water contents %, lengths metres.

CREATE TABLE projects (
    id              INTEGER PRIMARY KEY,
    code            TEXT NOT NULL UNIQUE,
    name            TEXT NOT NULL,
    contract        TEXT NOT NULL DEFAULT '',
    client          TEXT NOT NULL DEFAULT '',
    contractor      TEXT NOT NULL DEFAULT '',
    unit_system     TEXT NOT NULL CHECK (unit_system IN ('si', 'us')),
    chainage_style  TEXT NOT NULL CHECK (chainage_style IN ('km_metre', 'feet_station')),
    created_at      TEXT NOT NULL
);

CREATE TABLE clauses (
    id                   INTEGER PRIMARY KEY,
    project_id           INTEGER NOT NULL REFERENCES projects(id),
    code                 TEXT NOT NULL,
    title                TEXT NOT NULL DEFAULT '',
    rc_min_pct           REAL NOT NULL,
    moisture_below_pct   REAL NOT NULL,
    moisture_above_pct   REAL NOT NULL,
    effort               TEXT NOT NULL,
    rule                 TEXT NOT NULL CHECK (rule IN ('every_test', 'mean_and_min', 'quality_index')),
    allowance_pct        REAL,
    min_pwl_pct          REAL,
    area_per_test_m2     REAL,
    length_per_test_m    REAL,
    min_tests_per_lot    INTEGER NOT NULL,
    oversize_limit_pct   REAL NOT NULL,
    created_at           TEXT NOT NULL,
    UNIQUE (project_id, code)
);

CREATE TABLE sources (
    id                INTEGER PRIMARY KEY,
    project_id        INTEGER NOT NULL REFERENCES projects(id),
    code              TEXT NOT NULL,
    name              TEXT NOT NULL,
    description       TEXT NOT NULL DEFAULT '',
    uscs_class        TEXT NOT NULL DEFAULT '',
    aashto_class      TEXT NOT NULL DEFAULT '',
    gs_fines          REAL NOT NULL,
    gs_coarse         REAL,
    created_at        TEXT NOT NULL,
    UNIQUE (project_id, code)
);

CREATE TABLE lab_tests (
    id                          INTEGER PRIMARY KEY,
    source_id                   INTEGER NOT NULL REFERENCES sources(id),
    code                        TEXT NOT NULL,
    tested_on                   TEXT NOT NULL,
    effort                      TEXT NOT NULL,
    effort_energy_kj_m3         REAL NOT NULL,
    specific_gravity            REAL NOT NULL,
    points_json                 TEXT NOT NULL,
    max_dry_density_kg_m3       REAL NOT NULL,
    optimum_water_content_pct   REAL NOT NULL,
    fit_method                  TEXT NOT NULL,
    warnings_json               TEXT NOT NULL,
    reduction_version           TEXT NOT NULL,
    status                      TEXT NOT NULL CHECK (status IN ('active', 'superseded')),
    superseded_reason           TEXT,
    superseded_at               TEXT,
    created_at                  TEXT NOT NULL,
    created_by                  TEXT NOT NULL,
    UNIQUE (source_id, code)
);

CREATE TABLE zones (
    id          INTEGER PRIMARY KEY,
    project_id  INTEGER NOT NULL REFERENCES projects(id),
    name        TEXT NOT NULL,
    position    INTEGER NOT NULL,
    UNIQUE (project_id, name)
);

CREATE TABLE layers (
    id            INTEGER PRIMARY KEY,
    project_id    INTEGER NOT NULL REFERENCES projects(id),
    zone_id       INTEGER NOT NULL REFERENCES zones(id),
    number        INTEGER NOT NULL,
    thickness_mm  REAL,
    created_at    TEXT NOT NULL,
    UNIQUE (zone_id, number)
);

CREATE TABLE lots (
    id               INTEGER PRIMARY KEY,
    project_id       INTEGER NOT NULL REFERENCES projects(id),
    layer_id         INTEGER NOT NULL REFERENCES layers(id),
    code             TEXT NOT NULL,
    chainage_from_m  REAL NOT NULL,
    chainage_to_m    REAL NOT NULL,
    offset_left_m    REAL NOT NULL,
    offset_right_m   REAL NOT NULL,
    clause_id        INTEGER NOT NULL REFERENCES clauses(id),
    source_id        INTEGER NOT NULL REFERENCES sources(id),
    lab_test_id      INTEGER NOT NULL REFERENCES lab_tests(id),
    state            TEXT NOT NULL CHECK (state IN ('open', 'submitted', 'accepted', 'rejected')),
    state_changed_at TEXT NOT NULL,
    created_at       TEXT NOT NULL,
    created_by       TEXT NOT NULL,
    UNIQUE (project_id, code),
    CHECK (chainage_to_m > chainage_from_m),
    CHECK (offset_right_m > offset_left_m)
);
CREATE INDEX lots_by_layer ON lots (layer_id, chainage_from_m);
CREATE INDEX lots_by_state ON lots (project_id, state, state_changed_at);

CREATE TABLE field_tests (
    id                          INTEGER PRIMARY KEY,
    project_id                  INTEGER NOT NULL REFERENCES projects(id),
    lot_id                      INTEGER NOT NULL REFERENCES lots(id),
    number                      TEXT NOT NULL,
    tested_at                   TEXT NOT NULL,
    technician                  TEXT NOT NULL,
    method                      TEXT NOT NULL,
    instrument_serial           TEXT NOT NULL DEFAULT '',
    chainage_m                  REAL NOT NULL,
    offset_m                    REAL NOT NULL,
    depth_mm                    REAL,
    coarse_pct                  REAL,
    coarse_water_content_pct    REAL,
    easting                     REAL,
    northing                    REAL,
    readings_json               TEXT NOT NULL,
    wet_density_kg_m3           REAL NOT NULL,
    water_content_pct           REAL NOT NULL,
    dry_density_kg_m3           REAL NOT NULL,
    moisture_source             TEXT NOT NULL,
    reduction_version           TEXT NOT NULL,
    retest_of                   INTEGER REFERENCES field_tests(id),
    void_reason                 TEXT,
    voided_by                   TEXT,
    voided_at                   TEXT,
    created_at                  TEXT NOT NULL,
    created_by                  TEXT NOT NULL,
    UNIQUE (project_id, number)
);
CREATE INDEX field_tests_by_lot ON field_tests (lot_id, tested_at);
CREATE INDEX field_tests_by_project_time ON field_tests (project_id, tested_at);
CREATE INDEX field_tests_by_retest ON field_tests (retest_of);

CREATE TABLE lot_transitions (
    id          INTEGER PRIMARY KEY,
    lot_id      INTEGER NOT NULL REFERENCES lots(id),
    from_state  TEXT NOT NULL,
    to_state    TEXT NOT NULL,
    actor       TEXT NOT NULL,
    at          TEXT NOT NULL,
    comment     TEXT NOT NULL DEFAULT ''
);
CREATE INDEX lot_transitions_by_lot ON lot_transitions (lot_id, id);

CREATE TABLE certificates (
    id                 INTEGER PRIMARY KEY,
    project_id         INTEGER NOT NULL REFERENCES projects(id),
    lot_id             INTEGER NOT NULL REFERENCES lots(id),
    sequence           INTEGER NOT NULL,
    revision           INTEGER NOT NULL,
    number             TEXT NOT NULL,
    verification_code  TEXT NOT NULL UNIQUE,
    sha256             TEXT NOT NULL UNIQUE,
    record_fingerprint TEXT NOT NULL,
    pdf                BLOB NOT NULL,
    issued_at          TEXT NOT NULL,
    issued_by          TEXT NOT NULL,
    superseded_at      TEXT,
    UNIQUE (project_id, sequence, revision),
    UNIQUE (lot_id, revision)
);

-- Append-only: triggers below refuse UPDATE and DELETE.
CREATE TABLE audit_log (
    id           INTEGER PRIMARY KEY,
    at           TEXT NOT NULL,
    actor        TEXT NOT NULL,
    action       TEXT NOT NULL,
    entity       TEXT NOT NULL,
    entity_id    INTEGER,
    project_id   INTEGER,
    before_json  TEXT,
    after_json   TEXT,
    origin       TEXT NOT NULL DEFAULT ''
);
CREATE INDEX audit_by_entity ON audit_log (entity, entity_id, id);

CREATE TRIGGER audit_log_no_update BEFORE UPDATE ON audit_log
BEGIN
    SELECT RAISE(ABORT, 'audit_log is append-only');
END;

CREATE TRIGGER audit_log_no_delete BEFORE DELETE ON audit_log
BEGIN
    SELECT RAISE(ABORT, 'audit_log is append-only');
END;
