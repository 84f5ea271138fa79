-- Sign-off that cannot be forged or changed afterwards (issue 14).

-- A token names the user who made it and expires; it lives only while that user
-- is enabled and still holds a role in the project that contains the token's role.
ALTER TABLE api_tokens ADD COLUMN created_by_user_id INTEGER REFERENCES users(id);
ALTER TABLE api_tokens ADD COLUMN expires_at TEXT;
-- Tokens made before creators were recorded cannot show that their creator holds
-- their role (a QC manager could mint a client engineer's): they end here.
UPDATE api_tokens SET revoked_at = strftime('%Y-%m-%dT%H:%M:%SZ', 'now') WHERE revoked_at IS NULL;

-- An admin's reset (and the first admin's printed password) must be replaced at next sign-in.
ALTER TABLE users ADD COLUMN must_change_password INTEGER NOT NULL DEFAULT 0;

-- A reopened lot's certificate is withdrawn, with who, when and why.
ALTER TABLE certificates ADD COLUMN withdrawn_at TEXT;
ALTER TABLE certificates ADD COLUMN withdrawn_by TEXT;
ALTER TABLE certificates ADD COLUMN withdrawn_reason TEXT;
