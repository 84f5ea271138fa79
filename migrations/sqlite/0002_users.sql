-- Users, per-project memberships, sessions, API tokens, sign-in throttling,
-- and saved import column mappings.

CREATE TABLE users (
    id             INTEGER PRIMARY KEY,
    username       TEXT NOT NULL UNIQUE,
    display_name   TEXT NOT NULL,
    password_hash  TEXT NOT NULL,
    is_admin       INTEGER NOT NULL DEFAULT 0,
    is_demo        INTEGER NOT NULL DEFAULT 0,
    disabled_at    TEXT,
    created_at     TEXT NOT NULL
);

CREATE TABLE memberships (
    id          INTEGER PRIMARY KEY,
    user_id     INTEGER NOT NULL REFERENCES users(id),
    project_id  INTEGER NOT NULL REFERENCES projects(id),
    role        TEXT NOT NULL CHECK (role IN ('technician', 'qc_manager', 'client_engineer', 'viewer')),
    created_at  TEXT NOT NULL,
    UNIQUE (user_id, project_id)
);

-- Only the SHA-256 of a session token is stored.
CREATE TABLE sessions (
    id            INTEGER PRIMARY KEY,
    token_hash    TEXT NOT NULL UNIQUE,
    user_id       INTEGER NOT NULL REFERENCES users(id),
    created_at    TEXT NOT NULL,
    last_seen_at  TEXT NOT NULL,
    ended_at      TEXT
);
CREATE INDEX sessions_by_user ON sessions (user_id);

CREATE TABLE api_tokens (
    id            INTEGER PRIMARY KEY,
    project_id    INTEGER NOT NULL REFERENCES projects(id),
    role          TEXT NOT NULL CHECK (role IN ('technician', 'qc_manager', 'client_engineer', 'viewer')),
    name          TEXT NOT NULL,
    token_hash    TEXT NOT NULL UNIQUE,
    created_by    TEXT NOT NULL,
    created_at    TEXT NOT NULL,
    last_used_at  TEXT,
    revoked_at    TEXT
);

-- Failed sign-ins by user name and by address; read to slow repeated guesses.
CREATE TABLE sign_in_failures (
    id        INTEGER PRIMARY KEY,
    key       TEXT NOT NULL,
    at        TEXT NOT NULL
);
CREATE INDEX sign_in_failures_by_key ON sign_in_failures (key, at);

CREATE TABLE import_mappings (
    id            INTEGER PRIMARY KEY,
    project_id    INTEGER NOT NULL REFERENCES projects(id),
    name          TEXT NOT NULL,
    mapping_json  TEXT NOT NULL,
    created_at    TEXT NOT NULL,
    created_by    TEXT NOT NULL,
    UNIQUE (project_id, name)
);
