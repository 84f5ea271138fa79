-- Each lot's judged summary is a row, so the lift map, the home page, the review queue
-- and the test list read verdicts instead of judging a project's tests on a view.
--
-- A change that can alter a lot's verdict marks the lot in `lots_to_judge`, in the
-- change's own transaction, by the triggers below (the one list of what affects a lot:
-- its tests, the lot itself, its certificates, its test plan, a one-point check of its
-- source, and edits of its clause, source or lab curve). The summary is judged again
-- from the marks (`ledger::lot_summaries::settle`) before any view reads it. A write
-- then touches no row other writers share: no project row, no counter held to commit.
CREATE TABLE lot_summaries (
    lot_id            INTEGER PRIMARY KEY REFERENCES lots(id) ON DELETE CASCADE,
    project_id        INTEGER NOT NULL REFERENCES projects(id),
    reduction_version TEXT NOT NULL,
    display_state     TEXT NOT NULL,
    accepted          INTEGER NOT NULL,
    tests_entered     INTEGER NOT NULL,
    tests_owed        INTEGER NOT NULL,
    judged_json       TEXT NOT NULL,
    -- Each test's result by result code, for the test list's result filter.
    test_results      TEXT NOT NULL,
    judged_at         TEXT NOT NULL,
    -- The newest mark this summary was judged from.
    judged_mark       INTEGER NOT NULL
);
CREATE INDEX lot_summaries_by_project ON lot_summaries (project_id, display_state);

CREATE TABLE lots_to_judge (
    id         INTEGER PRIMARY KEY AUTOINCREMENT,
    project_id INTEGER NOT NULL,
    lot_id     INTEGER NOT NULL
);
CREATE INDEX lots_to_judge_by_project ON lots_to_judge (project_id, lot_id);
CREATE INDEX lots_to_judge_by_lot ON lots_to_judge (lot_id);

-- Every existing lot is judged once, by the first view or by `liftledger rejudge`.
INSERT INTO lots_to_judge (project_id, lot_id) SELECT project_id, id FROM lots;

-- Marks are only appended, never merged into an earlier one: a settling judges the lots
-- before it takes the write lock and clears exactly the marks it read, so a mark written
-- meanwhile must stay for the next one.
CREATE TRIGGER field_test_added_marks_lot AFTER INSERT ON field_tests
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.lot_id;
END;

CREATE TRIGGER field_test_changed_marks_lots AFTER UPDATE ON field_tests
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.lot_id;
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT OLD.project_id, OLD.lot_id
    WHERE OLD.lot_id <> NEW.lot_id;
END;

CREATE TRIGGER field_test_removed_marks_lot AFTER DELETE ON field_tests
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT OLD.project_id, OLD.lot_id;
END;

CREATE TRIGGER lot_added_marks_lot AFTER INSERT ON lots
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id) VALUES (NEW.project_id, NEW.id);
END;

CREATE TRIGGER lot_changed_marks_lot AFTER UPDATE ON lots
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.id;
END;

CREATE TRIGGER certificate_added_marks_lot AFTER INSERT ON certificates
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.lot_id;
END;

CREATE TRIGGER certificate_changed_marks_lot AFTER UPDATE ON certificates
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.lot_id;
END;

CREATE TRIGGER test_plan_added_marks_lot AFTER INSERT ON test_plans
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.lot_id;
END;

CREATE TRIGGER test_plan_changed_marks_lot AFTER UPDATE ON test_plans
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT NEW.project_id, NEW.lot_id;
END;

CREATE TRIGGER one_point_added_marks_lots AFTER INSERT ON one_point_checks
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE l.project_id = NEW.project_id AND l.source_id = NEW.source_id;
END;

CREATE TRIGGER one_point_changed_marks_lots AFTER UPDATE ON one_point_checks
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE l.project_id = NEW.project_id AND l.source_id IN (NEW.source_id, OLD.source_id);
END;

CREATE TRIGGER one_point_removed_marks_lots AFTER DELETE ON one_point_checks
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE l.project_id = OLD.project_id AND l.source_id = OLD.source_id;
END;

