-- Idempotency keys of field tests sent from the site app's offline queue (the
-- Idempotency-Key header): each key is stored once, in the transaction of the test it
-- made, so a repeat is answered with that test instead of a second one.
CREATE TABLE idempotency_keys (
    id INTEGER PRIMARY KEY,
    idempotency_key TEXT NOT NULL UNIQUE,
    lot_id INTEGER NOT NULL REFERENCES lots(id),
    field_test_id INTEGER REFERENCES field_tests(id),
    request_sha256 TEXT NOT NULL,
    created_by TEXT NOT NULL,
    created_at TEXT NOT NULL
);
