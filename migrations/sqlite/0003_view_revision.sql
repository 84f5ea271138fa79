-- Every audited change bumps its project's revision, in the change's own transaction,
-- so whole-project views can be cached and known stale with one indexed read.
ALTER TABLE projects ADD COLUMN revision INTEGER NOT NULL DEFAULT 0;

CREATE TRIGGER audit_log_bumps_revision AFTER INSERT ON audit_log
WHEN NEW.project_id IS NOT NULL
BEGIN
    UPDATE projects SET revision = revision + 1 WHERE id = NEW.project_id;
END;

-- The project home lists a project's latest audit rows.
CREATE INDEX audit_by_project ON audit_log (project_id, id);

-- Whole-project views read a project's tests lot by lot in time order, from the index.
CREATE INDEX field_tests_by_project_lot ON field_tests (project_id, lot_id, tested_at, id);

-- Automatic test numbers follow the project's test count; keeping the count on the
-- project row spares every numbered insert a count over the project's tests.
ALTER TABLE projects ADD COLUMN field_test_count INTEGER NOT NULL DEFAULT 0;
UPDATE projects SET field_test_count = (SELECT COUNT(*) FROM field_tests WHERE field_tests.project_id = projects.id);

CREATE TRIGGER field_tests_count_up AFTER INSERT ON field_tests
BEGIN
    UPDATE projects SET field_test_count = field_test_count + 1 WHERE id = NEW.project_id;
END;

CREATE TRIGGER field_tests_count_down AFTER DELETE ON field_tests
BEGIN
    UPDATE projects SET field_test_count = field_test_count - 1 WHERE id = OLD.project_id;
END;