CREATE TRIGGER lab_test_changed_marks_lots AFTER UPDATE ON lab_tests
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE l.lab_test_id = NEW.id;
END;

CREATE TRIGGER clause_changed_marks_lots AFTER UPDATE ON clauses
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE l.clause_id = NEW.id;
END;

CREATE TRIGGER source_changed_marks_lots AFTER UPDATE ON sources
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE l.source_id = NEW.id;
END;

-- The project's revision now moves when its summaries are judged again (the settling
-- bumps it), not on every audited write: bumping it there put one row lock, held to
-- the commit, in front of every writer of the project.
DROP TRIGGER audit_log_bumps_revision;

-- Automatic test numbers come from a counter per project, taken with one short
-- UPDATE … RETURNING (see `db::numbering`), instead of a count kept on the project row
-- by a trigger on every insert.
DROP TRIGGER field_tests_count_up;
DROP TRIGGER field_tests_count_down;
CREATE TABLE test_counters (
    project_id  INTEGER PRIMARY KEY REFERENCES projects(id) ON DELETE CASCADE,
    last_number INTEGER NOT NULL
);
INSERT INTO test_counters (project_id, last_number) SELECT id, field_test_count FROM projects;
ALTER TABLE projects DROP COLUMN field_test_count;
CREATE TRIGGER project_added_counts_tests AFTER INSERT ON projects
BEGIN
    INSERT INTO test_counters (project_id, last_number) VALUES (NEW.id, 0);
END;

-- The instrument register's revision: every change of a register table moves it, so a
-- server keeps the register a project's tests are checked against and reads one number
-- per test instead of the register's seven tables. Register changes are rare; the row
-- they update is nobody else's.
CREATE TABLE register_revision (
    id       INTEGER PRIMARY KEY CHECK (id = 1),
    revision INTEGER NOT NULL
);
INSERT INTO register_revision (id, revision) VALUES (1, 0);
CREATE TRIGGER instruments_insert_moves_register AFTER INSERT ON instruments
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instruments_update_moves_register AFTER UPDATE ON instruments
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instruments_delete_moves_register AFTER DELETE ON instruments
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_records_insert_moves_register AFTER INSERT ON instrument_records
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_records_update_moves_register AFTER UPDATE ON instrument_records
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_records_delete_moves_register AFTER DELETE ON instrument_records
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_assignments_insert_moves_register AFTER INSERT ON instrument_assignments
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_assignments_update_moves_register AFTER UPDATE ON instrument_assignments
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_assignments_delete_moves_register AFTER DELETE ON instrument_assignments
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER gauge_operators_insert_moves_register AFTER INSERT ON gauge_operators
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER gauge_operators_update_moves_register AFTER UPDATE ON gauge_operators
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER gauge_operators_delete_moves_register AFTER DELETE ON gauge_operators
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER standard_counts_insert_moves_register AFTER INSERT ON standard_counts
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER standard_counts_update_moves_register AFTER UPDATE ON standard_counts
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER standard_counts_delete_moves_register AFTER DELETE ON standard_counts
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_tolerances_insert_moves_register AFTER INSERT ON instrument_tolerances
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_tolerances_update_moves_register AFTER UPDATE ON instrument_tolerances
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER instrument_tolerances_delete_moves_register AFTER DELETE ON instrument_tolerances
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER clause_instrument_policy_insert_moves_register AFTER INSERT ON clause_instrument_policy
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER clause_instrument_policy_update_moves_register AFTER UPDATE ON clause_instrument_policy
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER clause_instrument_policy_delete_moves_register AFTER DELETE ON clause_instrument_policy
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER gauge_offsets_insert_moves_register AFTER INSERT ON gauge_offsets
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER gauge_offsets_update_moves_register AFTER UPDATE ON gauge_offsets
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
CREATE TRIGGER gauge_offsets_delete_moves_register AFTER DELETE ON gauge_offsets
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
END;
